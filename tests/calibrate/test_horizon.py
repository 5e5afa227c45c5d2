"""The record's horizon as a layout: the record's inputs per period, the rest by time of day."""

from __future__ import annotations

import warnings
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest

from airtaper.calibrate.horizon import record_layout
from airtaper.calibrate.problem import interpolation
from airtaper.layout import load_layout
from airtaper.layout.plantdata import PeriodInputs

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def demo():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return load_layout(ROOT / "layouts" / "demo.toml")


def test_inputs_per_period_and_the_rest_by_time_of_day(demo):
    n = 30  # 30 hourly periods from 06:00 of day 1
    flow = 10000.0 + 100.0 * np.arange(n)
    air = {z.id: np.full(n, 1000.0) for z in demo.zones if z.grid is not None}
    lay = record_layout(demo, PeriodInputs(6.0, 1.0, n, flow, None, None, air), 2)
    assert lay.horizon.n_periods == n and lay.horizon.period_h == 1.0 and lay.horizon.steps_per_period == 2
    assert lay.influent.flow_m3_d == tuple(flow)
    for k in range(n):
        hour = (6 + k) % 24
        assert lay.influent.cod_total_mg_L[k] == demo.influent.cod_total_mg_L[hour]
        assert lay.inlet_air.temperature_C[k] == demo.inlet_air.temperature_C[hour]
    ir = next(r for r in lay.recycles if r.id == "IR")
    assert ir.flow_m3_d == pytest.approx(tuple(2.5 * flow))  # ratio 2.5 of the logged flow
    assert lay.return_sludge.flow_m3_d == pytest.approx(tuple(0.8 * flow))


def test_interpolation_is_exact_for_linear_time_and_wraps_around():
    # points of a Radau-like grid over 4 h: the weights reproduce the time itself
    hours = [0.5, 1.0, 1.7, 2.0, 3.1, 4.0]
    m = SimpleNamespace(STEPS=list(range(1, 7)), point_hour={i + 1: h for i, h in enumerate(hours)})
    times = np.array([10.0, 10.25, 11.0, 12.9, 13.99])  # record clock, starting at 10 h
    for tau, pts in zip(times, interpolation(m, 10.0, times)):
        assert sum(w for _, w in pts) == pytest.approx(1.0)
        t_of = {i + 1: h for i, h in enumerate(hours)}
        # the point before the first is the last one (time 0 = 4 h on the periodic horizon)
        value = sum(w * (0.0 if (t == 6 and tau - 10.0 < 0.5) else t_of[t]) for t, w in pts)
        assert value == pytest.approx(tau - 10.0)
