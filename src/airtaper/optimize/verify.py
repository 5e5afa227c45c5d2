"""Verification: the optimised schedule re-simulated by the independent simulator.

The airflow of every zone and period goes to :func:`airtaper.simulate.periodic`
(its own ASM1 rates, mass balances, clarifier and stiff integrator); the simulated
day's effluent figures and DO margins are set beside the optimiser's. The simulator
starts from the optimiser's state :data:`LEAD_IN_h` hours before the end of the day
(whole periods, :func:`lead_in_periods`), runs those hours first (a lead-in) and then
whole days of its own equations until the day repeats, with the day-repeat tolerance
tightened to :data:`DAY_REPEAT_TOL` (its default is 1e-3) so that a start near the
periodic state cannot stop after one day on a slow drift. The start only saves days:
the optimiser's DO, NH4-N and NO3-N differ from the simulator's by up to 1e-3 mg/L at
the time points (its discretisation), which the lead-in's hours wash out, while its
slow states (biomass, inventory) are already periodic within about 1e-5. On the demo a
start at 0 h needs 2 simulated days, the lead-in 1 day and 2 hours, with the same
figures within 1e-5 mg/L; from the mean-load steady state it took 13 days, within
0.3 % on the effluent means. A day that does not repeat within the simulator's 30 days (a slow
mode of a layered clarifier: plant 36 of the robustness benchmark, :data:`CHAINED_MAX_DAYS`)
is not simulated again from the model's state after a DO back-off round: the next
re-simulation continues from that day (``start_day``: the simulator's own state at 0 h, no
lead-in), for at most :data:`CHAINED_MAX_DAYS` days. A day that repeats is followed by a start
from the model's state again, which holds the new schedule's slow states (on the demo 1 day,
against 2-3 from the day before, and the effluent means within 5e-4 of each other: the
day-repeat tolerance, not an error). Rule
(:mod:`airtaper.optimize.compliance`): the result is **verified** unless the simulated
day breaks an effluent limit by more than 2 % of the limit, or a zone's DO range
by more than 0.05 mg/L.

The simulated day is integrated, not sampled (:mod:`airtaper.optimize.simday`):
effluent means by quadrature of the solver's dense output, DO margins from the
lowest and highest DO of every zone and period over continuous time. The margins
are reported as they are, negative when the DO leaves its range.
"""

from __future__ import annotations

import math

from airtaper.optimize.compliance import DO_TOLERANCE_mg_L, EFFLUENT_TOLERANCE, do_limits, violations
from airtaper.optimize.simday import simulate_day
from airtaper.plant import ResolvedPlant

_KEYS = ("nh4_mean_mg_L", "nh4_max_mg_L", "tn_mean_mg_L")
#: Day-repeat tolerance of the verification run, max |y(t + 24 h) - y(t)| / max(|y|, 1).
DAY_REPEAT_TOL = 1e-4
#: Hours of the lead-in (module notes): DO settles within minutes, NH4-N and NO3-N within
#: the zones' hydraulic residence times (about an hour each on the demo). On the demo the
#: first day's change fell from 9e-4 (no lead-in) to 9.6e-5, 7.8e-5, 4.9e-5 and 4.3e-5
#: with 1, 2, 4 and 6 hours, against the tolerance of 1e-4.
LEAD_IN_h = 3.0
#: Simulated days at most of a re-simulation started from the day simulated before it (``start_day``, the DO
#: back-off's rounds; module notes): one day for the schedule's change (the DO within minutes, NH4-N and NO3-N
#: within hours), one to test the repeat, one spare. Such a run continues the simulator's own days from where the
#: last one ended, so the slow states have had all of them. On plant 36 of the robustness benchmark (9 zones,
#: layered clarifier) the day-to-day change of a clarifier layer fell only from 7.8e-4 to 4.9e-4 in 30 days (1.5 %
#: a day, measured 3 December 2026): every re-simulation ran the 30 days of ``periodic``'s cap, about 30 CPU s, and
#: ended without the day repeating to :data:`DAY_REPEAT_TOL` all the same.
CHAINED_MAX_DAYS = 3


