"""The uniform-DO baseline: setpoints it cannot hold, and the lowest uniform setpoint that meets the limits."""

from __future__ import annotations

from dataclasses import replace

import pytest

from airtaper.optimize.baseline import SEARCH_TOL_mg_L, complying_baseline, run_baseline
from airtaper.optimize.horizon import with_periods
from airtaper.optimize.diurnal import saving_figures


@pytest.fixture(scope="module")
def demo6(demo):
    return with_periods(demo, 6, steps_per_period=2)


@pytest.fixture(scope="module")
def tight(demo6):
    """The demo with an NH4-N daily mean limit that a uniform 2 mg/L does not meet."""
    base = run_baseline(demo6, 2.0)
    limit = 0.92 * base.day.figures["nh4_mean_mg_L"]
    return replace(demo6, limits=replace(demo6.limits, nh4_mean_mg_L=limit))


def test_lowest_complying_setpoint_is_bracketed(tight):
    base = run_baseline(tight, 2.0)
    assert base.violations and "NH4-N daily mean" in base.violations[0]
    found = complying_baseline(tight, base)
    assert found is not None and not found.violations
    assert 2.0 < found.setpoint_mg_L <= 6.0
    # a setpoint one bracket width lower breaks the limit again: the search found the lowest, to its tolerance
    below = run_baseline(tight, found.setpoint_mg_L - SEARCH_TOL_mg_L, start_state=found.day.start_state())
    assert below.violations
    # more DO costs more air: the complying baseline uses more energy than the one that breaks the limit
    assert found.energy_kWh_per_day > base.energy_kWh_per_day


def test_savings_against_a_baseline_that_breaks_a_limit(tight):
    base = run_baseline(tight, 2.0)
    found = complying_baseline(tight, base)
    energy = 0.9 * base.energy_kWh_per_day
    s = saving_figures(base, found, energy, None, "optimal")
    assert s["baseline_compliant"] is False
    assert s["saving_percent"] == pytest.approx(10.0)
    c = s["complying_baseline"]
    assert c["compliant"] and c["saving_percent"] == pytest.approx(
        100.0 * (found.energy_kWh_per_day - energy) / found.energy_kWh_per_day)
    assert any("breaks a limit" in n for n in s["notes"])
    assert any("lowest uniform DO setpoint that meets the limits" in n for n in s["notes"])
    # no saving at all for a run whose limits cannot be met
    none = saving_figures(base, found, energy, None, "infeasible")
    assert none["saving_percent"] is None and none["complying_baseline"] is None


def test_a_setpoint_the_grid_cannot_hold_is_reported_with_zone_and_hours(demo6):
    zones = tuple(replace(z, grid=replace(z.grid, count=200)) if z.id == "Z2" else z for z in demo6.zones)
    short = replace(demo6, zones=zones)
    base = run_baseline(short, 2.0)
    held = base.day.setpoint_shortfalls
    assert held and {h["zone"] for h in held} == {"Z2"}
    hi = short.zone_airflow_range_Sm3_h(next(z for z in short.zones if z.id == "Z2"))[1]
    for h in held:
        assert h["do_min_mg_L"] < 2.0 - 0.05 and 0.0 <= h["start_h"] < 24.0
        assert f"zone Z2 cannot hold its DO setpoint of 2 mg/L" in h["message"]
        # the zone runs at full air in the hours it cannot hold the setpoint
        k = int(h["start_h"] // short.horizon.period_h)
        assert base.day.period_mean_airflow()["Z2"][k] == pytest.approx(hi, rel=1e-6)
    assert base.summary()["setpoint_not_held"] == held
