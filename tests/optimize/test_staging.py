"""The staging loop end to end: blower dispatch and swing zones settled with the nonlinear schedule.

Checks against things outside the loop: the machines' own ranges and pressure limits, the
grids' ranges (diffuser and mixing minimum), the independent simulator's verification, and
monotonicity any correct staging must show (taking a machine away never makes the day cheaper).
"""

from __future__ import annotations

import copy
import warnings
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from airtaper.errors import EXIT_INFEASIBLE, EXIT_OK
from airtaper.layout import load_layout
from airtaper.optimize.horizon import with_periods
from airtaper.optimize.dispatch import evaluate, machines_of
from airtaper.optimize.staging import COST_RTOL, MAX_ROUNDS, feasibility_check, model_air_state
from airtaper.optimize.diurnal import run_optimization

pytestmark = pytest.mark.solver

ROOT = Path(__file__).resolve().parents[2]
BLOWER_COLUMNS = ["period_start_h", "period_end_h", "blower", "running", "airflow_Sm3_h", "power_kW", "efficiency",
                  "discharge_gauge_kPa", "starts"]


@pytest.fixture(scope="module")
def staged(three_tank_diurnal):
    return run_optimization(three_tank_diurnal)


@pytest.fixture(scope="module")
def fenwhistle_6():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        layout = load_layout(str(ROOT / "layouts" / "fenwhistle.toml"))
    return with_periods(layout, 6, steps_per_period=4)  # two Radau steps per 4-h period: verifies within 0.05 mg/L


@pytest.fixture(scope="module")
def swing_run(fenwhistle_6):
    return run_optimization(fenwhistle_6)


def test_swing_states_are_kept_on_the_problem_not_on_the_block(swing_run):
    study = swing_run.study
    b = study.m.opt
    components = {c.local_name for c in b.component_objects(descend_into=False)}
    assert {k for k in vars(b) if not k.startswith("_") and k != "doc"} <= components
    states = study.problem.swing_states
    assert states and set(states) == set(study.m.opt.SWING_ZONES)
    aerated = swing_run.summary["dispatch"]["swing_zones"]
    for z, on in states.items():  # the summary reports the states the problem holds
        assert aerated[z]["aerated_periods"] == [int(i) + 1 for i in np.flatnonzero(on)]
    # and the verification checks the swing zones' DO minimum while aerated by them
    assert set(swing_run.summary["verification"]["swing_do_margin_mg_L"]) == set(states)


def _machines_within_their_ranges(result, layout):
    t = result.blowers
    assert list(t.columns) == BLOWER_COLUMNS
    by_id = {b.id: b for b in layout.blowers}
    for _, row in t.iterrows():
        b = by_id[row["blower"]]
        if row["running"]:
            assert b.airflow_min_Sm3_h * (1 - 1e-6) <= row["airflow_Sm3_h"] <= b.airflow_max_Sm3_h * (1 + 1e-6)
            assert row["discharge_gauge_kPa"] <= b.pressure_max_gauge_kPa * (1 + 1e-6)
            assert 0 < row["efficiency"] <= 1
            assert not b.out_of_service
        else:
            assert row["airflow_Sm3_h"] == 0.0 and row["power_kW"] == 0.0
    # the machines deliver exactly the schedule's air and their power is the optimiser's
    per = t.groupby("period_start_h")[["airflow_Sm3_h", "power_kW"]].sum().to_numpy()
    np.testing.assert_allclose(per[:, 0], result.header["airflow_Sm3_h"].to_numpy(), rtol=1e-6)
    np.testing.assert_allclose(per[:, 1], result.header["power_kW"].to_numpy(), rtol=1e-5)


def test_loop_terminates_and_never_raises_the_cost(staged, three_tank_diurnal):
    s = staged.summary
    assert staged.exit_code == EXIT_OK and s["status"] == "optimal" and s["verified"] is True
    d = s["dispatch"]
    rounds = [r for r in d["rounds"] if "cost" in r]
    assert 1 <= len(rounds) <= MAX_ROUNDS
    accepted = [r["cost"] for r in rounds if r["accepted"]]
    for a, b in zip(accepted, accepted[1:]):
        assert b <= a * (1 + COST_RTOL)
    # the best round is the result; the DO back-off after it (optimize/backoff.py) can only add air
    assert s["energy_kWh_per_day"] >= min(accepted) * (1 - 1e-6)
    if not (s.get("do_hold") or {}).get("rounds"):
        assert s["energy_kWh_per_day"] == pytest.approx(min(accepted), rel=1e-6)
    assert d["feasibility_breaches"] == []
    _machines_within_their_ranges(staged, three_tank_diurnal)
    # the baseline is dispatched by the same rule and the saving compares the two
    assert s["baseline"]["dispatch"]["energy_kWh_per_day"] == s["baseline"]["energy_kWh_per_day"]
    assert s["saving_percent"] == pytest.approx(
        100 * (1 - s["energy_kWh_per_day"] / s["baseline"]["energy_kWh_per_day"]), rel=1e-9)


