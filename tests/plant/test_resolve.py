"""The resolution step: every check past the parser, reported in the layout's error form; one home per quantity."""

from __future__ import annotations

import shutil
import tomllib
import warnings
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from airtaper.cli.main import main
from airtaper.errors import EXIT_INPUT, InputError
from airtaper.layout import load_layout, parse_layout
from airtaper.layout.bsm1 import bsm1_layout
from airtaper.layout.types import Recycle
from airtaper.physics.atmosphere import barometric_pressure_kPa
from airtaper.plant import DiffusedZone, FixedKla, load_plant, resolve_plant
from airtaper.simulate.plant import PlantData

ROOT = Path(__file__).resolve().parents[2]
LAYOUTS = ROOT / "layouts"
E = "error: bad.toml: "


@pytest.fixture
def demo_data():
    with open(LAYOUTS / "demo.toml", "rb") as f:
        return tomllib.load(f)


def _errors(data) -> list[str]:
    """Problems of a layout dict that parses: those of the resolution step."""
    layout = parse_layout(data, "bad.toml", LAYOUTS)
    with pytest.raises(InputError) as info:
        resolve_plant(layout)
    return [str(p) for p in info.value.problems]


def _three_sote_points(d):
    """Three points varying airflow, density and submergence: four parameters to fit."""
    d["diffuser_types"][0]["sote_points"] = [
        {"airflow_per_diffuser_Sm3_h": 1.0, "sote_percent": 30.0, "density_percent": 8.0, "submergence_m": 4.0},
        {"airflow_per_diffuser_Sm3_h": 3.0, "sote_percent": 28.0, "density_percent": 12.0, "submergence_m": 5.0},
        {"airflow_per_diffuser_Sm3_h": 5.0, "sote_percent": 27.0, "density_percent": 20.0, "submergence_m": 6.0}]


SOTE_LINE = (E + "diffuser_types.disc_040.sote_points: fewer test points than fitted parameters (got 3, expected at "
             "least 4 points)")


def test_the_sote_fit_is_checked_at_resolution_and_names_the_layout_file(demo_data):
    _three_sote_points(demo_data)
    assert _errors(demo_data) == [SOTE_LINE]


def test_the_tkn_fractionation_is_checked_at_resolution(demo_data):
    # XBH at 30 % of COD carries i_XB = 0.086 g N/g COD (Henze et al. 1987, ASM1 typical value):
    # more N than the demo influent's TKN leaves after NH4-N in most periods.
    demo_data["influent"]["fractionation"]["xbh_of_cod"] = 0.3
    lines = _errors(demo_data)
    assert lines and all(line.startswith(E + "influent.tkn_mg_L, period ") for line in lines)
    assert "TKN is below NH4-N plus the N in biomass and inerts" in lines[0]
    assert lines[0].endswith("expected SND >= 0)")


def test_every_resolution_problem_is_listed_at_once(demo_data):
    _three_sote_points(demo_data)
    demo_data["influent"]["fractionation"]["xbh_of_cod"] = 0.3
    lines = _errors(demo_data)
    assert SOTE_LINE in lines
    assert any(line.startswith(E + "influent.tkn_mg_L, period 1:") for line in lines)


