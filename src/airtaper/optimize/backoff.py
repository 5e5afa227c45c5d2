"""Holding the DO range in continuous time: a back-off calibrated by re-simulation.

The optimiser holds each zone's DO minimum (and maximum) at its time points (two Radau
points per step). Between them, and in the true solution of the same equations, the DO
goes further: after an airflow step at a period boundary the DO of a zone moves with a
time constant of minutes, faster than the points resolve. On the demo the independent
simulator found the DO 0.031 mg/L below the minimum, 5-15 minutes into a period; on the
demo with 4-hour periods of two 2-hour steps, 0.05 mg/L below the minimum and 0.88 mg/L
above Z6's maximum.

Method: solve; re-simulate the schedule (:func:`airtaper.optimize.verify.verify_day`,
DO extremes over continuous time); wherever a zone's lowest DO in a period is below its
minimum (or its highest above its maximum) by more than :data:`ACCEPT_mg_L`, move that
zone's DO bound in that period inwards (``m.opt.do_backoff_mg_L[zone, period]``,
``m.opt.do_max_backoff_mg_L[zone, period]``) by :data:`GAIN` times the excursion plus
:data:`CUSHION_mg_L`; re-solve warm; repeat, at most :data:`MAX_ROUNDS` times. Only the
periods that leave the range pay for it, by what the simulator measured. The gain above
1 is because the excursion between points moves less than the bound at the points (the
trajectory between them is not shifted rigidly). Extra DO constraints at interior points
of the collocation polynomial were not chosen: the polynomial of a 30-minute step cannot
follow a DO transient of minutes, so they would constrain the model's approximation, not
the DO the simulator (and the plant) shows.

The back-off is per time point, not per period: an excursion moves the bound at the points of
the model step that holds the extreme's time (:func:`points_at`), so a DO peak minutes after a
period starts does not tighten the bound at the period's end, where the load is another. An
extreme before its step's first point lies between that point and the step before's last point
(the step's start), so both are backed off (:func:`_bracket`). On the demo with six 4-hour
periods solved on 30-minute steps, Z6's dip early in a step stayed 0.021 mg/L below its minimum
through 8 rounds with the step's own points backed off by up to 0.28 mg/L (the re-solves moved
nothing: the points were not where the DO dipped); with the step's start backed off too, one round
held it to 1e-4 mg/L.

The minimum first. The DO minimum is the promise (the plant's nitrification; docs/optimization.md:
the re-simulated continuous DO at least the minimum less :data:`TARGET_mg_L`); a DO maximum is an
operating band (over-aeration, DO carried into anoxic zones). A round that backs
off both a minimum and a maximum and whose re-solve fails is solved again with the minimum's
back-offs alone, in full, before any damping (:func:`_attempts`); when that solves, the maximum
has given way for the rest of the rounds (``max_given_way``) and its excursions in the last
re-simulated day are returned (``max_excursions_mg_L``, "zone/period" -> mg/L) for the summary's
messages; the verification still judges them by its tolerance, so nothing is hidden. On the demo
with six 4-hour periods solved on 30-minute steps, Z6 at its least airflow (380 Sm3/h) in period 3
saw its DO go 1.0 -> 2.5 -> 1.0 mg/L, carried from the zones upstream: both of its bounds bound
inside one period; backing off both (or the maximum alone) failed, the minimum alone converged.
Where both back-offs fit, :func:`_keep_band_open` gives the minimum its share of the band first.

Coarse model steps (longer than :data:`REFINED_STEP_H`): back-off rounds on those steps are tried
first, and the study is solved again on :data:`REFINED_STEP_H` steps (``refine`` in the result,
:func:`refined_steps_per_period`; :func:`airtaper.optimize.diurnal.run_optimization` does it, once)
only when they cannot hold the range. Rule: (a) an excursion above :data:`LARGE_mg_L` runs no round:
that size is the step's error, not the points'. On the demo with six 4-hour periods of one step
(two points) the model put Z6's DO at 1.99 mg/L at 09:20 where the simulator had 1.29, and 3.2
mg/L at 08:29 went unseen (Z6's maximum is 2.5): 0.71 mg/L, and no back-off of two points per
4 hours could follow it, while 30-minute steps left 0.044 mg/L for the back-off to take. (b) A
round whose largest excursion is not below :data:`SHRINK` times the round before's ends the
rounds: the step, not the points, misses the DO. (c) A round whose re-solve fails (also damped, also
the minimum alone). After the rounds, a schedule not verified or whose DO minimum is still more
than :data:`TARGET_mg_L` short is solved again on the finer steps (``refine_reason`` says which
rule; a round that stops by (b) with the minimum already held to :data:`TARGET_mg_L` and the verification
passed is kept: no refined study). On short steps a round that does not shrink the excursion at all ends the
rounds: without it, rounds on an excursion that does not move spent every round's re-solve. Back-off rounds on the coarse model cost a warm re-solve of the coarse problem each; the
refined study is 4-8 times larger and starts cold in its dual (on the robustness benchmark's
4-zone layered plants, about 4 CPU s per iteration against their 0.05-0.14 mg/L excursions). On
three tanks with six 4-hour periods of one step, two coarse rounds took the minimum from 0.086
mg/L short to 0.004 (5 CPU s for the whole run). Extra DO constraints at interior points of the
coarse step, or a per-step minimum over a sub-grid of it, were not chosen: the step's polynomial
cannot follow the DO within 4 hours either (above), so they would hold the model's approximation.
The refined study stages its blowers again from its own relaxed solve. Fixing the coarse study's
machines for its first solve was tried: on the 4-hour demo the coarse schedule (2,436 kWh/d, the
DO 0.71 mg/L out of range) uses a fifth less air than the refined one, its machines do not cover
the refined airflow, and the refined study spent its whole solve budget (263 iterations, exit 4).

When the rounds end. Stop rule (:data:`STOP_RULE`): no further round once the last re-simulated day is
verified and every excursion a round would take (below a DO minimum; above a DO maximum that has not given
way) is at most :data:`TARGET_mg_L`. A round backs off every excursion above :data:`ACCEPT_mg_L`, half the
target, to leave room for the next round's drift; with no next round that room buys nothing. The maximum is
held to the same 0.01 mg/L, although the verification accepts 0.05 mg/L for both bounds: the rule ends rounds, it
does not widen the band. On plant 36 of the robustness benchmark (9 zones, layered clarifier, 48 periods)
rounds 2-4 took 5, 3 and 1 zone-periods for about 230 s of a run of 624 CPU s. Run budget rule
(:data:`ROUND_BUDGET_RULE`): the rounds are optional, so they pay for their re-simulations from the run's solve
budget too (:meth:`~airtaper.optimize.attempts.SolveBudget.charge`; their re-solves always did); before each
round its cost is estimated as the last round's (re-solves and re-simulation; before round 1, the first
verification's re-simulation alone) and the rounds end when the budget left would not cover it. The schedule
kept is the last verified one (``budget_ended``, ``stop_reason``, and a message "DO back-off ended after N rounds:
run time budget ..."); on coarse steps no study is then solved again on finer ones (that would be a budget more).
``round_costs`` lists each round's zone-periods, excursion, re-solve and re-simulation CPU seconds.

The last round's re-simulation is the verification of the schedule that is reported.
"""

