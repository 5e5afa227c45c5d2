"""The outer loop that settles the integer decisions (blower staging, swing zones) with the process.

Scheme (docs/optimization.md, "Blower staging and swing zones"):

0. **relaxed solve** (done by :meth:`DiurnalOptimisation.solve`): swing zones free from 0 to
   their maximum with no minimum, and the blower power the convex envelope of the least
   power over every set of machines in service (and of no air) - a convex under-estimate
   of the staged power, so the relaxed optimum is a lower bound of the cost it can reach;
2. **swing states** (:func:`settle_swing_states`): the schedule is re-solved warm with every
   swing zone aerated all day (the reference pattern, feasible whenever aerating helps at
   all). Then a few candidate patterns are solved warm from it, each switching a zone off
   in the periods where the relaxed airflow is below a threshold fraction of its minimum
   when on (:data:`SWING_THRESHOLDS`, rounded to the switches limit by
   :func:`airtaper.optimize.dispatch.swing_states`). The pattern with the lowest objective
   is kept, so the result never costs more than aerating all day (at the relaxed blower
   power). While on, the diffuser, mixing and DO minima hold; while off, the zone gets no
   air and its kinetics are anoxic (the ASM1 switching functions at no oxygen); its
   balances are positive-preserving (:func:`airtaper.model.train.switched_balance`);
3. **dispatch round** ``r = 1, 2, ...``: the machines chosen by the MILP
   (:func:`airtaper.optimize.dispatch.solve_dispatch`) on the current airflow and
   discharge pressure of every period are fixed in the nonlinear schedule (their
   least-power curve, airflow range and pressure limit) and the schedule is re-solved
   warm. The loop stops when the dispatch repeats (nothing left to change), when the
   total cost changes by less than :data:`COST_RTOL` between rounds, after
   :data:`MAX_ROUNDS` rounds, or when a round costs more than the best so far (that round
   is undone: the result never costs more than the best round).

Starts: the all-day-aerated solve starts cold from the relaxed point (its values, Ipopt's own
multipliers): the relaxed solve's multipliers belong to a problem where the swing zones may take
no air at all, so they are no guide to the one where they must take their minimum all day. The
first dispatch round starts from the kept swing pattern's multipliers: the candidates are solved
after it, so "the last solve's" multipliers would be the last candidate's, whose zones were off in
other periods. When the all-day pattern does not solve, the candidates are still tried, each
cold from the relaxed point: a swing zone whose DO minimum cannot be held even at full air in some
periods may still be switched off in them; only when no pattern solves is the elastic solve asked
why. (The candidates follow the relaxed airflow: a zone the relaxed optimum aerates above its
minimum all day, as plant 23 of the robustness benchmark at 1.94 x its load, gets none, and the
elastic solve names the periods where aerating it all day falls short.)

Why the swing scheme: the relaxed optimum ranks the periods by how much air the process
wants in the swing zone, so the patterns worth trying switch it off where that air is least;
enumerating every pattern (over ten thousand in 24 periods under four switches) is out of
reach at a nonlinear solve each, and a penalty continuation on 0/1 variables inside the
nonlinear solve makes every solve non-convex with weights to tune. Each candidate costs
one warm solve, and the reference pattern bounds the result.

Why this scheme: the process model is nonlinear and large (tens of thousands of
variables), the integer decisions are few and enter only through the air side; a
mixed-integer nonlinear solve of the whole day is out of reach, while each dispatch is
a MILP of a few hundred binaries solved to proven optimality in well under a second. Each
nonlinear re-solve starts from the previous round (warm), so later rounds are cheap.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np
import pyomo.environ as pyo

from airtaper.layout.types import Layout
from airtaper.plant import AirSide, ResolvedPlant, resolve_plant
from airtaper.optimize.dispatch import Bill, Dispatch, evaluate, machines_of, set_lines, solve_dispatch, swing_states
from airtaper.optimize.attempts import Rung
from airtaper.optimize.problem import Problem, max_power_line_kW, set_power_lines, set_swing_states
from airtaper.physics.blower import blower_power_kW

if TYPE_CHECKING:  # pandas is imported where the table is built (a lazy import)
    import pandas as pd

#: Relative change of the total cost below which the rounds stop (0.5 %).
COST_RTOL = 0.005
#: Most dispatch rounds (each one a warm re-solve of the nonlinear schedule).
MAX_ROUNDS = 4
#: Thresholds on a swing zone's relaxed airflow (as a fraction of its minimum when on) below which
#: a period is tried off, most switching first: each gives one candidate on/off pattern (module notes).
SWING_THRESHOLDS = (1.0, 0.5, 0.2)
#: The solve of one candidate swing pattern: one warm attempt from the all-day-aerated schedule
#: with an iteration cap (a pattern the process can live with converges in a few tens of
#: iterations; one it cannot would wander for hundreds).
SWING_RUNG = Rung("swing states", {"mu_strategy": "adaptive", "max_iter": 300})
#: Relative tolerance of the post-solve feasibility check of machines and grids.
CHECK_RTOL = 1e-4


@dataclass
class StagingOutcome:
    result: object  # solver result of the accepted round (None: the fixed problem failed)
    dispatch: Dispatch | None
    rounds: list = field(default_factory=list)
    findings: list = field(default_factory=list)
    converged: bool = False
    reason: str = ""
    swing_states: dict | None = None


# --- air state of a schedule -----------------------------------------------------------------
def kw_per_equivalent(air: AirSide, discharge_gauge_kPa) -> np.ndarray:
    """Isentropic kW per Sm3/h of equivalent airflow at each period's discharge pressure and inlet temperature."""
    d = np.asarray(discharge_gauge_kPa, dtype=float)
    t_in = air.inlet_temperature_C
    return np.asarray(blower_power_kW(1.0, t_in, air.inlet_pressure_kPa, air.site_pressure_kPa + d, 1.0), dtype=float)