def test_bill_split_adds_up_and_names_the_peak(staged):
    d = staged.summary["dispatch"]
    t = staged.blowers
    power = t.groupby("period_start_h")["power_kW"].sum().to_numpy()
    assert d["peak_kW"] == pytest.approx(power.max(), rel=1e-12)
    assert d["peak_period"] == int(np.argmax(power)) + 1
    hours = 24.0 / len(power)
    for bid, info in d["blowers"].items():
        rows = t[t["blower"] == bid]
        assert info["running_h"] == pytest.approx(rows["running"].sum() * hours)
        assert info["starts"] == rows["starts"].sum()


def test_swing_zone_gets_no_air_below_its_grid_or_mixing_minimum(swing_run, fenwhistle_6):
    s = swing_run.summary
    assert s["status"] in ("optimal", "unverified"), s["messages"]
    assert s["dispatch"]["feasibility_breaches"] == []
    zone = fenwhistle_6.zone("Z2")
    dtype = fenwhistle_6.diffuser_type(zone.grid.type_id)
    grid_min = zone.grid.count * dtype.airflow_min_Sm3_h
    mixing_min = zone.mixing_airflow_min_Sm3_h_m2 * zone.area_m2
    rows = swing_run.schedule[swing_run.schedule["zone"] == "Z2"]
    for _, r in rows.iterrows():
        if r["aerated"]:
            assert r["airflow_Sm3_h"] >= max(grid_min, mixing_min) * (1 - 1e-6)
            assert r["airflow_per_diffuser_Sm3_h"] >= dtype.airflow_min_Sm3_h * (1 - 1e-6)
        else:
            assert r["airflow_Sm3_h"] == 0.0
    on = rows["aerated"].to_numpy(dtype=bool)
    assert int(np.sum(on != np.roll(on, 1))) <= zone.max_switches_per_day
    _machines_within_their_ranges(swing_run, fenwhistle_6)
    # the independent simulator agrees with the schedule: the effluent limits and the aerated zones' DO
    # ranges hold in continuous time (after the DO back-off)
    v = s["verification"]
    assert v["violations"] == [] and s["verified"] is True, v["violations"]
    # the swing zone's own DO minimum is checked by the simulator while it is aerated (optimize/verify.py)
    assert "Z2" in v["swing_do_margin_mg_L"], v


def test_swing_zone_switches_off_when_that_pays(swing_run, fenwhistle_6):
    """On Fenwhistle the swing zone is off at night (the relaxed optimum wants little air there): the
    schedule switches it off in some periods and holds it on in others, verified by the simulator."""
    s = swing_run.summary
    assert swing_run.exit_code == EXIT_OK and s["status"] == "optimal" and s["verified"] is True, s["messages"]
    states = s["dispatch"]["swing_zones"]["Z2"]
    assert 0 < len(states["aerated_periods"]) < fenwhistle_6.horizon.n_periods, states
    rows = swing_run.schedule[swing_run.schedule["zone"] == "Z2"]
    off = rows[~rows["aerated"].astype(bool)]
    assert len(off) > 0 and (off["airflow_Sm3_h"] == 0.0).all()
    # the zone is anoxic while off: its DO stays near zero (ASM1 switching functions, no air)
    assert (off["do_mean_mg_L"] < 0.05).all(), off
    # the chosen pattern's objective is no higher than the all-day-aerated reference the loop solved
    steps = [r for r in s["dispatch"]["rounds"] if r.get("round") == 0]
    reference = next(r["objective"] for r in steps if r["step"] == "swing zones aerated all day")
    chosen = next(r["objective"] for r in steps if r["step"] == "swing pattern chosen")
    assert chosen < reference