from __future__ import annotations

import math
import time

import pyomo.environ as pyo

from airtaper import units
from airtaper.optimize.attempts import Rung

#: What the back-off holds: the re-simulated continuous DO at least the minimum less this, mg/L.
TARGET_mg_L = 0.01
#: A zone's continuous DO may leave its range by this much without a back-off, mg/L
#: (half of :data:`TARGET_mg_L` leaves room for the next round's drift). Once a round runs, it backs off
#: every excursion above this; whether a round runs at all is the stop rule's (:data:`STOP_RULE`).
ACCEPT_mg_L = 0.005
#: Stop rule (module notes, "When the rounds end."): no further round once the last re-simulated day is verified
#: and every excursion the rounds would take (below a DO minimum, above a DO maximum that has not given way) is
#: at most :data:`TARGET_mg_L`. :data:`ACCEPT_mg_L`'s room for drift is for a next round; with none, it buys nothing.
STOP_RULE = "verified, every DO excursion within TARGET_mg_L"
#: Run budget rule (module notes): before each round, the round's cost is estimated as the last round's CPU
#: seconds (its re-solves and its re-simulation; before round 1, the first verification's re-simulation alone)
#: and the rounds end when what is left of the run's solve budget (:class:`~airtaper.optimize.attempts.SolveBudget`,
#: which the rounds' re-simulations are charged to) would not cover it; the last verified schedule is kept.
ROUND_BUDGET_RULE = "a round's estimated CPU seconds within the solve budget left"
#: Added to each measured excursion, mg/L.
CUSHION_mg_L = 0.004
#: Back-off added per mg/L of measured excursion.
GAIN = 1.5
#: Rounds of back-off and re-solve at most.
MAX_ROUNDS = 8
#: The back-offs of a zone with both a DO minimum and a maximum leave at least this
#: share of its DO range open (a band squeezed shut makes the problem infeasible).
OPEN_SHARE = 0.5
#: The back-off's re-solve: one warm Ipopt solve, no retry ladder. A failed round keeps the last
#: schedule that solved; on the 6-period demo a failing round's warm solve wandered for 600
#: iterations and the ladder after it for 5 rungs more (minutes) to end in the same place.
#: The demo's back-off re-solves take 10-40 iterations.
#: 80 iterations: twice the most a converging one took; a failing one ran 150 iterations (470 s of wall clock
#: at a load of 5) on the demo with six 4-hour periods solved on 30-minute steps.
RESOLVE = Rung("DO back-off re-solve", {"mu_strategy": "adaptive", "max_iter": 80})
#: A back-off round whose re-solve fails is tried again with its new back-offs times DAMPING, at most
#: DAMPED_TRIES times, before it is undone. On the demo with six 4-hour periods on 30-minute steps, round 1
#: asked 0.070 mg/L off Z6's maximum at the step of its peak (Z6 at its least airflow, its DO peak carried
#: from the zones upstream): the re-solve failed (150 iterations), with half of each back-off it converged in
#: 19 iterations.
DAMPING = 0.5
DAMPED_TRIES = 2
#: Coarse model steps (longer than :data:`REFINED_STEP_H`): an excursion above this, mg/L, is the step's
#: error, not the points': no back-off round on those steps, the study is solved again on finer ones. On the
#: demo with six 4-hour periods of one step the coarse schedule left Z6's range by 0.71 mg/L (the model had
#: 1.99 mg/L where the simulator had 1.29); the 4-zone layered plants of the robustness benchmark by
#: 0.05-0.14 mg/L, which back-off rounds on the coarse steps take (module notes).
LARGE_mg_L = 0.25
#: Coarse model steps: a round whose largest excursion is not below SHRINK times the round before's ends the
#: back-off there (the model's step, not its points, is what misses the DO, and the study is solved again on
#: finer ones unless the minimum is held to :data:`TARGET_mg_L` already); common practice (no source) for a
#: fixed-point iteration that should contract. On short steps (no finer study to fall back on) the rounds end
#: when a round does not shrink the excursion at all: on the demo (24 one-hour periods) round 1 took it from
#: 0.029 to 0.024 mg/L (0.83 x) and round 2 held it to 0.005.
SHRINK = 0.8
#: Model step (h) of a study solved again when the back-off on longer steps cannot hold the
#: DO range (module notes): the demo's own step, where the back-off is known to converge.
REFINED_STEP_H = 0.5
#: First rung of the study solved again on :data:`REFINED_STEP_H` steps, started from the coarse
#: schedule's re-simulated day (:func:`refined_options`); its staging rounds start there too.
REFINED_START = Rung("start from the coarse schedule", {"mu_strategy": "adaptive"})
#: Iterations of the refined study's first solve at most; when it has not converged by then there is no retry
#: ladder: the elastic solve says at once which limit gives (:func:`refined_first_rung`). A refined study with
#: no feasible point near its start spends seconds per iteration in MUMPS refactorisations (dual infeasibility
#: 1e14, regularisation 1e7-1e9): on the demo with blower B3 out on six 4-hour periods it ran 443 CPU s to an
#: unverified exit 4, with this cap 33 CPU s to exit 3 naming the blowers' turndown (load 5-8). The refined
#: studies that converge start near their optimum (the coarse schedule's re-simulated day): the 4-hour demo's
#: took 40 iterations, with every zone's alpha x 0.97 45 and x 1.03 42 (measured 3 December 2026): a solve
#: that stops at the cap still converging (:data:`REFINED_DIVERGING_DUAL`) is continued once, with the same cap.
REFINED_MAX_ITER = 50
#: A refined solve that stops at :data:`REFINED_MAX_ITER` with its (scaled) dual infeasibility below this is still
#: converging and is continued once (:func:`still_converging`); above it, the elastic solve follows. Measured on six
#: 4-hour periods of the demo: the converging refined solve's dual infeasibility peaked at 1.2e3 (iteration 15) and
#: was 0.09 at iteration 30; with B3 out the primal infeasibility stalled at 0.08-0.12 from iteration 16 while the
#: dual infeasibility climbed past 1e4 (iteration 17), 2.4e6 (37) and 8e9 (50).
REFINED_DIVERGING_DUAL = 1e6


