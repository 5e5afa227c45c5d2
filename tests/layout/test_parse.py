"""The two shipped layouts load, round-trip through layout_to_data, and carry the numbers they were sized with."""

from __future__ import annotations

import dataclasses
import tomllib
from pathlib import Path

import pytest

from airtaper.layout import layout_to_data, load_layout, parse_layout
from airtaper.layout import defaults as D
from airtaper.layout.types import Layout

LAYOUTS = Path(__file__).resolve().parents[2] / "layouts"
DEMO = LAYOUTS / "demo.toml"
THREE_TANK = LAYOUTS / "three_tank.toml"
FENWHISTLE = LAYOUTS / "fenwhistle.toml"


@pytest.mark.parametrize("path", [DEMO, THREE_TANK, FENWHISTLE], ids=["demo", "three_tank", "fenwhistle"])
def test_round_trip_gives_an_equal_layout(path):
    warnings: list = []
    layout = load_layout(path, warnings=warnings)
    assert warnings == []
    again = parse_layout(layout_to_data(layout), layout.path, LAYOUTS)
    assert again == layout


@pytest.mark.parametrize("path", [DEMO, THREE_TANK, FENWHISTLE], ids=["demo", "three_tank", "fenwhistle"])
def test_dump_is_plain_data(path):
    data = layout_to_data(load_layout(path))

    def walk(x):
        if isinstance(x, dict):
            assert all(isinstance(k, str) for k in x)
            for v in x.values():
                walk(v)
        elif isinstance(x, list):
            for v in x:
                walk(v)
        else:
            assert isinstance(x, (str, int, float, bool)), x
    walk(data)


def test_demo_numbers():
    layout = load_layout(DEMO)
    assert isinstance(layout, Layout)
    assert [z.id for z in layout.zones] == ["Z1", "Z2", "Z3", "Z4", "Z5", "Z6"]
    assert [z.kind for z in layout.zones] == ["anoxic"] + ["aerated"] * 5
    assert layout.zones[0].grid is None and layout.zones[0].do_min_mg_L is None
    counts = [z.grid.count for z in layout.zones[1:]]
    assert counts == sorted(counts, reverse=True)  # tapered: most diffusers first
    assert sum(z.volume_m3 for z in layout.zones) == 5600.0
    assert layout.influent.mean_flow_m3_d == pytest.approx(12000.0, rel=1e-3)
    assert layout.horizon.n_periods == 24 and layout.horizon.steps_per_period == 4
    for z in layout.zones[1:]:
        assert 5.0 <= layout.diffuser_density_percent(z) <= 20.0
        assert z.do_min_mg_L == 1.0  # from [limits] do_min_mg_L
        assert z.area_m2 == pytest.approx(900.0 / 5.5)
    assert layout.zones[5].do_max_mg_L == 2.5
    assert layout.recycles[0].ratio == 2.5
    assert layout.recycles[0].flow_m3_d == tuple(2.5 * q for q in layout.influent.flow_m3_d)
    assert layout.wasting.srt_d == 11.0 and layout.wasting.flow_m3_d is None
    assert len(layout.blowers) == 3
    assert layout.operation.objective == "cost"
    # defaults filled in
    assert layout.zones[2].beta == D.BETA and layout.kinetics.parameter_set == "asm1_20C"
    assert layout.header.min_valve_loss_kPa == D.MIN_VALVE_LOSS_kPa


def test_demo_tariff_bands_resolve_to_hourly_prices():
    t = load_layout(DEMO).tariff
    assert t.price_per_kWh[0] == 0.085 and t.price_per_kWh[6] == 0.085
    assert t.price_per_kWh[7] == 0.145 and t.price_per_kWh[16] == 0.235 and t.price_per_kWh[19] == 0.235
    assert t.price_per_kWh[20] == 0.145 and t.price_per_kWh[23] == 0.085