def _require_plant(plant) -> None:
    if not isinstance(plant, ResolvedPlant):  # the layout is resolved once, before the study (issue 11)
        raise TypeError(f"internal: the verification takes a ResolvedPlant, got {type(plant).__name__}")


def lead_in_periods(n_periods: int, period_h: float) -> int:
    """Whole periods covering :data:`LEAD_IN_h` hours, fewer than the day's periods (0 for a one-period day)."""
    return max(0, min(n_periods - 1, math.ceil(LEAD_IN_h / period_h - 1e-9)))


def start_state_of(m, period: int | None = None) -> tuple[dict, float | None]:
    """The model's state at the end of the 1-based ``period`` (None: of the day, = 0 h of the periodic
    day) in the simulator's form, and the model's waste flow (None when fixed)."""
    if period is None:
        t = m.STEPS.last()
    else:
        t = period * (len(m.STEPS) // len(m.PERIODS))  # a period's last point is its end (Radau IIA, Euler)
        if m.period_of_step[t] != period or (t < m.STEPS.last() and m.period_of_step[t + 1] != period + 1):
            raise ValueError(f"internal: point {t} does not end period {period}")
    state = {"zones": {z: [float(m.conc[t, z, c].value) for c in m.COMPONENTS] for z in m.ZONES}}
    if hasattr(m, "settler_conc"):
        state["layers"] = [[float(m.settler_conc[t, layer, c].value) for c in m.COMPONENTS] for layer in m.LAYERS]
    waste = None if m.waste_m3_d[1].fixed else float(m.waste_m3_d[1].value)
    return state, waste


def verify_day(plant: ResolvedPlant, schedule: dict, optimiser_figures: dict, m=None,
               swing_states: dict | None = None, start_day=None):
    """Simulate ``schedule`` (zone -> per-period airflow) and compare (see module notes).

    Returns the verification dict and the simulated :class:`~airtaper.optimize.simday.SimDay`.
    ``m``: the solved model, whose state starts the simulation (None: the simulator's own
    mean-load steady state and default tolerance); ``swing_states``: the swing zones' on/off
    per period (:attr:`airtaper.optimize.problem.Problem.swing_states`); ``start_day``: a simulated
    day of a schedule near this one (the DO back-off's round before, module notes), whose state at
    0 h starts the simulation instead of the model's (no lead-in; the same tolerance, at most
    :data:`CHAINED_MAX_DAYS` days).
    """
    _require_plant(plant)
    if start_day is not None:
        state, waste = start_day.start_state()
        day = simulate_day(plant, schedule=schedule, start_state=state, start_waste_m3_d=waste, tol=DAY_REPEAT_TOL,
                           max_days=CHAINED_MAX_DAYS)
        start = "the re-simulated day before (the last back-off round's) at 0 h"
    elif m is not None:
        n, period_h = plant.n_periods, plant.period_h
        first = n - lead_in_periods(n, period_h)  # 0-based period the lead-in starts (n: none)
        state, waste = start_state_of(m, first if first < n else None)
        day = simulate_day(plant, schedule=schedule, start_state=state, start_waste_m3_d=waste, tol=DAY_REPEAT_TOL,
                           start_period=first % n)
        start = f"optimiser's state at {first * period_h:g} h" + (", simulated on to 0 h" if first < n else "")
    else:
        day = simulate_day(plant, schedule=schedule)
    f = day.figures
    lows = day.do_extremes.loc[day.do_extremes.groupby("zone")["do_min_mg_L"].idxmin()]
    broken = violations(plant, f, effluent_tolerance=EFFLUENT_TOLERANCE, do_tolerance_mg_L=DO_TOLERANCE_mg_L)
    swing_margins = swing_do_margins(plant, day.do_min_by_period(), swing_states)
    for z, (margin, periods) in swing_margins.items():
        if margin < -DO_TOLERANCE_mg_L:
            broken.append(f"swing zone {z} while aerated: DO below its minimum of {plant.zone(z).do_min_mg_L:g} mg/L "
                          f"by {-margin:.3f} mg/L (periods {', '.join(str(p) for p in periods)})")
    return {
        "verified": not broken,
        "rule": f"effluent limits within {100 * EFFLUENT_TOLERANCE:g} %, DO ranges within {DO_TOLERANCE_mg_L:g} mg/L",
        "effluent": {k: f[k] for k in _KEYS},
        "optimiser_effluent": {k: optimiser_figures[k] for k in _KEYS},
        "min_do_margin_mg_L": f["min_do_margin_mg_L"],
        "optimiser_min_do_margin_mg_L": optimiser_figures["min_do_margin_mg_L"],
        "do_margin_mg_L": f["do_margin_mg_L"],
        "optimiser_do_margin_mg_L": optimiser_figures["do_margin_mg_L"],
        "swing_do_margin_mg_L": {z: v[0] for z, v in swing_margins.items()},
        "do_lowest": {r.zone: {"do_mg_L": float(r.do_min_mg_L), "time_h": float(r.do_min_time_h)}
                      for r in lows.itertuples()},
        "do_lowest_by_period": {z: [float(v) for v in lows_z] for z, lows_z in day.do_min_by_period().items()},
        # the DO minimum alone: lowest DO over continuous time less the minimum, the smallest over the zones
        "do_min_margin_mg_L": min((float(r.do_min_mg_L) - plant.zone(r.zone).do_min_mg_L for r in lows.itertuples()
                                   if plant.zone(r.zone).do_min_mg_L is not None and plant.has_diffusers(r.zone)
                                   and plant.zone(r.zone).kind == "aerated"), default=None),
        # the DO maximum alone: the maximum less the highest DO over continuous time, the smallest over the zones
        "do_max_margin_mg_L": do_max_margin(plant, day.do_extremes),
        "method": "effluent means integrated over the day (quadrature of the dense output); "
                  "DO extremes over continuous time",
        "violations": broken,
        "energy_kWh_per_day": day.energy_kWh_per_day,
        "simulated_days": day.days,
        "start": start if m is not None or start_day is not None else "mean-load steady state",
        "periodic": day.converged,
        "seconds": day.seconds,
    }, day


def do_max_margin(plant: ResolvedPlant, do_extremes) -> float | None:
    """The DO maximum alone: the maximum less the highest DO over continuous time, the smallest over the zones
    with a maximum (None when no zone has one). A zone with a maximum but no rows in ``do_extremes`` (the
    simulated day's extremes per zone and period) has no simulated DO to judge and is left out, not NaN."""
    margins = []
    for z, (_lo, hi) in do_limits(plant).items():
        rows = do_extremes.loc[do_extremes.zone == z, "do_max_mg_L"]
        if hi is not None and len(rows):
            margins.append(hi - float(rows.max()))
    return min(margins, default=None)


def swing_do_margins(plant: ResolvedPlant, lows_by_period: dict, swing_states: dict | None) -> dict:
    """Swing zone -> (smallest DO margin over its aerated periods, 1-based periods short of the minimum).

    The DO minimum of a swing zone holds while it is aerated, from the period after the one it is
    switched on in (there its DO rises from nothing; the optimiser holds the minimum from that
    period's second step). Zones without a DO minimum or never aerated after an aerated period
    are left out.
    """
    _require_plant(plant)
    out = {}
    for z, on in (swing_states or {}).items():
        lo = plant.zone(z).do_min_mg_L
        held = [k for k in range(len(on)) if on[k] and on[k - 1]]
        if lo is None or not held:
            continue
        margins = {k + 1: float(lows_by_period[z][k]) - lo for k in held}
        out[z] = (min(margins.values()), [k for k, v in margins.items() if v < -DO_TOLERANCE_mg_L])
    return out


__all__ = ["CHAINED_MAX_DAYS", "DAY_REPEAT_TOL", "LEAD_IN_h", "do_max_margin", "lead_in_periods", "start_state_of", "swing_do_margins", "verify_day"]
