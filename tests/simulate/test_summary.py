"""The simulate summary: runs of periods, and DO setpoints the control could not hold."""

from __future__ import annotations

from dataclasses import replace

import pytest

from airtaper import simulate
from airtaper.layout import load_layout
from airtaper.simulate.summary import SETPOINT_TOLERANCE_mg_L, period_runs, span_text, summarize


def test_period_runs_join_through_midnight():
    assert period_runs([5, 3, 4, 9]) == [[3, 4, 5], [9]]
    assert period_runs([0, 1, 22, 23, 10], 24) == [[22, 23, 0, 1], [10]]  # 0-based
    assert period_runs([1, 2, 24], 24) == [[24, 1, 2]]  # 1-based
    assert period_runs([], 24) == []
    assert span_text([([22, 23, 0, 1], "0.30 mg/L"), ([10], "0.1 mg/L")], 1.0) == \
        "0.30 mg/L 22:00-02:00, 0.1 mg/L 10:00-11:00"


@pytest.fixture(scope="module")
def short_z2():
    """The demo (six 4-hour periods) with a quarter of Z2's diffusers."""
    from airtaper.optimize.horizon import with_periods

    demo = with_periods(load_layout("layouts/demo.toml"), 6, steps_per_period=2)
    zones = tuple(replace(z, grid=replace(z.grid, count=200)) if z.id == "Z2" else z for z in demo.zones)
    return replace(demo, zones=zones)


def test_a_setpoint_out_of_reach_is_named_with_zone_and_hours(short_z2):
    r = simulate.periodic(short_z2, do_setpoint_mg_L=2.0)
    s = summarize(r)
    held = s["setpoint_not_held"]
    assert held and {h["zone"] for h in held} == {"Z2"}
    assert s["do_setpoint_mg_L"]["Z2"] == 2.0
    hi = short_z2.zone_airflow_range_Sm3_h(next(z for z in short_z2.zones if z.id == "Z2"))[1]
    for h in held:
        assert h["do_min_mg_L"] < 2.0 - SETPOINT_TOLERANCE_mg_L
        assert "zone Z2 cannot hold its DO setpoint of 2 mg/L" in h["message"] and "full air" in h["message"]
    # still simulated at full air, not at some made-up airflow: Z2's airflow reaches its maximum
    assert s["zones"]["Z2"]["do_min_mg_L"] < 2.0 - SETPOINT_TOLERANCE_mg_L
    z2 = r.timeseries[r.timeseries["zone"] == "Z2"]
    assert z2["airflow_Sm3_h"].max() == pytest.approx(hi, rel=1e-6)
    # the zones with enough diffusers hold it
    assert all(v["do_min_mg_L"] > 2.0 - SETPOINT_TOLERANCE_mg_L for k, v in s["zones"].items()
               if k in ("Z3", "Z4", "Z5"))