def test_demo_influent_matches_the_csv_rows():
    inf = load_layout(DEMO).influent
    assert inf.source == "demo_influent.csv"
    # hourly rows on an hourly horizon: the period values are the rows themselves
    assert inf.flow_m3_d[4] == 6470.0 and inf.nh4_mg_L[11] == 37.5 and inf.cod_total_mg_L[0] == 439.0
    assert min(inf.flow_m3_d) / inf.mean_flow_m3_d == pytest.approx(0.539, abs=1e-3)


def test_three_tank_numbers():
    layout = load_layout(THREE_TANK)
    assert [z.kind for z in layout.zones] == ["aerated"] * 3
    assert layout.tariff is None and layout.operation.objective == "energy"
    assert layout.influent.source == "constant" and layout.influent.flow_m3_d == (3000.0,) * 24
    assert layout.wasting.flow_m3_d == (45.0,) * 24
    assert layout.step_feed[0].zone == "T1" and layout.step_feed[0].fraction == 1.0
    assert layout.return_sludge.flow_m3_d == (3000.0,) * 24


def test_coarser_horizon_keeps_volume_and_loads(demo_data):
    """Period means of the CSV are interval means: flow by time, concentrations by flow."""
    demo_data["horizon"] = {"n_periods": 6}
    demo_data["inlet_air"]["temperature_C"] = 20.0
    six = parse_layout(demo_data, "six.toml", LAYOUTS)
    hourly = load_layout(DEMO)
    assert six.horizon.period_h == 4.0
    assert sum(six.influent.flow_m3_d) * 4 == pytest.approx(sum(hourly.influent.flow_m3_d))
    load6 = sum(q * c for q, c in zip(six.influent.flow_m3_d, six.influent.nh4_mg_L)) * 4
    load24 = sum(q * c for q, c in zip(hourly.influent.flow_m3_d, hourly.influent.nh4_mg_L))
    assert load6 == pytest.approx(load24)
    assert six.influent.flow_m3_d[1] == pytest.approx(sum(hourly.influent.flow_m3_d[4:8]) / 4)


def test_constant_influent_and_per_period_lists(three_data):
    three_data["plant"]["water_temperature_C"] = [12.0 + 0.1 * i for i in range(24)]
    three_data["influent"]["flow_m3_d"] = [2000.0 + 100.0 * (i % 3) for i in range(24)]
    layout = parse_layout(three_data, "x.toml", LAYOUTS)
    assert layout.plant.temperature_C[5] == pytest.approx(12.5)
    assert layout.influent.flow_m3_d[:3] == (2000.0, 2100.0, 2200.0)


def test_fractions_default_when_not_given(three_data):
    f = parse_layout(three_data, "x.toml", LAYOUTS).influent.fractionation
    assert (f.si_of_cod, f.xi_of_cod, f.xbh_of_cod, f.xba_of_cod, f.snd_of_organic_n, f.sno_mg_L) == (
        D.SI_OF_COD, D.XI_OF_COD, D.XBH_OF_COD, D.XBA_OF_COD, D.SND_OF_ORGANIC_N, D.SNO_mg_L)


def test_asm1_influent_derives_the_measured_quantities(three_data):
    for k in ("cod_total_mg_L", "cod_soluble_mg_L", "tkn_mg_L", "nh4_mg_L", "tss_mg_L", "alkalinity_mol_m3"):
        del three_data["influent"][k]
    comps = {"SI": 30.0, "SS": 70.0, "XI": 50.0, "XS": 200.0, "XBH": 30.0, "XBA": 0.0, "XP": 0.0, "SO": 0.0,
             "SNO": 0.0, "SNH": 30.0, "SND": 7.0, "XND": 10.0, "SALK": 7.0}
    three_data["influent"]["asm1"] = comps
    layout = parse_layout(three_data, "x.toml", LAYOUTS)
    inf = layout.influent
    assert inf.asm1_mg_L[0] == tuple(comps.values())
    assert inf.cod_total_mg_L[0] == 380.0 and inf.cod_soluble_mg_L[0] == 100.0
    assert inf.tss_mg_L[0] == pytest.approx(0.75 * 280.0)
    assert inf.tkn_mg_L[0] == pytest.approx(47.0 + D.DISPLAY_I_XB * 30.0 + D.DISPLAY_I_XP * 50.0)
    assert parse_layout(layout_to_data(layout), "x.toml", LAYOUTS) == layout


