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

The last round's re-simulation is the verification of the schedule that is reported.
"""

from __future__ import annotations

import time

import pyomo.environ as pyo

#: A zone's continuous DO may leave its range by this much without a back-off, mg/L
#: (the issue's acceptance is 0.01 mg/L; half of it leaves room for the next round's drift).
ACCEPT_mg_L = 0.005
#: Added to each measured excursion, mg/L.
CUSHION_mg_L = 0.004
#: Back-off added per mg/L of measured excursion.
GAIN = 1.5
#: Rounds of back-off and re-solve at most.
MAX_ROUNDS = 8
#: The back-offs of a zone with both a DO minimum and a maximum leave at least this
#: share of its DO range open (a band squeezed shut makes the problem infeasible).
OPEN_SHARE = 0.5


def shortfalls(layout, day_do_min: dict, backoff: dict, periods, day_do_max: dict | None = None,
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
        zone = layout.zone(z)
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
        zone = layout.zone(z)
        if zone.do_max_mg_L is None or (z, periods[0]) not in (backoff_max or {}):
            continue
        for p in periods:
            over = float(highs[p - 1]) - zone.do_max_mg_L
            if over > ACCEPT_mg_L:
                high[z, p] = over
    return low, high


def _keep_band_open(layout, values) -> None:
    """Limit the back-offs of a zone and period so :data:`OPEN_SHARE` of its DO range stays open.

    The minimum comes first (it is what the plant needs); the maximum's back-off gets
    what room is left.
    """
    low, high = values
    for (z, p), b_hi in high.items():
        zone = layout.zone(z)
        room = (1.0 - OPEN_SHARE) * (zone.do_max_mg_L - (zone.do_min_mg_L or 0.0))
        b_lo = min(low.get((z, p), 0.0), room)
        if (z, p) in low:
            low[z, p] = b_lo
        high[z, p] = min(b_hi, room - b_lo)


def hold_do(study, verify, progress=None, relax=None) -> dict:
    """Back-off rounds on a solved :class:`~airtaper.optimize.diurnal.DiurnalOptimisation`.

    ``verify()`` re-simulates the current schedule and returns ``(verification dict,
    SimDay)``. Returns ``{"verification", "rounds", "backoff_mg_L", "backoff_max_mg_L",
    "largest_backoff_mg_L", "energy_before_kWh_per_day", "seconds", "resolve_failed", "relaxed"}``;
    the model is left at the last schedule that solved. ``relax()``, when given, is called once
    when a re-solve fails, and the round re-solved: the staged blowers' fixed machine set caps the
    airflow of every period, and a back-off that needs more air than that set gives has no
    solution until the machines are chosen again (:func:`airtaper.optimize.staging.redispatch`
    does that on the final schedule).
    """
    m = study.m
    b = m.opt
    periods = list(m.PERIODS)
    params = (b.do_backoff_mg_L, b.do_max_backoff_mg_L)
    values = [{k: float(pyo.value(v)) for k, v in prm.items()} for prm in params]
    t0 = time.perf_counter()
    energy0 = study.energy_kWh_per_day()
    ver, day = verify()
    rounds = 0
    failed = False
    relaxed = False
    while rounds < MAX_ROUNDS:
        ex = day.do_extremes
        highs = {z: g.sort_values("period")["do_max_mg_L"].to_numpy() for z, g in ex.groupby("zone", sort=False)}
        found = shortfalls(study.layout, day.do_min_by_period(), values[0], periods, highs, values[1],
                           study.problem.swing_states)
        if not any(found):
            break
        rounds += 1
        if progress is not None:
            progress.phase(f"holding the DO range between time points: back-off round {rounds} "
                           f"({sum(len(f) for f in found)} zone-periods)")
        previous = [dict(v) for v in values]
        snapshot = [(v, v.value) for v in m.component_data_objects(pyo.Var, descend_into=True)]
        last = (ver, day, study.result)
        for vals, excursions in zip(values, found):
            for k, s in excursions.items():
                vals[k] += GAIN * s + CUSHION_mg_L
        _keep_band_open(study.layout, values)
        for prm, vals in zip(params, values):
            for k, v in vals.items():
                prm[k] = v
        r = study.resolve()
        if (r is None or not r.ok) and relax is not None and not relaxed:
            relaxed = True
            relax()
            r = study.resolve()
        if r is None or not r.ok:  # back to the last schedule that solved, as it was
            for prm, vals in zip(params, previous):
                for k, v in vals.items():
                    prm[k] = v
            values = previous
            for v, value in snapshot:
                v.set_value(value, skip_validation=True)
            ver, day, study.result = last
            failed = True
            break
        ver, day = verify()
    return {"verification": ver, "rounds": rounds, "resolve_failed": failed, "relaxed": relaxed,
            "backoff_mg_L": {f"{z}/{p}": v for (z, p), v in values[0].items() if v > 0.0},
            "backoff_max_mg_L": {f"{z}/{p}": v for (z, p), v in values[1].items() if v > 0.0},
            "largest_backoff_mg_L": float(max([*values[0].values(), *values[1].values()], default=0.0)),
            "energy_before_kWh_per_day": energy0, "seconds": time.perf_counter() - t0}


__all__ = ["ACCEPT_mg_L", "CUSHION_mg_L", "GAIN", "MAX_ROUNDS", "OPEN_SHARE", "hold_do", "shortfalls"]
