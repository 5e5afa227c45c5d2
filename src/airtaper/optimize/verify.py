"""Verification: the optimised schedule re-simulated by the independent simulator.

The airflow of every zone and period goes to :func:`airtaper.simulate.periodic`
(its own ASM1 rates, mass balances, clarifier and stiff integrator); the simulated
day's effluent figures and DO margins are set beside the optimiser's. The simulator
starts its first day from the optimiser's state at 0 h (which only saves days: it
runs whole days of its own equations until the day repeats), with the day-repeat
tolerance tightened to :data:`DAY_REPEAT_TOL` (its default is 1e-3) so that a start
near the periodic state cannot stop after one day on a slow drift. On the demo this
takes 2 simulated days (about 1 s) instead of 13 from the mean-load steady state, and
the two agree within 0.3 % on the effluent means. Rule
(:mod:`airtaper.optimize.compliance`): the result is **verified** unless the simulated
day breaks an effluent limit by more than 2 % of the limit, or a zone's DO range
by more than 0.05 mg/L.

The simulated day is integrated, not sampled (:mod:`airtaper.optimize.simday`):
effluent means by quadrature of the solver's dense output, DO margins from the
lowest and highest DO of every zone and period over continuous time. The margins
are reported as they are, negative when the DO leaves its range.
"""

from __future__ import annotations

from airtaper.layout.types import Layout
from airtaper.optimize.compliance import DO_TOLERANCE_mg_L, EFFLUENT_TOLERANCE, violations
from airtaper.optimize.simday import simulate_day

_KEYS = ("nh4_mean_mg_L", "nh4_max_mg_L", "tn_mean_mg_L")
#: Day-repeat tolerance of the verification run, max |y(t + 24 h) - y(t)| / max(|y|, 1).
DAY_REPEAT_TOL = 1e-4


def start_state_of(m) -> tuple[dict, float | None]:
    """The model's state at the end of the day (= 0 h of the periodic day) in the simulator's form."""
    last = m.STEPS.last()
    state = {"zones": {z: [float(m.conc[last, z, c].value) for c in m.COMPONENTS] for z in m.ZONES}}
    if hasattr(m, "settler_conc"):
        state["layers"] = [[float(m.settler_conc[last, layer, c].value) for c in m.COMPONENTS] for layer in m.LAYERS]
    waste = None if m.waste_m3_d[1].fixed else float(m.waste_m3_d[1].value)
    return state, waste


def verify_schedule(layout: Layout, schedule: dict, optimiser_figures: dict, m=None,
                    swing_states: dict | None = None) -> dict:
    """Simulate ``schedule`` (zone -> per-period airflow) and compare (see module notes).

    ``m``: the solved model, whose state at 0 h starts the simulation (None: the
    simulator's own mean-load steady state and default tolerance); ``swing_states``: the
    swing zones' on/off per period (:attr:`airtaper.optimize.problem.Problem.swing_states`).
    """
    return verify_day(layout, schedule, optimiser_figures, m, swing_states)[0]


def verify_day(layout: Layout, schedule: dict, optimiser_figures: dict, m=None, swing_states: dict | None = None):
    """:func:`verify_schedule` and the simulated :class:`~airtaper.optimize.simday.SimDay`."""
    if m is not None:
        state, waste = start_state_of(m)
        day = simulate_day(layout, schedule=schedule, start_state=state, start_waste_m3_d=waste, tol=DAY_REPEAT_TOL)
    else:
        day = simulate_day(layout, schedule=schedule)
    f = day.figures
    lows = day.do_extremes.loc[day.do_extremes.groupby("zone")["do_min_mg_L"].idxmin()]
    broken = violations(layout, f, effluent_tolerance=EFFLUENT_TOLERANCE, do_tolerance_mg_L=DO_TOLERANCE_mg_L)
    swing_margins = swing_do_margins(layout, day.do_min_by_period(), swing_states)
    for z, (margin, periods) in swing_margins.items():
        if margin < -DO_TOLERANCE_mg_L:
            broken.append(f"swing zone {z} while aerated: DO below its minimum of {layout.zone(z).do_min_mg_L:g} mg/L "
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
        "do_min_margin_mg_L": min((float(r.do_min_mg_L) - layout.zone(r.zone).do_min_mg_L for r in lows.itertuples()
                                   if layout.zone(r.zone).do_min_mg_L is not None and layout.zone(r.zone).grid
                                   is not None and layout.zone(r.zone).kind == "aerated"), default=None),
        "method": "effluent means integrated over the day (quadrature of the dense output); "
                  "DO extremes over continuous time",
        "violations": broken,
        "energy_kWh_per_day": day.energy_kWh_per_day,
        "simulated_days": day.days,
        "start": "optimiser's state at 0 h" if m is not None else "mean-load steady state",
        "periodic": day.converged,
        "seconds": day.seconds,
    }, day


def swing_do_margins(layout: Layout, lows_by_period: dict, swing_states: dict | None) -> dict:
    """Swing zone -> (smallest DO margin over its aerated periods, 1-based periods short of the minimum).

    The DO minimum of a swing zone holds while it is aerated, from the period after the one it is
    switched on in (there its DO rises from nothing; the optimiser holds the minimum from that
    period's second step). Zones without a DO minimum or never aerated after an aerated period
    are left out.
    """
    out = {}
    for z, on in (swing_states or {}).items():
        lo = layout.zone(z).do_min_mg_L
        held = [k for k in range(len(on)) if on[k] and on[k - 1]]
        if lo is None or not held:
            continue
        margins = {k + 1: float(lows_by_period[z][k]) - lo for k in held}
        out[z] = (min(margins.values()), [k for k, v in margins.items() if v < -DO_TOLERANCE_mg_L])
    return out


__all__ = ["DAY_REPEAT_TOL", "start_state_of", "swing_do_margins", "verify_day", "verify_schedule"]