def model_air_state(prob: Problem) -> dict:
    """Per period: total airflow, discharge gauge pressure, kW per equivalent Sm3/h, air the zones could still take."""
    m, b, states = prob.m, prob.block, prob.swing_states
    air = m.train_data.plant.air
    P = list(m.PERIODS)
    q = np.array([float(pyo.value(b.total_airflow_Sm3_h[p])) for p in P])
    header = np.array([float(b.header_gauge_kPa[p].value) for p in P])
    d = np.asarray(air.discharge_gauge_kPa(header, q), dtype=float)
    room = np.zeros(len(P))
    for z in b.ZONES:
        hi = air.zone(z).airflow_max_Sm3_h
        for i, p in enumerate(P):
            if not (states is not None and z in states and not states[z][i]):
                room[i] += max(0.0, hi - float(m.airflow_Sm3_h[z, p].value))
    return {"demand_Sm3_h": q, "discharge_gauge_kPa": d, "kw_per_equivalent": kw_per_equivalent(air, d),
            "excess_max_Sm3_h": room}


def day_dispatch(plant: ResolvedPlant | Layout, day, objective: str) -> Dispatch | None:
    """The same dispatch rule applied to a simulated day (the baseline): per-period mean airflow and pressure."""
    return steps_dispatch(plant, day.airflow, day.period, objective)


def steps_dispatch(plant: ResolvedPlant | Layout, airflow_by_zone: dict, period_of_step, objective: str
                   ) -> Dispatch | None:
    """The dispatch of a simulated day given per step: zone id -> airflow (Sm3/h) at every step and the
    0-based period of every step. Each period's mean airflow and discharge pressure go to the MILP, as
    for the optimised schedule. None when the plant has no diffused zone or no blower in service (a layout
    is resolved first)."""
    plant = resolve_plant(plant)
    machines = machines_of(plant)
    air = plant.air
    if not air.zones or not any(not mm.out_of_service for mm in machines):
        return None
    n = plant.n_periods
    flows = {z.id: np.asarray(airflow_by_zone[z.id], dtype=float) for z in air.zones}
    header = air.header_pressure_gauge_kPa(flows)
    total = np.sum([flows[z] for z in flows], axis=0)
    d_step = np.asarray(air.discharge_gauge_kPa(header, total), dtype=float)
    per = np.asarray(period_of_step, dtype=int)
    q = np.array([total[per == k].mean() for k in range(n)])
    d = np.array([d_step[per == k].mean() for k in range(n)])
    room = np.zeros(n)
    for z in air.zones:
        if z.kind == "aerated":
            hi = z.airflow_max_Sm3_h
            room += np.maximum(0.0, hi - np.array([flows[z.id][per == k].mean() for k in range(n)]))
    return solve_dispatch(machines, q, d, kw_per_equivalent(air, d), Bill.of(plant, objective), plant.period_h, room)


