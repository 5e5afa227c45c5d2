"""Blower dispatch (MILP in HiGHS) against brute-force enumeration of every on/off pattern.

The reference is exhaustive: every pattern of small cases is enumerated in the test, its
feasibility checked rule by rule (airflow range with the zones' spare room, pressure limit,
minimum up/down times, starts per day, all around the periodic day) and its bill computed
with the least-power split of each period's airflow; the dispatch must reach the least bill.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

from airtaper.optimize.dispatch import Bill, Machine, evaluate, solve_dispatch, swing_states
from airtaper.physics.blower import EquivalentCurve, aggregate_curve, equivalent_curve

pytestmark = pytest.mark.solver

H = 1.0  # period length, h


def machine(mid, lo, hi, eff=None, points=(), pmax=80.0, oos=False, up=0, down=0, starts=None, cost=0.0, ranges=()):
    return Machine(mid, equivalent_curve(lo, hi, eff, points), pmax, oos, up, down, starts, cost, ranges)


def _runs_ok(pattern, length, value):
    """Every cyclic run of ``value`` in ``pattern`` lasts at least ``length`` periods (a run all day counts)."""
    n = len(pattern)
    if length <= 1 or all(v == value for v in pattern) or value not in pattern:
        return True
    start = next(i for i in range(n) if pattern[i] != value)  # rotate to begin outside a run
    p = pattern[start:] + pattern[:start]
    run = 0
    for v in p + (not value,):
        if v == value:
            run += 1
        else:
            if 0 < run < length:
                return False
            run = 0
    return True


def brute_force(machines, demand, pressure, w, bill: Bill, excess):
    """Least bill over every on/off pattern (None when no pattern is feasible)."""
    nm, n = len(machines), len(demand)
    best = None
    for bits in itertools.product((False, True), repeat=nm * n):
        run = np.array(bits, dtype=bool).reshape(nm, n)
        ok = True
        for j, mm in enumerate(machines):
            pat = tuple(bool(x) for x in run[j])
            if (mm.out_of_service and any(pat)) or any(pat[p] and pressure[p] > mm.pressure_max_gauge_kPa
                                                       for p in range(n)):
                ok = False
                break
            starts = sum(pat[p] and not pat[p - 1] for p in range(n))
            if mm.max_starts is not None and starts > mm.max_starts:
                ok = False
                break
            if not (_runs_ok(pat, mm.min_up, True) and _runs_ok(pat, mm.min_down, False)):
                ok = False
                break
        if not ok:
            continue
        power = np.zeros(n)
        for p in range(n):
            on = [machines[j].curve_at(pressure[p]) for j in range(nm) if run[j, p]]
            if not on:
                ok = demand[p] == 0
                break
            agg = aggregate_curve(on)
            if demand[p] > agg.airflow_max_Sm3_h + 1e-9 or agg.airflow_min_Sm3_h > demand[p] + excess[p] + 1e-9:
                ok = False
                break
            power[p] = w[p] * agg.equivalent(max(demand[p], agg.airflow_min_Sm3_h))
        if not ok:
            continue
        starts = run & ~np.roll(run, 1, axis=1)
        value = float(np.sum(bill.price_per_kWh * power * H) + bill.demand_per_kW_day * power.max()
                      + (sum(mm.start_cost * s.sum() for mm, s in zip(machines, starts)) if bill.with_start_costs
                         else 0.0))
        if best is None or value < best[0]:
            best = (value, run)
    return best


def dispatch_value(dp, bill: Bill) -> float:
    p = dp.total_power_kW
    v = float(np.sum(bill.price_per_kWh * p * H) + bill.demand_per_kW_day * p.max())
    if bill.with_start_costs:
        v += sum(mm.start_cost * s.sum() for mm, s in zip(dp.machines, dp.starts))
    return v


def _check_rules(dp):
    for j, mm in enumerate(dp.machines):
        pat = tuple(bool(x) for x in dp.running[j])
        assert _runs_ok(pat, mm.min_up, True)
        assert _runs_ok(pat, mm.min_down, False)
        if mm.max_starts is not None:
            assert dp.starts[j].sum() <= mm.max_starts


UNLIKE = (
    machine("PD", 300.0, 1000.0, eff=0.55, cost=0.3),
    machine("TU", 600.0, 2000.0, points=[(600.0, 0.62), (1300.0, 0.74), (2000.0, 0.72)], up=2, starts=2, cost=1.0),
    machine("SC", 400.0, 1500.0, points=[(400.0, 0.58), (1000.0, 0.68), (1500.0, 0.66)], pmax=60.0, down=2, cost=0.5),
)


@pytest.mark.parametrize("seed", range(6))
def test_dispatch_reaches_the_brute_force_optimum(seed):
    rng = np.random.default_rng(seed)
    n = 4
    demand = rng.uniform(350.0, 3200.0, n)
    pressure = rng.uniform(50.0, 64.0, n)  # above 60 kPa the screw machine may not run
    w = rng.uniform(0.010, 0.014, n)
    bill = Bill(rng.choice([0.08, 0.15, 0.24], n), float(rng.uniform(0.0, 0.5)), True, True)
    excess = rng.uniform(0.0, 400.0, n)
    ref = brute_force(UNLIKE, demand, pressure, w, bill, excess)
    dp = solve_dispatch(UNLIKE, demand, pressure, w, bill, H, excess)
    if ref is None:
        assert dp.findings, "no pattern is feasible, so the dispatch must report a shortfall"
        return
    assert not dp.findings
    _check_rules(dp)
    # the MILP's gap is 1e-6 relative; the start tie-break adds 1e-3 kWh x price per start
    assert dispatch_value(dp, bill) == pytest.approx(ref[0], rel=1e-5, abs=1e-3)


def test_minimum_up_time_and_starts_limit_are_respected():
    """Alternating demand tempts the efficient large machine to start every other period."""
    big = machine("BIG", 1500.0, 4000.0, eff=0.80, up=3, starts=1)
    small = machine("SMALL", 300.0, 2500.0, eff=0.60)
    demand = np.array([3500.0, 800.0, 3500.0, 800.0, 3500.0, 800.0])
    n = demand.size
    bill = Bill(np.ones(n), 0.0, False, False)
    room = np.full(n, 1000.0)  # the zones could take the big machine's minimum at night
    free = solve_dispatch((machine("BIG", 1500.0, 4000.0, eff=0.80), small), demand, np.full(n, 55.0),
                          np.full(n, 0.01), bill, H, room)
    assert free.starts[0].sum() == 3  # unconstrained: the big one runs only in the three high periods
    dp = solve_dispatch((big, small), demand, np.full(n, 55.0), np.full(n, 0.01), bill, H, room)
    assert not dp.findings
    _check_rules(dp)
    assert dp.starts[0].sum() <= 1
    ref = brute_force((big, small), demand, np.full(n, 55.0), np.full(n, 0.01), bill, room)
    assert dispatch_value(dp, bill) == pytest.approx(ref[0], rel=1e-5, abs=1e-3)
    assert dispatch_value(dp, bill) > dispatch_value(free, bill)  # the rules cost something here


def test_flat_tariff_gives_the_energy_dispatch():
    n = 6
    demand = np.array([700.0, 1200.0, 2600.0, 3100.0, 1900.0, 900.0])
    p, w = np.full(n, 55.0), np.full(n, 0.012)
    energy = solve_dispatch(UNLIKE, demand, p, w, Bill(np.ones(n), 0.0, False, False), H)
    flat = solve_dispatch(UNLIKE, demand, p, w, Bill(np.full(n, 0.13), 0.0, False, True), H)
    assert (energy.running == flat.running).all()
    assert flat.total_power_kW.sum() == pytest.approx(energy.total_power_kW.sum(), rel=1e-9)


def test_demand_charge_lowers_the_peak():
    """The large machine is better only at the peak; its minimum run time makes it cost energy at night."""
    a = machine("A", 1000.0, 3000.0, eff=0.80, up=3)
    b = machine("B", 500.0, 3000.0, eff=0.75)
    demand = np.array([800.0, 800.0, 800.0, 3000.0])
    n = demand.size
    p, w = np.full(n, 55.0), np.full(n, 0.01)
    excess = np.full(n, 500.0)
    no_charge = solve_dispatch((a, b), demand, p, w, Bill(np.ones(n), 0.0, True, True), H, excess)
    charged = solve_dispatch((a, b), demand, p, w, Bill(np.ones(n), 5.0, True, True), H, excess)
    assert charged.total_power_kW.max() < no_charge.total_power_kW.max() - 1.0
    assert charged.total_power_kW.sum() > no_charge.total_power_kW.sum()  # paid for in energy
    for dp, bill in ((no_charge, Bill(np.ones(n), 0.0, True, True)), (charged, Bill(np.ones(n), 5.0, True, True))):
        ref = brute_force((a, b), demand, p, w, bill, excess)
        assert dispatch_value(dp, bill) == pytest.approx(ref[0], rel=1e-5, abs=1e-3)


def test_airflow_range_follows_the_discharge_pressure():
    """A centrifugal machine loses capacity and turndown as the pressure rises (range points): the dispatch
    uses the range at each period's pressure, as the enumeration does."""
    cen = machine("CEN", 1000.0, 3000.0, points=[(1000.0, 0.66), (2000.0, 0.76), (3000.0, 0.74)],
                  ranges=((50.0, 1000.0, 3000.0), (60.0, 1400.0, 2200.0)), cost=0.5)
    pd_ = machine("PD", 400.0, 1400.0, eff=0.58, cost=0.2)
    assert cen.range_at(55.0) == pytest.approx((1200.0, 2600.0))
    assert cen.range_at(70.0) == pytest.approx((1400.0, 2200.0))  # held beyond the last point
    demand = np.array([2700.0, 2700.0, 1100.0, 2500.0])
    pressure = np.array([50.0, 60.0, 60.0, 55.0])
    n = demand.size
    bill = Bill(np.array([0.1, 0.2, 0.1, 0.2]), 0.3, True, True)
    excess = np.full(n, 100.0)
    dp = solve_dispatch((cen, pd_), demand, pressure, np.full(n, 0.012), bill, H, excess)
    ref = brute_force((cen, pd_), demand, pressure, np.full(n, 0.012), bill, excess)
    assert not dp.findings
    assert dispatch_value(dp, bill) == pytest.approx(ref[0], rel=1e-5, abs=1e-3)
    assert dp.running[:, 1].all()  # at 60 kPa the centrifugal gives at most 2,200: both machines run
    for i in range(n):
        if dp.running[0, i]:
            lo, hi = cen.range_at(pressure[i])
            assert lo - 1e-6 <= dp.airflow_Sm3_h[0, i] <= hi + 1e-6


