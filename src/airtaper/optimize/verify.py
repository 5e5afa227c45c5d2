"""Verification: the optimised schedule re-simulated by the independent simulator.

The airflow of every zone and period goes to :func:`airtaper.simulate.periodic`
(its own ASM1 rates, mass balances, clarifier and stiff integrator); the simulated
day's effluent figures and DO margins are set beside the optimiser's. Rule
(:mod:`airtaper.optimize.figures`): the result is **verified** unless the simulated
day breaks an effluent limit by more than 2 % of the limit, or a zone's DO range
by more than 0.05 mg/L.
"""

from __future__ import annotations

from airtaper.layout.types import Layout
from airtaper.optimize.figures import DO_TOLERANCE_mg_L, EFFLUENT_TOLERANCE, violations
from airtaper.optimize.simday import simulate_day

_KEYS = ("nh4_mean_mg_L", "nh4_max_mg_L", "tn_mean_mg_L")


def verify_schedule(layout: Layout, schedule: dict, optimiser_figures: dict) -> dict:
    """Simulate ``schedule`` (zone -> per-period airflow) and compare (see module notes)."""
    day = simulate_day(layout, schedule=schedule)
    f = day.figures
    broken = violations(layout, f, effluent_tolerance=EFFLUENT_TOLERANCE, do_tolerance_mg_L=DO_TOLERANCE_mg_L)
    return {
        "verified": not broken,
        "rule": f"effluent limits within {100 * EFFLUENT_TOLERANCE:g} %, DO ranges within {DO_TOLERANCE_mg_L:g} mg/L",
        "effluent": {k: f[k] for k in _KEYS},
        "optimiser_effluent": {k: optimiser_figures[k] for k in _KEYS},
        "min_do_margin_mg_L": f["min_do_margin_mg_L"],
        "optimiser_min_do_margin_mg_L": optimiser_figures["min_do_margin_mg_L"],
        "do_margin_mg_L": f["do_margin_mg_L"],
        "optimiser_do_margin_mg_L": optimiser_figures["do_margin_mg_L"],
        "violations": broken,
        "energy_kWh_per_day": day.energy_kWh_per_day,
        "simulated_days": day.days,
        "periodic": day.converged,
        "seconds": day.seconds,
    }


__all__ = ["verify_schedule"]