def bill_day_by_dispatch(plant: ResolvedPlant | Layout, day, objective: str) -> Dispatch | None:
    """Bill a simulated day (a baseline) by the dispatch rule: its energy and cost replaced by the
    dispatch's (like with like against the staged optimum). Returns the dispatch (None: left as it was)."""
    bd = day_dispatch(plant, day, objective)
    if bd is not None:
        bill = bd.bill(plant)
        day.energy_kWh_per_day = bill["energy_kWh_per_day"]
        day.cost_per_day = bill["cost_per_day"]
    return bd


# --- applying decisions ------------------------------------------------------------------------
def apply_dispatch(m, dp: Dispatch) -> None:
    """Fix the running machines of every period in the nonlinear schedule (see module notes)."""
    b = m.opt
    lines = {}
    for i, p in enumerate(m.PERIODS):
        on = dp.running[:, i]
        sel = [mm for mm, r in zip(dp.machines, on) if r]
        d = float(dp.discharge_gauge_kPa[i])
        lines[p] = set_lines(dp.machines, on, d) if sel else []
        b.staging_min_Sm3_h[p].fix(sum(mm.range_at(d)[0] for mm in sel))
        b.staging_max_Sm3_h[p].fix(sum(mm.range_at(d)[1] for mm in sel))
        b.staging_pressure_max_kPa[p].fix(min((mm.pressure_max_gauge_kPa for mm in sel), default=0.0))
    set_power_lines(b, lines)
    for p in m.PERIODS:
        b.power_kW[p].set_value(max_power_line_kW(b, p))
    if b.component("peak_kW") is not None and not b.peak_kW.fixed:
        b.peak_kW.set_value(max(b.power_kW[p].value for p in m.PERIODS))


def final_dispatch(prob: Problem, dp: Dispatch) -> Dispatch:
    """The accepted on/off decisions evaluated at the solved schedule's airflow and pressure."""
    s = model_air_state(prob)
    return evaluate(dp.machines, dp.running, s["demand_Sm3_h"], s["discharge_gauge_kPa"], s["kw_per_equivalent"],
                    float(prob.m.train_data.period_h), status=dp.status, seconds=dp.seconds)


def round_cost(plant: ResolvedPlant, dp: Dispatch, objective: str) -> float:
    bill = dp.bill(plant)
    return bill["cost_per_day"] if objective == "cost" and bill["cost_per_day"] is not None \
        else bill["energy_kWh_per_day"]


def _snapshot(m):
    return [(v, v.value, v.fixed) for v in m.component_data_objects(pyo.Var, descend_into=True)]


def _restore(snap) -> None:
    for v, val, fixed in snap:
        v.set_value(val, skip_validation=True)
        if fixed and not v.fixed:
            v.fix()
        elif not fixed and v.fixed:
            v.unfix()


# --- the loop ----------------------------------------------------------------------------------
def relaxed_swing_fractions(prob: Problem) -> dict:
    """Swing zone -> relaxed airflow per period as a fraction of its minimum when on."""
    m, b = prob.m, prob.block
    out = {}
    for z in b.SWING_ZONES:
        d = m.aeration[z]
        qmin = max(pyo.value(m.diffuser_count[z]) * d.diffuser_airflow_min_Sm3_h,
                   prob.settings.mixing_airflow_min_Sm3_h_m2[z] * d.zone.area_m2)
        out[z] = np.array([float(m.airflow_Sm3_h[z, p].value) for p in m.PERIODS]) / max(qmin, 1e-9)
    return out


def swing_candidates(fractions: dict, plant: ResolvedPlant) -> list[dict]:
    """Candidate on/off patterns from the relaxed fractions (:data:`SWING_THRESHOLDS`), distinct, none all-on."""
    out = []
    for theta in SWING_THRESHOLDS:
        states = {z: swing_states((f >= theta).astype(float), plant.zone(z).max_switches_per_day)
                  for z, f in fractions.items()}
        if all(v.all() for v in states.values()) or any(
                all((states[z] == c[z]).all() for z in states) for c in out):
            continue
        out.append(states)
    return out