def test_unmeetable_demand_is_a_finding_with_periods_and_shortfall():
    ms = (machine("X", 1000.0, 2000.0, eff=0.7, pmax=60.0), machine("Y", 1000.0, 2500.0, eff=0.7))
    demand = np.array([1500.0, 5000.0, 400.0, 1500.0])
    pressure = np.array([55.0, 55.0, 55.0, 90.0])
    dp = solve_dispatch(ms, demand, pressure, np.full(4, 0.01), Bill(np.ones(4), 0.0, False, False), H,
                        np.zeros(4))
    periods = {f["period"]: f for f in dp.findings}
    assert set(periods) == {2, 3, 4}
    assert periods[2]["shortfall_Sm3_h"] == pytest.approx(500.0)  # 5000 asked, 4500 installed
    assert "capacity" in periods[2]["message"]
    assert periods[3]["shortfall_Sm3_h"] == pytest.approx(400.0)  # below every machine's minimum, no room
    assert "below the smallest blower's minimum (X 1000 Sm3/h" in periods[3]["message"]
    assert "90.0 kPa" in periods[4]["message"] and "no blower in service" in periods[4]["message"]
    assert periods[4]["shortfall_Sm3_h"] == pytest.approx(1500.0)  # nothing can run at 90 kPa


def test_out_of_service_machine_never_runs():
    ms = (machine("X", 500.0, 2000.0, eff=0.8, oos=True), machine("Y", 500.0, 2500.0, eff=0.6))
    dp = solve_dispatch(ms, np.array([800.0, 1600.0]), np.full(2, 50.0), np.full(2, 0.01),
                        Bill(np.ones(2), 0.0, False, False), H)
    assert not dp.running[0].any() and dp.running[1].all()