def test_a_zone_left_with_no_forward_flow_is_an_input_error():
    """The parser allows a forward flow of exactly 0; a completely mixed reactor needs flow through it."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        layout = load_layout(LAYOUTS / "demo.toml")
    # a second recycle drawing all of Z2's forward flow on to Z4: nothing is left to flow from Z2 to Z3
    fwd = resolve_plant(layout).hydraulics.forward_m3_d[:, layout.zone_index("Z2")]
    extra = Recycle("BY", "Z2", "Z4", tuple(float(q) for q in fwd), None)
    bad = replace(layout, path="bad.toml", recycles=layout.recycles + (extra,))
    with pytest.raises(InputError) as info:
        resolve_plant(bad)
    lines = [str(p) for p in info.value.problems]
    assert lines[0] == (E + "zones.Z2: the recycles drawn from this zone exceed the flow through it in period 1 "
                        "(got 0.0, expected a positive forward flow)")


def test_check_rejects_what_optimize_would_reject(tmp_path, capsys):
    """`airtaper check` runs the resolution: exit 2 with the one-line message, no traceback."""
    shutil.copy(LAYOUTS / "demo_influent.csv", tmp_path / "demo_influent.csv")
    path = tmp_path / "bad.toml"
    path.write_text(_demo_text_with_three_sote_points())
    code = main(["check", str(path), "--no-prescreen"])
    err = capsys.readouterr().err
    assert code == EXIT_INPUT
    assert SOTE_LINE.replace("bad.toml", str(path)) in err.splitlines()
    assert "Traceback" not in err


def test_a_problem_at_an_overridden_key_names_the_override_file(tmp_path, demo_data, capsys):
    shutil.copy(LAYOUTS / "demo_influent.csv", tmp_path / "demo_influent.csv")
    shutil.copy(LAYOUTS / "demo.toml", tmp_path / "demo.toml")
    ov = tmp_path / "ov.toml"
    ov.write_text("[diffuser_types.disc_040]\n" + THREE_POINTS_TOML)
    with pytest.raises(InputError) as info:
        load_plant(tmp_path / "demo.toml", ov)
    assert [str(p) for p in info.value.problems] == [SOTE_LINE.replace("bad.toml", str(ov))]


def test_the_simulator_names_the_layout_file_for_a_fit_error(demo_data):
    _three_sote_points(demo_data)
    layout = parse_layout(demo_data, "bad.toml", LAYOUTS)
    with pytest.raises(InputError) as info:
        PlantData(layout)
    assert [str(p) for p in info.value.problems] == [SOTE_LINE]


# --- one home per quantity ---------------------------------------------------------------------
def test_site_and_inlet_pressure(demo_data):
    plant = load_plant(LAYOUTS / "demo.toml")
    lay = plant.layout
    if lay.plant.barometric_pressure_kPa is None:
        # US Standard Atmosphere 1976 (NOAA/NASA/USAF), through the project's physics function
        assert plant.site_pressure_kPa == pytest.approx(float(barometric_pressure_kPa(lay.plant.elevation_m)))
    inlet = lay.inlet_air.pressure_kPa if lay.inlet_air.pressure_kPa is not None else plant.site_pressure_kPa
    assert plant.air.inlet_pressure_kPa == pytest.approx(inlet - lay.inlet_air.filter_loss_kPa)


def test_a_layout_is_resolved_once_and_shared():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        layout = load_layout(LAYOUTS / "demo.toml")
    a = resolve_plant(layout)
    assert resolve_plant(layout) is a
    assert resolve_plant(a) is a
    with pytest.raises(ValueError):
        a.hydraulics.forward_m3_d[0, 0] = 1.0  # shared by every layer: read-only


def test_diffused_zones_and_the_kla_rule():
    plant = load_plant(LAYOUTS / "demo.toml")
    lay = plant.layout
    expect = [z.id for z in lay.zones if z.aerated and z.grid is not None and z.fixed_kla_per_d is None]
    assert [d.id for d in plant.diffused] == expect
    assert all(plant.has_diffusers(z) == (z.id in expect) for z in lay.zones)
    d = plant.diffused[0]
    q = np.linspace(d.airflow_min_Sm3_h, d.airflow_max_Sm3_h, 5)
    kla = d.kla_per_d(q, 15.0)
    assert np.all(np.diff(kla) > 0)  # more air, more transfer (SOTE falls slower than the airflow rises)
    # doubling the diffusers at the same airflow halves the airflow per diffuser and doubles the density:
    # the fitted curve's SOTE rises, so the kLa does
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # twice the density is beyond the tested range: extrapolated
        assert float(d.kla_per_d(q[2], 15.0, diffusers=2 * d.diffusers)) > float(kla[2])
    # alpha x F enters linearly (ASCE/EWRI 2-06 field correction: kLa_field = alpha F kLa20 theta^(T-20))
    assert float(d.kla_per_d(q[2], 15.0, alpha_fouling=0.5 * d.alpha * d.fouling)) == pytest.approx(0.5 * kla[2])


def test_benchmark_plant_built_in_code_resolves():
    plant = resolve_plant(bsm1_layout(n_periods=2))
    kinds = [type(a) for a in plant.aeration]
    assert FixedKla in kinds and DiffusedZone not in kinds
    assert plant.diffused == ()


# --- hydraulics: the water balance ------------------------------------------------------------
@settings(max_examples=40, deadline=None)
@given(ir=st.floats(0.0, 4.0), ras=st.floats(0.2, 1.5), shape=st.lists(st.floats(0.5, 1.6), min_size=24, max_size=24))
def test_every_zone_and_the_train_balance_water(ir, ras, shape):
    """Conservation of water: each zone's inflow equals its outflow; clarifier feed = influent + return sludge."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        layout = _demo_layout()
    q = tuple(layout.influent.mean_flow_m3_d * f for f in shape)
    rec = tuple(replace(r, flow_m3_d=tuple(ir * x for x in q)) for r in layout.recycles)
    rs = replace(layout.return_sludge, flow_m3_d=tuple(ras * x for x in q))
    plant = resolve_plant(replace(layout, influent=replace(layout.influent, flow_m3_d=q), recycles=rec,
                                  return_sludge=rs))
    h = plant.hydraulics
    inflow = h.feed_fraction[None, :] * h.influent_m3_d[:, None]
    inflow[:, 1:] += h.forward_m3_d[:, :-1]
    outflow = h.forward_m3_d.copy()
    for src, dst, f in h.recycles:
        inflow[:, dst] += f
        outflow[:, src] += f
    inflow[:, h.ras_zone] += h.ras_m3_d
    np.testing.assert_allclose(inflow, h.zone_flow_m3_d, rtol=1e-12)
    np.testing.assert_allclose(outflow, h.zone_flow_m3_d, rtol=1e-12)
    np.testing.assert_allclose(h.feed_m3_d, h.influent_m3_d + h.ras_m3_d, rtol=1e-12)


