"""The pre-screen: limits no schedule can meet, found without an optimisation, and the tested-range flags."""

from __future__ import annotations

import re
import shutil
import warnings
from dataclasses import replace

import numpy as np
import pytest

from airtaper.cli.main import main
from airtaper.errors import EXIT_INFEASIBLE, EXIT_OK
from airtaper.layout import load_layout
from airtaper.optimize.horizon import with_periods
from airtaper.optimize.prescreen import equipment_findings, outside_tested_range, prescreen
from airtaper.optimize.diurnal import StudyOptions, run_optimization

from .conftest import DEMO


def _with_grid(layout, zone_id, count):
    zones = tuple(replace(z, grid=replace(z.grid, count=count)) if z.id == zone_id else z for z in layout.zones)
    return replace(layout, zones=zones)


@pytest.fixture(scope="module")
def demo6(demo):
    return with_periods(demo, 6, steps_per_period=2)


@pytest.fixture(scope="module")
def short_z2(demo6):
    """The demo with a quarter of Z2's diffusers: Z2 cannot hold 1 mg/L at the peak even at full air."""
    return _with_grid(demo6, "Z2", 200)


def test_the_demo_passes(demo6):
    screen = prescreen(demo6)
    assert screen["feasible"] and screen["findings"] == []
    assert screen["full_air"]["nh4_mean_mg_L"] < demo6.limits.nh4_mean_mg_L


def test_a_short_zone_is_named_with_every_span_and_its_size(short_z2):
    screen = prescreen(short_z2)
    assert not screen["feasible"]
    (f,) = [f for f in screen["findings"] if f["limit"] == "do_min"]
    assert f["zone"] == "Z2" and "Z2 cannot hold its DO minimum of 1 mg/L" in f["message"]
    assert f["spans"] and all(sp["amount"] > 0.05 and sp["oxygen_fraction"] > 0 for sp in f["spans"])
    # every span is in the message with its own size
    for sp in f["spans"]:
        assert f"{sp['amount']:.2f} mg/L short" in f["message"]
    # the other zones are not blamed
    assert all(g["zone"] in (None, "Z2") for g in screen["findings"])


def test_optimize_stops_at_the_prescreen_with_exit_3_and_no_saving(short_z2):
    res = run_optimization(short_z2, StudyOptions())
    s = res.summary
    assert res.exit_code == EXIT_INFEASIBLE and s["status"] == "infeasible"
    assert s["prescreen"]["feasible"] is False
    assert any(f["limit"] == "do_min" and f["zone"] == "Z2" for f in s["infeasibility"])
    assert s["saving_percent"] is None and s["cost_saving_percent"] is None
    assert "iterations" not in s["solver"]  # no optimisation was run
    assert res.schedule.empty


def test_check_reports_the_prescreen(tmp_path, capsys):
    text = DEMO.read_text().replace('count = 800', 'count = 200')
    (tmp_path / "short.toml").write_text(text)
    shutil.copy(DEMO.parent / "demo_influent.csv", tmp_path / "demo_influent.csv")
    assert main(["check", str(tmp_path / "short.toml")]) == EXIT_INFEASIBLE
    out = capsys.readouterr().out
    assert "pre-screen: the limits cannot all be met" in out and "zone Z2 cannot hold its DO minimum" in out
    assert main(["check", "--no-prescreen", str(tmp_path / "short.toml")]) == EXIT_OK


def test_blower_capacity_below_the_zones_minimum_airflow(demo6):
    small = replace(demo6, blowers=(replace(demo6.blowers[0], airflow_min_Sm3_h=500.0, airflow_max_Sm3_h=1000.0),))
    found = {f["limit"]: f for f in equipment_findings(small)}
    # minimum airflows: 1 Sm3/h per diffuser x 2,880 diffusers (the grid sets it; demo.toml notes)
    need = sum(small.zone_airflow_range_Sm3_h(z)[0] for z in small.zones if z.grid is not None)
    assert need == pytest.approx(2880.0)
    assert found["blower_max"]["spans"][0]["amount"] == pytest.approx(need / 1000.0 - 1.0)
    assert "cannot supply even the zones' minimum airflows" in found["blower_max"]["message"]


def test_blower_pressure_below_the_static_head(demo6):
    # 5.2 m of water is 51 kPa of static head alone (rho g h, common practice (no source))
    low = replace(demo6, blowers=tuple(replace(b, pressure_max_gauge_kPa=45.0) for b in demo6.blowers))
    found = {f["limit"]: f for f in equipment_findings(low)}
    assert "pressure_max" in found and found["pressure_max"]["spans"][0]["amount"] > 6.0
    assert equipment_findings(demo6) == []


