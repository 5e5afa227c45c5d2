"""Holding the DO minimum in continuous time: a back-off calibrated by re-simulation.

The optimiser holds each zone's DO minimum at its time points (two Radau points per
step). Between them, and in the true solution of the same equations, the DO dips
lower: after an airflow step at a period boundary the DO of a zone moves with a time
constant of minutes, faster than the points resolve. On the demo the independent
simulator found the DO 0.031 mg/L below the minimum, 5-15 minutes into a period.

Method: solve; re-simulate the schedule (:func:`airtaper.optimize.verify.verify_schedule`,
DO over continuous time); wherever the lowest DO of a zone in a period is below the
minimum less :data:`ACCEPT_mg_L`, raise that zone's DO constraint in that period
(``m.opt.do_backoff_mg_L[zone, period]``) by the shortfall plus :data:`CUSHION_mg_L`;
re-solve warm; repeat, at most :data:`MAX_ROUNDS` times. Only the periods that dip
pay for it, and by what the simulator measured, not a guess. Extra DO constraints at
interior points of the collocation polynomial were not chosen: the polynomial of a
30-minute step cannot follow a DO transient of minutes, so they would constrain the
model's approximation, not the DO the simulator (and the plant) shows.

The last round's re-simulation is the verification of the schedule that is reported.
"""

from __future__ import annotations

import time

import numpy as np
import pyomo.environ as pyo

#: A zone's continuous DO may fall this far below its minimum without a back-off, mg/L
#: (the issue's acceptance is 0.01 mg/L; half of it leaves room for the next round's drift).
ACCEPT_mg_L = 0.005
#: Added to each measured shortfall, mg/L, so one round usually suffices.
CUSHION_mg_L = 0.004
#: Rounds of back-off and re-solve at most.
MAX_ROUNDS = 4


def shortfalls(layout, day_do_min: dict, backoff: dict, periods) -> dict:
    """(zone, period) -> DO shortfall below the minimum (positive), for the DO-minimum zones."""
    out = {}
    for z, lows in day_do_min.items():
        zone = layout.zone(z)
        if zone.do_min_mg_L is None or (z, periods[0]) not in backoff:
            continue
        for p in periods:
            short = zone.do_min_mg_L - float(lows[p - 1])
            if short > ACCEPT_mg_L:
                out[z, p] = short
    return out


def hold_do(study, verify, progress=None) -> dict:
    """Back-off rounds on a solved :class:`~airtaper.optimize.study.DiurnalOptimisation`.

    ``verify()`` re-simulates the current schedule and returns ``(verification dict,
    SimDay)``. Returns ``{"verification", "rounds", "backoff_mg_L", "energy_before_kWh_per_day",
    "seconds", "resolve_failed"}``; the model is left at the last schedule that solved.
    """
    m = study.m
    b = m.opt
    periods = list(m.PERIODS)
    backoff = {k: float(pyo.value(v)) for k, v in b.do_backoff_mg_L.items()}
    t0 = time.perf_counter()
    energy0 = study.energy_kWh_per_day()
    ver, day = verify()
    rounds = 0
    failed = False
    while rounds < MAX_ROUNDS:
        short = shortfalls(study.layout, day.do_min_by_period(), backoff, periods)
        if not short:
            break
        rounds += 1
        if progress is not None:
            progress.phase(f"holding the DO minimum between time points: back-off round {rounds} "
                           f"({len(short)} zone-periods)")
        previous = dict(backoff)
        for k, s in short.items():
            backoff[k] += s + CUSHION_mg_L
            b.do_backoff_mg_L[k] = backoff[k]
        r = study.resolve()
        if r is None or not r.ok:  # keep the last schedule that solved
            for k, v in previous.items():
                b.do_backoff_mg_L[k] = v
            backoff = previous
            r = study.resolve()
            failed = True
            ver, day = verify()
            break
        ver, day = verify()
    return {"verification": ver, "rounds": rounds, "resolve_failed": failed,
            "backoff_mg_L": {f"{z}/{p}": v for (z, p), v in backoff.items() if v > 0.0},
            "largest_backoff_mg_L": float(max(backoff.values(), default=0.0)),
            "energy_before_kWh_per_day": energy0, "seconds": time.perf_counter() - t0}


__all__ = ["ACCEPT_mg_L", "CUSHION_mg_L", "MAX_ROUNDS", "hold_do", "shortfalls"]