_DEMO = []


def _demo_layout():
    if not _DEMO:
        _DEMO.append(load_layout(LAYOUTS / "demo.toml"))
    return _DEMO[0]


THREE_POINTS_TOML = """sote_points = [
  { airflow_per_diffuser_Sm3_h = 1.0, sote_percent = 30.0, density_percent = 8.0, submergence_m = 4.0 },
  { airflow_per_diffuser_Sm3_h = 3.0, sote_percent = 28.0, density_percent = 12.0, submergence_m = 5.0 },
  { airflow_per_diffuser_Sm3_h = 5.0, sote_percent = 27.0, density_percent = 20.0, submergence_m = 6.0 },
]
"""


def _demo_text_with_three_sote_points() -> str:
    text = (LAYOUTS / "demo.toml").read_text()
    start = text.index("sote_points = [")
    end = text.index("headloss_points = [")
    return text[:start] + THREE_POINTS_TOML + text[end:]


def test_the_mean_day_flows_are_the_flows_of_the_mean_inputs():
    """Flows are linear in the inputs: the daily mean of the resolved flows is the resolution of the daily means."""
    layout = _demo_layout()
    plant = resolve_plant(layout)
    mean = plant.hydraulics.over(lambda a: a.mean(axis=0, keepdims=True))
    flat = resolve_plant(replace(
        layout, influent=replace(layout.influent, flow_m3_d=(float(np.mean(layout.influent.flow_m3_d)),) * 24),
        recycles=tuple(replace(r, flow_m3_d=(float(np.mean(r.flow_m3_d)),) * 24) for r in layout.recycles),
        return_sludge=replace(layout.return_sludge,
                              flow_m3_d=(float(np.mean(layout.return_sludge.flow_m3_d)),) * 24)))
    np.testing.assert_allclose(mean.forward_m3_d[0], flat.hydraulics.forward_m3_d[0], rtol=1e-12)
    np.testing.assert_allclose(mean.zone_flow_m3_d[0], flat.hydraulics.zone_flow_m3_d[0], rtol=1e-12)


def test_one_cost_formula_for_numbers_and_the_dispatch_bill():
    """The day's cost: energy at each period's price plus the billing period's demand charge spread over its days."""
    from airtaper.optimize.dispatch import Bill

    plant = resolve_plant(_demo_layout())
    air = plant.air
    power = np.linspace(80.0, 140.0, plant.n_periods)
    t = plant.tariff
    by_hand = sum(pr * p * plant.period_h for pr, p in zip(t.price_per_kWh, power)) \
        + t.demand_charge_per_kW / t.demand_period_days * power.max()
    assert air.cost(power) == pytest.approx(by_hand, rel=1e-12)
    assert Bill.of(plant.layout, "cost").demand_per_kW_day == pytest.approx(t.demand_charge_per_kW / t.demand_period_days)