def test_layered_clarifier_defaults_are_the_bsm1_values(three_data):
    # Alex et al. (2008), BSM1: 10 layers, Takacs parameters v0' 250, v0 474, rh 0.000576, rp 0.00286,
    # fns 0.00228, Xt 3000; feed at the 6th layer from the bottom.
    three_data["clarifier"] = {"kind": "layered", "area_m2": 1500.0, "height_m": 4.0}
    c = parse_layout(three_data, "x.toml", LAYOUTS).clarifier
    assert (c.layers, c.feed_layer) == (10, 5)
    s = c.settling
    assert (s.v0_max_m_d, s.v0_m_d, s.rh_m3_g, s.rp_m3_g, s.fns, s.x_threshold_g_m3) == (
        250.0, 474.0, 0.000576, 0.00286, 0.00228, 3000.0)


def test_fixed_kla_zone_needs_no_grid(three_data):
    z = three_data["zones"][2]
    del z["grid"]
    z["fixed_kla_per_d"] = 84.0
    z["fixed_do_sat_mg_L"] = 8.0
    layout = parse_layout(three_data, "x.toml", LAYOUTS)
    assert layout.zones[2].fixed_kla_per_d == 84.0 and layout.zones[2].grid is None
    assert layout.zone_airflow_range_Sm3_h(layout.zones[2]) == (0.0, 0.0)


def test_aggregate_efficiency_default_is_capacity_weighted():
    layout = load_layout(THREE_TANK)
    curve_mean = (0.55 + 0.60 + 0.61) / 3
    assert layout.header.aggregate_efficiency == pytest.approx((3200 * curve_mean + 3200 * 0.58) / 6400)


def test_suspicious_magnitudes_are_warnings_not_errors(three_data):
    three_data["zones"][0]["volume_m3"] = 5.0
    three_data["zones"][0]["area_m2"] = 111.1
    three_data["zones"][1]["depth_m"] = 50.0
    three_data["zones"][1]["area_m2"] = 111.1
    warnings: list = []
    layout = parse_layout(three_data, "odd.toml", LAYOUTS, warnings=warnings)
    text = [str(w) for w in warnings]
    assert "warning: odd.toml: zones.T1.volume_m3: very small zone (5 m3)" in text
    assert "warning: odd.toml: zones.T2.depth_m: unusual side-water depth 50 m" in text
    assert "warning: odd.toml: zones.T2.grid.submergence_m: grid sits 45.80 m above the floor" in text
    assert ("warning: odd.toml: zones.T2.area_m2: floor area 111.1 m2 differs from volume_m3 / depth_m = 10.0 m2 "
            "by more than 15 %") in text
    assert layout.zones[0].volume_m3 == 5.0


def test_volume_typed_in_litres_is_flagged(three_data):
    three_data["zones"][1]["volume_m3"] = 500_000.0
    three_data["zones"][1]["area_m2"] = 111.1
    warnings: list = []
    parse_layout(three_data, "litres.toml", LAYOUTS, warnings=warnings)
    text = [str(w) for w in warnings]
    assert ("warning: litres.toml: zones.T2.volume_m3: very large zone (500000 m3): was it typed in litres?"
            in text)
    assert any(t.startswith("warning: litres.toml: zones: train HRT") for t in text)


def test_layout_is_frozen():
    layout = load_layout(DEMO)
    with pytest.raises(dataclasses.FrozenInstanceError):
        layout.zones[0].volume_m3 = 1.0  # type: ignore[misc]


def test_parse_of_the_tomllib_dict_equals_load():
    with open(DEMO, "rb") as fh:
        data = tomllib.load(fh)
    assert parse_layout(data, str(DEMO), LAYOUTS) == load_layout(str(DEMO))