def settle_swing_states(study, rounds: list):
    """Choose the swing zones' on/off pattern on the relaxed solve (module notes); returns the solver
    result of the chosen pattern (None: no pattern solves, the all-day-aerated one included)."""
    prob = study.problem
    m, b = prob.m, prob.block
    prog = study.progress
    fractions = relaxed_swing_fractions(prob)
    relaxed = _snapshot(m)
    t0 = time.perf_counter()
    set_swing_states(prob, {z: np.ones(len(m.PERIODS), dtype=bool) for z in b.SWING_ZONES})
    prog.phase("swing zones: aerated all day (the reference pattern)")
    # cold from the relaxed point (its values, not its multipliers): module notes, "Starts"
    res = study.resolve(warm=False, name="swing zones aerated all day")
    ok = res is not None and res.ok
    rounds.append({"round": 0, "step": "swing zones aerated all day", "status": res.status.value if res
                   else "failed", "objective": float(pyo.value(b.objective)) if ok else None,
                   "iterations": res.iterations if res is not None else None,
                   "seconds": time.perf_counter() - t0})
    # the all-day pattern failing does not mean every pattern does: a swing zone that cannot hold its DO
    # minimum at full air in the peak hours may still be switched off then (module notes, "Starts")
    best = (float(pyo.value(b.objective)), _snapshot(m), prob.swing_states, res) if ok else None
    reference = best[1] if ok else relaxed
    for states in swing_candidates(fractions, study.plant):
        if study.budget.exhausted:
            break
        t0 = time.perf_counter()
        _restore(reference)
        set_swing_states(prob, states)
        prog.phase("swing zones: " + ", ".join(
            f"{z} off in periods {', '.join(str(int(i) + 1) for i in np.flatnonzero(~v))}" for z, v in states.items()))
        r = study._ipopt(SWING_RUNG, warm_start=ok)  # from the relaxed point: cold, as the all-day solve
        obj = float(pyo.value(b.objective)) if r.ok else None
        rounds.append({"round": 0, "step": "swing pattern " + "; ".join(
            f"{z} aerated in periods {[int(i) + 1 for i in np.flatnonzero(v)]}" for z, v in states.items()),
            "status": r.status.value, "objective": obj, "iterations": r.iterations,
            "seconds": time.perf_counter() - t0})
        if r.ok and (best is None or obj < best[0]):
            best = (obj, _snapshot(m), prob.swing_states, r)
    if best is None:
        return None
    obj, snap, states, res = best
    set_swing_states(prob, states)
    _restore(snap)
    rounds.append({"round": 0, "step": "swing pattern chosen", "objective": obj,
                   "aerated_periods": {z: [int(i) + 1 for i in np.flatnonzero(v)] for z, v in states.items()}})
    study.result = res
    return res