def shortfalls(plant, day_do_min: dict, backoff: dict, periods, day_do_max: dict | None = None,
               backoff_max: dict | None = None, swing_states: dict | None = None) -> tuple[dict, dict] | dict:
    """(zone, period) -> excursion (positive, mg/L) below the minimum [and above the maximum].

    Only the zones the optimiser holds to the bound (keys of ``backoff`` / ``backoff_max``).
    A swing zone's minimum counts only in periods it is aerated after an aerated period
    (``swing_states``: zone -> on/off per period): off it has no minimum, and in the
    period it is switched on its DO rises from nothing (the optimiser does not hold the
    minimum in that period's first step either). Without ``day_do_max`` returns the
    minimum's dict only.
    """
    low = {}
    swing_states = swing_states or {}
    for z, lows in day_do_min.items():
        zone = plant.zone(z)
        if zone.do_min_mg_L is None or (z, periods[0]) not in backoff:
            continue
        for p in periods:
            on = swing_states.get(z)
            if on is not None and not (on[p - 1] and on[p - 2]):
                continue
            short = zone.do_min_mg_L - float(lows[p - 1])
            if short > ACCEPT_mg_L:
                low[z, p] = short
    if day_do_max is None:
        return low
    high = {}
    for z, highs in day_do_max.items():
        zone = plant.zone(z)
        if zone.do_max_mg_L is None or (z, periods[0]) not in (backoff_max or {}):
            continue
        for p in periods:
            over = float(highs[p - 1]) - zone.do_max_mg_L
            if over > ACCEPT_mg_L:
                high[z, p] = over
    return low, high