def _with_power_points(three_data, power_kW):
    blower = three_data["blowers"][0]
    for key in ("efficiency", "efficiency_points"):
        blower.pop(key, None)
    blower["power_points"] = [
        {"airflow_Sm3_h": 1200.0, "discharge_gauge_kPa": 50.0, "power_kW": power_kW[0]},
        {"airflow_Sm3_h": 3200.0, "discharge_gauge_kPa": 55.0, "power_kW": power_kW[1]},
    ]
    return three_data


def test_power_points_become_efficiency_points(three_data):
    """Duty points (wire power) turn into wire-to-air efficiencies at the boundary.

    Independent check: the isentropic power of dry air written out here,
    P = m cp T1 ((p2/p1)^(2/7) - 1) (ideal gas, k = 1.4, cp = 1.005 kJ/(kg K)).
    """
    layout = parse_layout(_with_power_points(three_data, (40.0, 110.0)), "x.toml", LAYOUTS)
    b = layout.blowers[0]
    assert b.efficiency is None and len(b.power_points) == 2
    site = 101.325 * (1 - 2.25577e-5 * 120.0) ** 5.25588  # 120 m, US Standard Atmosphere 1976
    inlet_T = sum(layout.inlet_air.temperature_C) / len(layout.inlet_air.temperature_C)
    inlet_p = (layout.inlet_air.pressure_kPa or site) - layout.inlet_air.filter_loss_kPa
    for pt, e in zip(b.power_points, b.efficiency_points):
        m_kg_s = pt.airflow_Sm3_h * 1.2041 / 3600.0
        ideal = m_kg_s * 1.005 * (inlet_T + 273.15) * (((site + pt.discharge_gauge_kPa) / inlet_p) ** (2 / 7) - 1)
        assert e.efficiency == pytest.approx(ideal / pt.power_kW, rel=2e-3)
    assert layout_to_data(layout)["blowers"][0]["power_points"][1]["power_kW"] == 110.0


def test_power_point_below_isentropic_power_is_an_error(three_data, errors_of):
    lines = errors_of(_with_power_points(three_data, (5.0, 110.0)))
    assert len(lines) == 1
    assert lines[0].startswith("error: bad.toml: blowers.PD1.power_points[1].power_kW: implies a wire-to-air "
                               "efficiency of ")
    assert "(got 5.0, expected a power above the isentropic power of the duty point)" in lines[0]


def test_two_efficiency_forms_at_once_is_an_error(three_data, errors_of):
    data = _with_power_points(three_data, (40.0, 110.0))
    data["blowers"][0]["efficiency"] = 0.6
    lines = errors_of(data)
    assert any("give exactly one of efficiency, efficiency_points, power_points" in line for line in lines)


def test_staging_keys_are_read_with_their_defaults():
    """The Fenwhistle layout sets every staging key; the demo sets none and gets the defaults."""
    fen = load_layout(FENWHISTLE)
    pd1, t1, s1 = fen.blowers
    assert (t1.min_up_h, t1.min_down_h, t1.max_starts_per_day, t1.start_cost) == (3.0, 2.0, 2, 1.5)
    assert [(r.discharge_gauge_kPa, r.airflow_min_Sm3_h, r.airflow_max_Sm3_h) for r in t1.range_points] == [
        (45.0, 700.0, 1800.0), (65.0, 900.0, 1500.0)]
    assert s1.power_points and not pd1.out_of_service
    swing = fen.zone("Z2")
    assert swing.kind == "swing" and swing.max_switches_per_day == 4
    assert swing.do_min_mg_L == 0.5  # its own, held while aerated
    text = FENWHISTLE.read_text().replace("do_min_mg_L = 0.5  #", "#")
    assert parse_layout(tomllib.loads(text), str(FENWHISTLE), LAYOUTS).zone("Z2").do_min_mg_L == \
        fen.zone("Z3").do_min_mg_L  # without one: the layout's DO minimum
    demo = load_layout(DEMO)
    for b in demo.blowers:
        assert (b.out_of_service, b.min_up_h, b.min_down_h, b.max_starts_per_day, b.start_cost, b.range_points) == (
            False, D.BLOWER_MIN_UP_h, D.BLOWER_MIN_DOWN_h, None, D.BLOWER_START_COST, ())