def run_staging(study, first_result) -> StagingOutcome:
    """Settle the swing states and the blower dispatch on a relaxed solve (module notes)."""
    prob = study.problem
    m, b = prob.m, prob.block
    plant = study.plant
    objective = prob.objective
    bill = Bill.of(plant, objective)
    prog = study.progress
    out = StagingOutcome(result=first_result, dispatch=None)
    rounds = out.rounds
    if b.SWING_ZONES:
        res = settle_swing_states(study, rounds)
        out.swing_states = prob.swing_states
        if res is None or not res.ok:
            out.result = None
            out.reason = "the schedule with the swing states fixed could not be solved"
            return out
        out.result = res
    best = None  # (cost, snapshot, dispatch, result, swing states)
    last_cost = None
    r = 1
    while r <= MAX_ROUNDS:
        t0 = time.perf_counter()
        state = model_air_state(prob)
        dp = solve_dispatch(prob.machines, state["demand_Sm3_h"], state["discharge_gauge_kPa"],
                            state["kw_per_equivalent"], bill, float(m.train_data.period_h), state["excess_max_Sm3_h"])
        if dp.findings:
            out.findings = dp.findings
            out.dispatch = dp
            out.reason = "the blowers cannot meet the air demand"
            rounds.append({"round": r, "dispatch_s": dp.seconds, "shortfall_periods": len(dp.findings)})
            return out
        if best is not None and dp.same_decisions(best[2]):
            out.converged = True
            out.reason = "the dispatch repeats"
            break
        apply_dispatch(m, dp)
        prog.phase(f"staging round {r}: " + ", ".join(
            f"{mm.id} {int(dp.running[j].sum())} periods" for j, mm in enumerate(dp.machines)))
        # round 1 may go down the retry ladder, warm from the multipliers of the schedule it starts from (the
        # kept swing pattern's, not the last candidate's: module notes, "Starts"); later rounds get one warm
        # attempt from the previous round (the best round stands)
        if best is None:
            res = study.resolve(warm=out.result if out.result is not None and out.result.ok else True,
                                name="staging round 1")
        else:
            res = study._ipopt(study.options.ladder[0], warm_start=True)
        if res is None or not res.ok:
            rounds.append({"round": r, "status": "failed", "seconds": time.perf_counter() - t0})
            if best is None:
                out.result = None
                out.dispatch = dp
                out.reason = "the schedule with the machines fixed could not be solved"
                return out
            out.reason = "a round failed; the best round is kept"
            break
        fd = final_dispatch(prob, dp)
        cost = round_cost(plant, fd, objective)
        rounds.append({"round": r, "status": res.status.value, "cost": cost, "iterations": res.iterations,
                       "running": {mm.id: int(fd.running[j].sum()) for j, mm in enumerate(fd.machines)},
                       "starts": int(fd.starts.sum()), "seconds": time.perf_counter() - t0})
        if best is not None and cost > best[0]:
            rounds[-1]["accepted"] = False
            out.reason = "a round cost more than the best; undone"
            break
        rounds[-1]["accepted"] = True
        best = (cost, _snapshot(m), dp, res, prob.swing_states)
        if last_cost is not None and abs(cost - last_cost) <= COST_RTOL * abs(last_cost):
            out.converged = True
            out.reason = f"the cost changed by less than {100 * COST_RTOL:g} %"
            break
        last_cost = cost
        r += 1
    else:
        out.reason = f"{MAX_ROUNDS} rounds"
    cost, snap, dp, res, swing = best
    _restore(snap)
    prob.swing_states = swing
    out.result = res
    study.result = res
    out.dispatch = final_dispatch(prob, dp)
    out.swing_states = swing
    return out


def redispatch(prob: Problem, dp: Dispatch) -> tuple[Dispatch, bool]:
    """The least-cost machines for the final schedule's airflow and pressure.

    The last re-solves (the dispatch round's own, then the DO back-off's) move the airflow and
    the discharge pressure after the machines were chosen, so the machines of the last round
    may no longer be the cheapest set for the final schedule, or (when a machine's airflow
    range narrows with pressure) no longer cover its airflow. The dispatch is solved again on
    the final airflow and pressure, delivering them exactly (no excess air: the verified
    schedule is not changed); it replaces the old machines when they no longer cover the
    airflow or cost more. The model's power curve is set to the chosen machines' (the DO
    back-off may have relaxed it to the envelope). Returns ``(dispatch, replaced)``.
    """
    m = prob.m
    plant = m.train_data.plant
    objective = prob.objective
    old = final_dispatch(prob, dp)
    s = model_air_state(prob)
    new = solve_dispatch(prob.machines, s["demand_Sm3_h"], s["discharge_gauge_kPa"], s["kw_per_equivalent"],
                         Bill.of(plant, objective), float(m.train_data.period_h))
    uncovered = bool(np.any(old.shortfall_Sm3_h > CHECK_RTOL * np.maximum(old.demand_Sm3_h, 1.0))) or bool(
        np.any(old.airflow_Sm3_h.sum(axis=0) > old.demand_Sm3_h * (1 + CHECK_RTOL) + 1e-6))
    replace = not new.findings and not new.same_decisions(old) and (
        uncovered or round_cost(plant, new, objective) < round_cost(plant, old, objective) * (1.0 - 1e-9))
    chosen = new if replace else old
    apply_dispatch(m, chosen)  # the model's power curve is the chosen machines' (a relaxed back-off left the envelope)
    return chosen, replace