@pytest.mark.slow
def test_switching_off_costs_no_more_than_aerating_all_day(swing_run, fenwhistle_6):
    """An independent run with the swing zone made an ordinary aerated zone (same DO minimum, always on)
    costs at least as much as the switching schedule (up to the staging loop's tolerance)."""
    always = replace(fenwhistle_6, zones=tuple(replace(z, kind="aerated") if z.kind == "swing" else z
                                               for z in fenwhistle_6.zones))
    r = run_optimization(always)
    assert r.summary["status"] == "optimal", r.summary["messages"]
    assert swing_run.summary["cost_per_day"] <= r.summary["cost_per_day"] * (1 + COST_RTOL)


@pytest.mark.slow
def test_demo_with_a_blower_out_of_service_is_feasible_and_costs_no_less(demo):
    """B1 out of service (B2, its twin, and B3 remain). Not B3: on six 4-hour periods the night needs
    3,876-4,205 Sm3/h (the optimum with every machine, B3 alone at night), below the 4,500 Sm3/h minimum of
    B1 and B2, so with B3 out the night's air is forced up and Z6's DO leaves its maximum (1.13 mg/L on the
    coarse steps; on 1-hour steps the relaxed solve did not converge in 150 iterations, without Z6's maximum it did
    in 16): that plant cannot hold its DO range, and exit 3 naming the blowers' turndown at night is the truthful
    result (test_diurnal.py, test_demo_with_blower_b3_out_is_diagnosed_by_the_blowers_turndown)."""
    layout = with_periods(demo, 6, steps_per_period=2)
    full = run_optimization(layout)
    assert full.summary["dispatch"]["blowers"]["B1"]["running_h"] > 0.0  # the machine taken out is one in use
    out = replace(layout, blowers=tuple(replace(b, out_of_service=(b.id == "B1")) for b in layout.blowers))
    less = run_optimization(out)
    for r in (full, less):
        # feasible for every machine and grid, and verified: the re-simulated effluent within its limits and
        # every zone's DO within its range over continuous time, to the verification's tolerance (on six
        # 4-hour periods the study is solved again on 30-minute steps, optimize/backoff.py)
        assert r.exit_code == EXIT_OK and r.summary["status"] == "optimal", r.summary["messages"]
        v = r.summary["verification"]
        assert v["verified"] is True and v["violations"] == [], v["violations"]
        assert r.summary["dispatch"]["feasibility_breaches"] == []
    # with every machine in service: verified, the DO minimum held over continuous time to 0.01 mg/L
    # (optimize/backoff.py: the back-off on 30-minute steps, an early dip's step start backed off too)
    assert full.exit_code == EXIT_OK, full.summary["messages"]
    assert full.summary["verification"]["do_min_margin_mg_L"] >= -0.01, full.summary["verification"]["do_margin_mg_L"]
    assert less.summary["dispatch"]["blowers"]["B1"]["running_h"] == 0.0
    assert (less.blowers[less.blowers["blower"] == "B1"]["running"] == False).all()  # noqa: E712
    _machines_within_their_ranges(less, out)
    # a subset of the machines cannot do better (up to the loop's tolerance), on the final result: after
    # the DO back-off and the re-dispatch on its airflow, as reported and verified
    assert less.summary["cost_per_day"] >= full.summary["cost_per_day"] * (1 - COST_RTOL)
    assert full.summary["cost_per_day"] == pytest.approx(full.summary["dispatch"]["cost_per_day"], rel=1e-12)


@pytest.mark.slow
def test_perturbed_efficiencies_give_nearly_the_same_staged_cost(three_tank_diurnal, staged):
    """Robustness: 0.5 % on every efficiency moves the staged energy by about that much, not by a jump."""
    bumped = replace(three_tank_diurnal, blowers=tuple(
        replace(b, efficiency=None if b.efficiency is None else b.efficiency * 1.005,
                efficiency_points=tuple(replace(e, efficiency=e.efficiency * 1.005) for e in b.efficiency_points))
        for b in three_tank_diurnal.blowers))
    r = run_optimization(bumped)
    assert r.summary["status"] == "optimal"
    ratio = r.summary["energy_kWh_per_day"] / staged.summary["energy_kWh_per_day"]
    assert 1 / 1.005 * (1 - COST_RTOL) <= ratio <= 1 + COST_RTOL