def test_every_load_day_is_checked_as_a_plant_of_its_own():
    """A bypass recycle given as a flow keeps its flow on a low-flow day: that day leaves Z2 no forward flow."""
    from airtaper.layout.loaddays import base_day

    layout = _demo_layout()
    fwd = resolve_plant(layout).hydraulics.forward_m3_d[:, layout.zone_index("Z2")]
    bypass = Recycle("BY", "Z2", "Z4", tuple(0.5 * float(q) for q in fwd), None)  # half of Z2's flow: fine
    base = replace(layout, path="bad.toml", recycles=layout.recycles + (bypass,), load_days=())
    assert resolve_plant(base).hydraulics.forward_m3_d.min() > 0.0
    low = replace(base_day(base), id="low", flow_factor=0.3, load_factor=0.3)
    with pytest.raises(InputError) as info:
        resolve_plant(replace(base, load_days=(low,)))
    lines = [str(p) for p in info.value.problems]
    assert lines[0].startswith(E + "load_days.low, zones.Z2: the recycles drawn from this zone exceed")
    assert all(line.startswith(E + "load_days.low, zones.") for line in lines)


def test_a_design_grid_variant_is_the_plant_resolved_with_the_new_counts(demo):
    """The counts reach every count-dependent quantity of the zone (density, range, kLa) and nothing else moves."""
    from airtaper.plant import with_diffuser_counts

    z = demo.diffused[0]
    other = demo.diffused[1]
    variant = with_diffuser_counts(demo, {z.id: 2 * z.diffusers})
    v = variant.air.zone(z.id)
    assert v.diffusers == 2 * z.diffusers and demo.air.zone(z.id).diffusers == z.diffusers  # the plant is unchanged
    assert v.density_percent == pytest.approx(2 * z.density_percent)
    q = 0.5 * (z.airflow_min_Sm3_h + z.airflow_max_Sm3_h)
    assert v.kla_per_d(q, 15.0) == pytest.approx(z.kla_per_d(q, 15.0, diffusers=2 * z.diffusers))
    assert v.kla_per_d(q, 15.0) != pytest.approx(z.kla_per_d(q, 15.0))
    assert variant.air.zone(other.id).diffusers == other.diffusers
    np.testing.assert_array_equal(variant.hydraulics.zone_flow_m3_d, demo.hydraulics.zone_flow_m3_d)


def test_design_fields_of_the_plant():
    """What a grid design reads: capital, load days, per zone its type, count step and design count range."""
    from airtaper.plant.resolve import design_count_range
    plant = load_plant(LAYOUTS / "demo.toml")
    lay = plant.layout
    assert plant.capital == lay.capital and plant.load_days == lay.load_days
    for d in plant.diffused:
        dt = lay.diffuser_type(d.zone.grid.type_id)
        assert d.diffuser_type is dt and d.count_step == d.zone.grid.count_step
        assert d.density_percent_at(d.diffusers) == pytest.approx(d.density_percent)
        lo, hi = d.count_range
        assert lo % d.count_step == 0 and hi % d.count_step == 0 and lo <= hi
    # 0.027 % a diffuser, tested 6-15 %: 222.2-555.6 diffusers -> whole steps inside (arithmetic)
    assert design_count_range(100, 0.027, [6.0, 15.0]) == (300, 500)
    assert design_count_range(1, 0.027, [6.0, 15.0]) == (223, 555)
    # no whole step of 1000 inside the tested range: one step up to the practical maximum density (25 % is 925
    # diffusers, below one step, so the range is the one step)
    assert design_count_range(1000, 0.027, [6.0, 15.0]) == (1000, 1000)
    assert design_count_range(300, 0.027, [6.0, 7.0]) == (300, 900)  # 25 % is 925.9 diffusers


def test_design_count_range_stays_finite_for_a_diffuser_of_next_to_no_area():
    """A membrane area of 1e-320 m2 (a fuzzed layout: a denormal number passes the parser's > 0 check) made the
    count to a tested density infinite and `check` end in an internal OverflowError; the range is capped."""
    from airtaper.plant.resolve import COUNT_CAP, design_count_range
    lo, hi = design_count_range(100, 100.0 * 1e-320 / 600.0, [6.0, 15.0])
    assert lo == hi == COUNT_CAP  # every density needs more diffusers than any basin holds: the cap
    lo, hi = design_count_range(1, 1e-300, [6.0, 15.0])
    assert 1 <= lo <= hi <= COUNT_CAP