def feasibility_check(prob: Problem, dp: Dispatch) -> list[str]:
    """Every running machine within its airflow range and pressure limit; every grid within its range when on,
    at no air when off. Returns the breaches (empty when feasible)."""
    m, b, states = prob.m, prob.block, prob.swing_states
    bad = []
    tol = CHECK_RTOL
    for i, p in enumerate(m.PERIODS):
        if dp.shortfall_Sm3_h[i] > tol * max(dp.demand_Sm3_h[i], 1.0):
            bad.append(f"period {p}: {dp.shortfall_Sm3_h[i]:.1f} Sm3/h beyond the running blowers' range")
        delivered = dp.airflow_Sm3_h[:, i].sum()
        if delivered > dp.demand_Sm3_h[i] * (1 + tol) + 1e-6:
            bad.append(f"period {p}: the running blowers' minimum {delivered:.0f} Sm3/h exceeds the schedule's "
                       f"{dp.demand_Sm3_h[i]:.0f} Sm3/h")
        for j, mm in enumerate(dp.machines):
            if not dp.running[j, i]:
                continue
            q = dp.airflow_Sm3_h[j, i]
            lo, hi = mm.range_at(float(dp.discharge_gauge_kPa[i]))
            if q < lo * (1 - tol) or q > hi * (1 + tol):
                bad.append(f"period {p}: blower {mm.id} at {q:.0f} Sm3/h outside {lo:.0f}-{hi:.0f} at "
                           f"{dp.discharge_gauge_kPa[i]:.1f} kPa")
            if dp.discharge_gauge_kPa[i] > mm.pressure_max_gauge_kPa * (1 + tol):
                bad.append(f"period {p}: blower {mm.id} at {dp.discharge_gauge_kPa[i]:.1f} kPa above its "
                           f"{mm.pressure_max_gauge_kPa:g} kPa limit")
        for z in b.ZONES:
            d = m.aeration[z]
            q = float(m.airflow_Sm3_h[z, p].value)
            off = states is not None and z in states and not states[z][i]
            if off:
                if abs(q) > 1e-6:
                    bad.append(f"period {p}: swing zone {z} is off but gets {q:.1f} Sm3/h")
                continue
            lo, hi = d.airflow_range_Sm3_h
            lo = max(lo, d.diffusers * d.diffuser_airflow_min_Sm3_h,
                     prob.settings.mixing_airflow_min_Sm3_h_m2[z] * d.zone.area_m2)
            if d.kind == "swing" and states is None:
                lo = 0.0
            if q < lo * (1 - tol) or q > hi * (1 + tol):
                bad.append(f"period {p}: zone {z} at {q:.1f} Sm3/h outside its grid range {lo:.0f}-{hi:.0f}")
    return bad


def dispatch_table(plant: ResolvedPlant, dp: Dispatch) -> pd.DataFrame:
    """blowers.csv: one row per period and blower."""
    import pandas as pd

    h = plant.period_h
    starts = dp.starts
    rows = []
    for i in range(dp.running.shape[1]):
        for j, mm in enumerate(dp.machines):
            on = bool(dp.running[j, i])
            q = float(dp.airflow_Sm3_h[j, i])
            rows.append({"period_start_h": i * h, "period_end_h": (i + 1) * h, "blower": mm.id, "running": on,
                         "airflow_Sm3_h": q, "power_kW": float(dp.power_kW[j, i]),
                         "efficiency": float(mm.curve.efficiency(q)) if on and q > 0 else float("nan"),
                         "discharge_gauge_kPa": float(dp.discharge_gauge_kPa[i]), "starts": int(starts[j, i])})
    return pd.DataFrame(rows)


def dispatch_summary(plant: ResolvedPlant | Layout, dp: Dispatch) -> dict:
    """Bill split, peak and per-blower running hours and starts, for summary.json (a layout is resolved first)."""
    plant = resolve_plant(plant)
    bill = dp.bill(plant)
    h = plant.period_h
    return {
        "energy_kWh_per_day": bill["energy_kWh_per_day"],
        "energy_cost": bill["energy_cost"], "demand_charge": bill["demand_charge"],
        "start_costs": bill["start_costs"], "cost_per_day": bill["cost_per_day"],
        "peak_kW": bill["peak_kW"], "peak_period": bill["peak_period"] + 1,
        "peak_period_start_h": bill["peak_period"] * h,
        "blowers": {mm.id: {"running_h": bill["running_h"][mm.id], "starts": bill["starts"][mm.id],
                            "out_of_service": mm.out_of_service} for mm in dp.machines},
    }


__all__ = ["COST_RTOL", "MAX_ROUNDS", "StagingOutcome", "apply_dispatch", "bill_day_by_dispatch", "day_dispatch", "dispatch_summary",
           "dispatch_table", "feasibility_check", "final_dispatch", "kw_per_equivalent", "model_air_state",
           "redispatch", "run_staging", "steps_dispatch"]