def _steps(m) -> list[tuple[float, list]]:
    """(end hour, time points) of every model step, in time order."""
    seen, out = set(), []
    for t in m.STEPS:
        pts = tuple(m.step_points[t])
        if pts not in seen:
            seen.add(pts)
            out.append((float(m.point_hour[pts[-1]]), list(pts)))
    return sorted(out)


def points_at(steps: list[tuple[float, list]], hour: float) -> list:
    """The time points of the model step whose interval (start, end] holds ``hour`` (periodic day).

    ``steps``: :func:`_steps`. An extreme exactly at a step's start belongs to the step before
    it: the model's value there is that step's last point (and 0 h is 24 h).
    """
    h = hour % units.HOURS_PER_DAY
    if h <= 1e-9:
        h = units.HOURS_PER_DAY
    for end, pts in steps:
        if end >= h - 1e-9:
            return pts
    return steps[-1][1]


def _excursion_points(m, ex, found: dict, column: str) -> dict:
    """(zone, period) excursions -> (zone, time point) excursions, at the step of the extreme's time.

    ``ex``: the simulated day's DO extremes (period 0-based, zone, ``<column>_time_h``).
    """
    steps = _steps(m)
    when = {(r.zone, int(r.period) + 1): float(getattr(r, f"{column}_time_h")) for r in ex.itertuples()}
    out: dict = {}
    for (z, p), s in found.items():
        for t in _bracket(m, steps, when[z, p]):
            out[z, t] = max(out.get((z, t), 0.0), s)
    return out