def test_airflow_outside_the_tested_range_is_flagged_by_span(demo6):
    z2 = next(z for z in demo6.zones if z.id == "Z2")
    tested = [p.airflow_per_diffuser_Sm3_h for p in demo6.diffuser_type(z2.grid.type_id).sote_points]
    per_diffuser = np.array([3.0, 9.0, 10.0, 3.0, 8.0, 3.0])
    flags = outside_tested_range(demo6, {"Z2": per_diffuser * z2.grid.count}, np.arange(6), "optimum")
    (f,) = flags
    assert f["zone"] == "Z2" and f["side"] == "above" and f["tested_Sm3_h"] == [min(tested), max(tested)]
    assert [(sp["start_h"], sp["end_h"]) for sp in f["spans"]] == [(4.0, 12.0), (16.0, 20.0)]
    assert [sp["airflow_per_diffuser_Sm3_h"] for sp in f["spans"]] == pytest.approx([10.0, 8.0])
    assert outside_tested_range(demo6, {"Z2": np.full(6, 3.0 * z2.grid.count)}, np.arange(6), "optimum") == []


def test_a_full_air_day_that_cannot_be_simulated_leaves_the_equipment_bounds(demo6, monkeypatch):
    import airtaper.optimize.simday as simday
    from airtaper.simulate.steady import SteadyStateError

    def fail(*args, **kwargs):
        raise SteadyStateError("steady state not reached")

    monkeypatch.setattr(simday, "simulate_day", fail)
    screen = prescreen(demo6)
    assert screen["feasible"] and screen["full_air"] is None
    assert "only the equipment bounds were screened" in screen["note"]


_IDEAL = '[clarifier]\nkind = "ideal"\neffluent_tss_mg_L = 10.0'


def _demo_variant(tmp_path, edits: dict):
    """The demo on 6 periods with each ``old: new`` text edit made (each ``old`` once in the file)."""
    text = DEMO.read_text()
    for old, new in edits.items():
        assert text.count(old) == 1
        text = text.replace(old, new)
    (tmp_path / "demo.toml").write_text(text)
    shutil.copy(DEMO.parent / "demo_influent.csv", tmp_path / "demo_influent.csv")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return with_periods(load_layout(str(tmp_path / "demo.toml")), 6, steps_per_period=2)


def test_nitrification_lost_to_an_overloaded_clarifier_is_blamed_on_the_clarifier(tmp_path):
    # The demo with a layered clarifier of 80 m2 (an invented overload: about 6 m/h of overflow at the mean
    # load): the effluent carries off solids faster than the 11-day sludge age allows, so none is wasted and
    # the nitrifiers fall short even at full air. The NH4-N finding is true, and its cause is the clarifier.
    small = _demo_variant(tmp_path, {_IDEAL: '[clarifier]\nkind = "layered"\narea_m2 = 80.0\nheight_m = 4.0'})
    screen = prescreen(small)
    (f,) = [f for f in screen["findings"] if f["limit"] == "nh4_mean"]
    assert screen["full_air"]["nh4_mean_mg_L"] > small.limits.nh4_mean_mg_L
    assert "the cause is the clarifier, not the air" in f["message"]
    assert "cannot hold the target sludge age" in f["message"] and "against 11 d" in f["message"]


def test_nitrification_short_with_a_fixed_waste_flow_names_the_solids_over_the_weir(tmp_path):
    # The demo with a fixed waste flow (217 m3/d, its waste at the 11-day sludge age), a return ratio of 0.4 and
    # a layered clarifier of 100 m2 (invented: about 5 m/h of overflow at the mean load). With no target sludge
    # age there is none to miss, yet the effluent carries off nearly half the solids leaving the plant and the
    # sludge age falls to about 4 d: the NH4-N finding must say so, not read as if only the air fell short.
    plant = _demo_variant(tmp_path, {_IDEAL: '[clarifier]\nkind = "layered"\narea_m2 = 100.0\nheight_m = 4.0',
                                     "srt_d = 11.0": "flow_m3_d = 217.0", "ratio = 0.8\n": "ratio = 0.4\n"})
    screen = prescreen(plant)
    (f,) = [f for f in screen["findings"] if f["limit"] == "nh4_mean"]
    assert screen["full_air"]["nh4_mean_mg_L"] > plant.limits.nh4_mean_mg_L
    m = re.search(r"at full air the sludge age is ([\d.]+) d, and the clarifier's effluent carries (\d+) g/m3 of "
                  r"solids, (\d+) % of the solids leaving the plant", f["message"])
    assert m, f["message"]
    assert float(m.group(1)) < 6.0 and float(m.group(2)) > 50.0 and int(m.group(3)) > 40