def test_staging_that_cannot_meet_the_demand_is_a_finding(three_tank_diurnal):
    """PD1's pressure limit is below the header's need and PD2 alone is too small at the peak: exit 3 with
    the periods and the shortfall, not a solver error (the relaxed solve, one machine of the set's
    capacity at the highest limit, is feasible)."""
    pd1, pd2 = three_tank_diurnal.blowers
    layout = replace(three_tank_diurnal, blowers=(
        replace(pd1, pressure_max_gauge_kPa=44.0),
        replace(pd2, airflow_min_Sm3_h=600.0, airflow_max_Sm3_h=1500.0)))
    r = run_optimization(layout)
    s = r.summary
    assert r.exit_code == EXIT_INFEASIBLE and s["status"] == "infeasible"
    found = [f for f in s["infeasibility"] if f["limit"] == "blower_staging"]
    assert found and all(f["shortfall_Sm3_h"] > 0 for f in found)
    header = r.header.set_index(np.arange(1, len(r.header) + 1))  # findings count periods from 1
    for f in found:  # the shortfall is the schedule's air above what PD2 can give
        assert f["shortfall_Sm3_h"] == pytest.approx(header.loc[f["period"], "airflow_Sm3_h"] - 1500.0, rel=1e-6)
        assert "capacity" in f["message"]


def test_post_solve_check_catches_a_machine_or_grid_out_of_range(staged):
    """The check after the solve is not a formality: a machine pushed past its range or pressure limit, or a
    zone below its grid minimum, is reported."""
    m, problem = staged.study.m, staged.study.problem
    t = staged.blowers
    machines = machines_of(staged.study.plant)
    running = t.pivot(index="blower", columns="period_start_h", values="running").loc[[mm.id for mm in machines]]
    state = model_air_state(problem)
    dp = evaluate(machines, running.to_numpy(dtype=bool), state["demand_Sm3_h"], state["discharge_gauge_kPa"],
                  state["kw_per_equivalent"], staged.study.plant.period_h)
    assert feasibility_check(problem, dp) == []
    j, i = np.argwhere(dp.running)[0]
    bad = copy.deepcopy(dp)
    bad.airflow_Sm3_h[j, i] = machines[j].airflow_max_Sm3_h * 1.1
    assert any(machines[j].id in x for x in feasibility_check(problem, bad))
    bad = copy.deepcopy(dp)
    bad.discharge_gauge_kPa[i] = machines[j].pressure_max_gauge_kPa + 5.0
    assert any("limit" in x for x in feasibility_check(problem, bad))
    z = next(iter(m.opt.ZONES))
    p = m.PERIODS.first()
    keep = m.airflow_Sm3_h[z, p].value
    try:
        m.airflow_Sm3_h[z, p].set_value(1.0)
        assert any(f"zone {z}" in x for x in feasibility_check(problem, dp))
    finally:
        m.airflow_Sm3_h[z, p].set_value(keep)


def test_swing_patterns_are_tried_when_the_all_day_pattern_does_not_solve(fenwhistle_6, monkeypatch):
    """A swing zone that cannot be aerated all day (forced here: the all-day solve is cut at one iteration)
    may still be switched off where it cannot hold its DO: the candidate patterns are solved from the
    relaxed point, and the study ends with a verified schedule, not an elastic diagnosis of the all-day
    pattern (optimize/staging.py, "Starts")."""
    from airtaper.optimize.attempts import Rung
    from airtaper.optimize.diurnal import DiurnalOptimisation

    original = DiurnalOptimisation.resolve

    def all_day_fails(self, warm=True, name=None):
        states = self.problem.swing_states
        if states is not None and all(v.all() for v in states.values()):
            return self._ipopt(Rung("all day, cut short by the test", {"max_iter": 1}), warm_start=warm)
        return original(self, warm, name)

    monkeypatch.setattr(DiurnalOptimisation, "resolve", all_day_fails)
    res = run_optimization(fenwhistle_6)
    s = res.summary
    assert res.exit_code == EXIT_OK and s["status"] == "optimal" and s["verified"] is True, s["messages"]
    steps = [r for r in s["dispatch"]["rounds"] if r.get("round") == 0]
    assert steps[0]["step"] == "swing zones aerated all day" and steps[0]["objective"] is None, steps[0]
    assert any(r["step"].startswith("swing pattern Z2") and r["status"] == "optimal" for r in steps), steps
    assert 0 < len(s["dispatch"]["swing_zones"]["Z2"]["aerated_periods"]) < fenwhistle_6.horizon.n_periods
    assert s["infeasibility"] == []