def test_split_is_the_least_power_split():
    """Least equivalent airflow of a set sharing a total: the segment fill against a fine grid search."""
    curves = [m.curve for m in UNLIKE]
    agg = aggregate_curve(curves)
    for total in np.linspace(agg.airflow_min_Sm3_h, agg.airflow_max_Sm3_h, 7):
        grid = {}
        q1 = np.linspace(300.0, 1000.0, 141)
        q2 = np.linspace(600.0, 2000.0, 281)
        Q1, Q2 = np.meshgrid(q1, q2)
        Q3 = total - Q1 - Q2
        ok = (Q3 >= 400.0 - 1e-9) & (Q3 <= 1500.0 + 1e-9)
        g = curves[0].equivalent(Q1) + curves[1].equivalent(Q2) + curves[2].equivalent(np.clip(Q3, 400, 1500))
        grid = float(g[ok].min())
        assert agg.equivalent(total) <= grid + 1e-6
        assert agg.equivalent(total) >= grid - 5.0 * 2.0  # grid step 5 Sm3/h x steepest slope < 2
        dp = evaluate(UNLIKE, np.ones((3, 1), dtype=bool), [total], [50.0], [1.0], H)
        assert dp.power_kW.sum() == pytest.approx(agg.equivalent(total), rel=1e-12)


@pytest.mark.parametrize("limit", [None, 0, 2, 4])
def test_swing_rounding_against_enumeration(limit):
    frac = np.array([0.1, 0.7, 0.4, 0.9, 0.2, 0.6, 0.55, 0.05])
    got = swing_states(frac, limit)
    n = frac.size
    best = None
    for bits in itertools.product((False, True), repeat=n):
        y = np.array(bits)
        if limit is not None and int(np.sum(y != np.roll(y, 1))) > limit:
            continue
        v = float(np.abs(y - frac).sum())
        best = v if best is None else min(best, v)
    assert float(np.abs(got - frac).sum()) == pytest.approx(best, abs=1e-5)
    if limit is not None:
        assert int(np.sum(got != np.roll(got, 1))) <= limit


def test_min_up_in_periods_rounds_up(three_tank_6):
    from dataclasses import replace

    from airtaper.layout.types import Blower
    from airtaper.optimize.dispatch import machines_of

    assert three_tank_6.horizon.period_h == 4.0
    layout = replace(three_tank_6, blowers=(Blower("B", "turbo", 100.0, 200.0, 60.0, 0.7, (), (), False, 5.0, 4.0, 3,
                                                   2.0),))
    m = machines_of(layout)[0]
    assert (m.min_up, m.min_down, m.max_starts, m.start_cost) == (math.ceil(5.0 / 4.0), 1, 3, 2.0)
    assert isinstance(m.curve, EquivalentCurve)