def _bracket(m, steps: list[tuple[float, list]], hour: float) -> list:
    """The time points around ``hour``: those of its step (:func:`points_at`) and, when ``hour`` comes before
    the step's first point, the step before's last point too (the DO there is the step's start, and a dip
    minutes after a step starts lies between that point and the step's first)."""
    pts = points_at(steps, hour)
    h = hour % units.HOURS_PER_DAY
    if h <= 1e-9:  # 0 h is 24 h, the day's last point
        return pts
    if len(pts) > 1 and h < float(m.point_hour[pts[0]]) - 1e-9:
        k = [i for i, (_end, p) in enumerate(steps) if p == pts][0]
        return [steps[k - 1][1][-1], *pts]
    return pts


def _keep_band_open(plant, values) -> None:
    """Limit the back-offs of a zone and time point so :data:`OPEN_SHARE` of its DO range stays open.

    The minimum comes first (it is what the plant needs); the maximum's back-off gets
    what room is left.
    """
    low, high = values
    for (z, t), b_hi in high.items():
        zone = plant.zone(z)
        room = (1.0 - OPEN_SHARE) * (zone.do_max_mg_L - (zone.do_min_mg_L or 0.0))
        b_lo = min(low.get((z, t), 0.0), room)
        if (z, t) in low:
            low[z, t] = b_lo
        high[z, t] = min(b_hi, room - b_lo)


def _by_period(m, values: dict) -> dict:
    """(zone, time point) -> back-off, as "zone/period" -> the period's largest back-off (the summary's form)."""
    out: dict = {}
    for (z, t), v in values.items():
        if v > 0.0:
            key = f"{z}/{m.period_of_step[t]}"
            out[key] = max(out.get(key, 0.0), v)
    return out


def hold_do(study, verify, progress=None, relax=None, coarse: bool = False) -> dict:
    """Back-off rounds on a solved :class:`~airtaper.optimize.diurnal.DiurnalOptimisation`.

    ``verify()`` re-simulates the current schedule and returns ``(verification dict,
    SimDay)``. Returns ``{"verification", "day" (the last re-simulated SimDay), "rounds", "backoff_mg_L", "backoff_max_mg_L",
    "largest_backoff_mg_L", "backed_off_points", "energy_before_kWh_per_day", "seconds",
    "resolve_failed", "relaxed"}`` (the back-offs as "zone/period" -> the period's largest);
    the model is left at the last schedule that solved. A round whose re-solve fails is tried again with
    :data:`DAMPING` times its new back-offs (at most :data:`DAMPED_TRIES` times, ``failed_resolves`` counts
    the failed re-solves); when none solves the round is undone alone: the back-offs, schedule and
    verification of the rounds before it are kept (``resolve_failed``). ``relax()``, when given, is called once
    before the first re-solve: the staged blowers' fixed machine set caps the airflow of every
    period, and a back-off that needs more air than that set gives has no solution until the
    machines are chosen again (:func:`airtaper.optimize.staging.redispatch` does that on the
    final schedule). ``coarse``: the model's steps are longer than :data:`REFINED_STEP_H`: the rounds
    stop early by the module notes' rule and ``refine`` (with ``refine_reason``) says the study must
    be solved again on finer steps. A round with both bounds' back-offs whose re-solve fails is tried
    with the minimum's alone first (``max_given_way``, ``max_excursions_mg_L``; module notes).
    """
    m = study.m
    b = m.opt
    periods = list(m.PERIODS)
    params = (b.do_backoff_mg_L, b.do_max_backoff_mg_L)
    values = [{k: float(pyo.value(v)) for k, v in prm.items()} for prm in params]
    # shortfalls() asks per zone and period which zones the optimiser holds to a bound
    held = [{(z, p): 0.0 for (z, _t) in vals for p in periods} for vals in values]
    t0 = time.perf_counter()
    energy0 = study.energy_kWh_per_day()
    c0 = time.process_time()
    ver, day = verify()
    round_cpu_s = time.process_time() - c0  # the cost of the next round, estimated (ROUND_BUDGET_RULE)
    round_costs: list[dict] = []  # per round: zone-periods, re-solve and re-simulation CPU s
    kept = None  # the last verified schedule at a round's start: (variables, back-offs, ver, day, result)
    budget_ended = False
    held_to_target = False
    rounds = 0
    damped = 0  # re-solves that failed and were tried again with less back-off
    failed = False
    relaxed = False
    refine = False
    max_given_way = False  # a round with both sides failed and the minimum's back-offs alone solved
    worst = None  # the largest excursion of the round before (must shrink by SHRINK)
    stalled = False  # the rounds ended because a round did not shrink the excursion
    why = None  # coarse steps: why the back-off there ended unverified (refine)
    while rounds < MAX_ROUNDS:
        ex = day.do_extremes
        highs = {z: g.sort_values("period")["do_max_mg_L"].to_numpy() for z, g in ex.groupby("zone", sort=False)}
        found = shortfalls(study.plant, day.do_min_by_period(), held[0], periods, highs, held[1],
                           study.problem.swing_states)
        if max_given_way:  # the maximum gave way for good: its excursions stay in the verification, visible
            found = (found[0], {})
        if not any(found):
            break
        now = max(v for f in found for v in f.values())
        if ver["verified"] and now <= TARGET_mg_L:
            # the stop rule (STOP_RULE): what the verification and the target accept needs no further round
            held_to_target = True
            why = f"every DO excursion within {TARGET_mg_L:g} mg/L and verified"
            break
        if study.budget.available() < round_cpu_s:
            # the run budget rule (ROUND_BUDGET_RULE): the solve budget cannot pay another round
            budget_ended = True
            why = (f"run time budget (a round costs about {round_cpu_s:.0f} CPU s, {study.budget.available():.0f} s "
                   "of the solve budget left)")
            if not ver["verified"] and kept is not None:  # the last verified schedule, not the last one
                snap, vals, ver, day, study.result = kept
                _restore(snap)
                values = [dict(v) for v in vals]
                _set_backoffs(params, values)
            break
        if coarse and now > LARGE_mg_L:
            why = f"an excursion of {now:.3f} mg/L (more than {LARGE_mg_L:g}: the step, not the points)"
            break
        if worst is not None and (now > SHRINK * worst if coarse else now >= worst):
            # coarse steps: a round that does not shrink the excursion below SHRINK x is the step's error, and the
            # study is solved again on finer steps; on short steps (no such fallback) a round that does not shrink
            # it at all ends the rounds: the back-off does not act where the DO leaves its range
            why = (f"the excursion went from {worst:.3f} to {now:.3f} mg/L in a round (not below "
                   + (f"{SHRINK:g} x)" if coarse else "the round before's)"))
            stalled = True
            break
        worst = now
        rounds += 1
        if progress is not None:
            progress.phase(f"holding the DO range between time points: back-off round {rounds} "
                           f"({sum(len(f) for f in found)} zone-periods)")
        previous = [dict(v) for v in values]
        snapshot = [(v, v.value) for v in m.component_data_objects(pyo.Var, descend_into=True)]
        last = (ver, day, study.result)
        if ver["verified"]:
            kept = (snapshot, [dict(v) for v in values], ver, day, study.result)
        spent0 = study.budget.spent
        steps = [_excursion_points(m, ex, excursions, column)
                 for excursions, column in zip(found, ("do_min", "do_max"))]
        for attempt, (share, both) in enumerate(_attempts(bool(steps[0]) and bool(steps[1]))):
            if attempt:  # the re-solve failed: less back-off, from the last schedule that solved
                _restore(snapshot)
                if progress is not None:
                    progress.phase(f"back-off round {rounds}: the re-solve failed; {share:g} of its back-offs"
                                   + ("" if both else ", the DO minimum's alone"))
            values = [dict(v) for v in previous]
            for vals, step in zip(values, steps if both else steps[:1]):
                for k, s in step.items():
                    vals[k] += share * (GAIN * s + CUSHION_mg_L)
            _keep_band_open(study.plant, values)
            _set_backoffs(params, values)
            if relax is not None and not relaxed:
                # before the first re-solve, not after it fails: a re-solve against the fixed machine set
                # wandered for 170+ iterations (infeasibility 2e-2) on the 6-period demo before failing
                relaxed = True
                relax()
            # warm from the last schedule that solved (its multipliers, not a failed attempt's)
            r = study.resolve_once(RESOLVE, warm=last[2] if attempt and last[2] is not None else True)
            if r is not None and r.ok:
                max_given_way = max_given_way or not both
                break
            damped += 1
            if study.budget.exhausted:
                break
        if r is None or not r.ok:  # this round undone alone: the back-offs and schedule of the rounds before it
            _set_backoffs(params, previous)
            values = previous
            _restore(snapshot)
            ver, day, study.result = last
            failed = True
            why = why or "a back-off re-solve failed"
            break
        resolve_s = study.budget.spent - spent0
        c0 = time.process_time()
        ver, day = verify()
        resim_s = time.process_time() - c0
        study.budget.charge(resim_s)  # the rounds pay for their re-simulations (ROUND_BUDGET_RULE)
        round_cpu_s = resolve_s + resim_s
        round_costs.append({"zone_periods": sum(len(f) for f in found), "excursion_mg_L": round(now, 5),
                            "resolve_cpu_s": round(resolve_s, 2),
                            "resimulation_cpu_s": round(resim_s, 2), "simulated_days": ver.get("simulated_days")})
    over = {}
    if max_given_way:  # what the maximum gave: its excursions in the last re-simulated day, visible in the summary
        ex = day.do_extremes
        highs = {z: g.sort_values("period")["do_max_mg_L"].to_numpy() for z, g in ex.groupby("zone", sort=False)}
        over = {f"{z}/{p}": round(v, 4) for (z, p), v in
                shortfalls(study.plant, day.do_min_by_period(), held[0], periods, highs, held[1])[1].items()}
    if coarse:
        left = shortfalls(study.plant, day.do_min_by_period(), held[0], periods, swing_states=study.problem.swing_states)
        if not budget_ended and (not ver["verified"] or max(left.values(), default=0.0) > TARGET_mg_L):
            # the back-off on the coarse steps could not hold the range: the study is solved again on finer steps
            # (not when the run's budget ended the rounds: a refined study would spend a budget of its own)
            refine = True
            why = why or f"{rounds} back-off rounds"
    return {"verification": ver, "day": day, "rounds": rounds, "resolve_failed": failed, "failed_resolves": damped,
            "relaxed": relaxed, "stalled": stalled, "stop_reason": why, "held_to_target": held_to_target,
            "budget_ended": budget_ended, "round_costs": round_costs,
            "refine": refine, "refine_reason": why if refine else None,
            "max_given_way": max_given_way, "max_excursions_mg_L": over,
            "backoff_mg_L": _by_period(m, values[0]), "backoff_max_mg_L": _by_period(m, values[1]),
            "backed_off_points": sum(v > 0.0 for vals in values for v in vals.values()),
            "largest_backoff_mg_L": float(max([*values[0].values(), *values[1].values()], default=0.0)),
            "energy_before_kWh_per_day": energy0, "seconds": time.perf_counter() - t0}


def _set_backoffs(params, values) -> None:
    """Write the back-offs (per Param: point -> mg/L) into the model's back-off Params."""
    for prm, vals in zip(params, values):
        for k, v in vals.items():
            prm[k] = v


def _restore(snapshot) -> None:
    """Put every variable back to its value in ``snapshot`` ((variable, value) pairs): a schedule kept before."""
    for v, value in snapshot:
        v.set_value(value, skip_validation=True)


def _attempts(both: bool) -> list[tuple[float, bool]]:
    """(share of the round's new back-offs, with the maximum's) of each re-solve of a round, in order.

    A round that backs off both a minimum and a maximum is tried again with the minimum's alone, in full,
    before any damping: the maximum never costs the minimum its back-off (module notes, "The minimum first").
    """
    if not both:
        return [(DAMPING ** k, True) for k in range(DAMPED_TRIES + 1)]
    return [(1.0, True), *((DAMPING ** k, False) for k in range(DAMPED_TRIES + 1))]


def refined_options(options, steps_per_period: int):
    """The options of the study solved again on ``steps_per_period`` shorter steps (module notes).

    No second pre-screen; a solve budget of its own, the run's budget again (``solve_budget_s``: what the
    coarse solves spent is not taken from it, so a run's solves take at most twice the budget); the first
    solve and the staging rounds start at :data:`REFINED_START`'s barrier (the start is the coarse
    schedule's re-simulated day, near the optimum); ``refined``: the first solve is
    :func:`refined_first_rung` alone, and when it does not converge the elastic solve follows (no ladder).
    The staging rounds keep the rest of the retry ladder.
    """
    from dataclasses import replace

    return replace(options, steps_per_period=steps_per_period, prescreen=False, refined=True,
                   ladder=(REFINED_START, *options.ladder[1:]))


def refined_first_rung(rung: Rung, continued: bool = False) -> Rung:
    """``rung`` (the refined study's first) capped at :data:`REFINED_MAX_ITER` iterations (``continued``: its
    continuation from where the first stopped)."""
    name = f"{rung.name}{', continued' if continued else ''} (at most {REFINED_MAX_ITER} iterations)"
    return Rung(name, {**rung.options, "max_iter": REFINED_MAX_ITER}, rung.square_solve, rung.airflow_factor,
                rung.user_scaling)


def still_converging(result) -> bool:
    """A solve that stopped at its iteration cap with its dual infeasibility below :data:`REFINED_DIVERGING_DUAL`."""
    return result.status.value == "iteration_limit" and result.dual_infeasibility < REFINED_DIVERGING_DUAL


def refined_steps_per_period(period_h: float, steps_per_period: int) -> int | None:
    """Model steps per period of :data:`REFINED_STEP_H`, or None when the step is that short already."""
    if period_h / steps_per_period <= REFINED_STEP_H * (1 + 1e-9):
        return None
    return int(math.ceil(period_h / REFINED_STEP_H - 1e-9))


__all__ = ["ACCEPT_mg_L", "CUSHION_mg_L", "DAMPED_TRIES", "DAMPING", "GAIN", "LARGE_mg_L", "MAX_ROUNDS",
           "OPEN_SHARE", "REFINED_DIVERGING_DUAL", "REFINED_MAX_ITER", "REFINED_START", "REFINED_STEP_H", "RESOLVE",
           "ROUND_BUDGET_RULE", "STOP_RULE",
           "SHRINK", "TARGET_mg_L",
           "hold_do", "points_at", "refined_first_rung", "refined_options", "refined_steps_per_period", "shortfalls",
           "still_converging"]
