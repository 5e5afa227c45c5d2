"""Compliance figures of a day, computed the same way for the optimiser, the baseline and the verification.

Inputs are per time point over the day (the simulator's equal output steps, or the
model's collocation points with their quadrature weights): effluent NH4-N and TN
(mg/L), effluent flow (m3/d), the period of every point, and the DO of every zone
(mg/L). Definitions (docs/optimization.md, "Limits"):

* daily mean = effluent-flow-weighted mean over the steps (times the steps' time weights);
* period mean = time mean over the period's steps (the flow is constant in a period);
* NH4-N max = the largest period mean;
* DO margin of a zone = min over steps (DO - DO minimum) and, where a DO maximum is
  set, min over steps (DO maximum - DO); the smallest over the zones is reported.
"""

from __future__ import annotations

import numpy as np

from airtaper.layout.types import Layout
from airtaper.plant import ResolvedPlant, resolve_plant

#: Verification rule: an effluent figure may exceed its limit by this fraction ...
EFFLUENT_TOLERANCE = 0.02
#: ... and a DO minimum (maximum) may be missed by this much, mg/L, before the
#: result counts as unverified.
DO_TOLERANCE_mg_L = 0.05


def do_limits(plant: ResolvedPlant | Layout) -> dict[str, tuple[float | None, float | None]]:
    """Zone id -> (DO minimum, DO maximum) for the zones the optimiser holds to them (a layout is resolved first)."""
    out = {}
    for z in resolve_plant(plant).zones:
        if not z.has_diffusers:
            continue
        lo = z.do_min_mg_L if z.kind == "aerated" else None
        if lo is None and z.do_max_mg_L is None:
            continue
        out[z.id] = (lo, z.do_max_mg_L)
    return out


def day_figures(plant: ResolvedPlant | Layout, nh4_mg_L, tn_mg_L, q_effluent_m3_d, period_of_step, do_by_zone: dict,
                weights=None) -> dict:
    """Effluent means, period maxima and DO margins of one day (see module notes).

    ``weights``: time weight of every point (quadrature weights of collocation points);
    None for equal steps.
    """
    nh4 = np.asarray(nh4_mg_L, dtype=float)
    tn = np.asarray(tn_mg_L, dtype=float)
    w = np.ones_like(nh4) if weights is None else np.asarray(weights, dtype=float)
    q = np.asarray(q_effluent_m3_d, dtype=float) * w
    per = np.asarray(period_of_step, dtype=int)
    periods = np.unique(per)
    nh4_period = np.array([(w[per == k] * nh4[per == k]).sum() / w[per == k].sum() for k in periods])
    margins = {}
    for zid, (lo, hi) in do_limits(plant).items():
        do = np.asarray(do_by_zone[zid], dtype=float)
        m = np.inf
        if lo is not None:
            m = min(m, float((do - lo).min()))
        if hi is not None:
            m = min(m, float((hi - do).min()))
        margins[zid] = m
    return {
        "nh4_mean_mg_L": float((q * nh4).sum() / q.sum()),
        "nh4_max_mg_L": float(nh4_period.max()),
        "nh4_max_period": int(periods[int(nh4_period.argmax())]),
        "tn_mean_mg_L": float((q * tn).sum() / q.sum()),
        "nh4_period_mean_mg_L": [float(v) for v in nh4_period],
        "do_margin_mg_L": margins,
        "min_do_margin_mg_L": float(min(margins.values())) if margins else None,
    }


def violations(plant: ResolvedPlant | Layout, figures: dict, *, effluent_tolerance: float = 0.0,
               do_tolerance_mg_L: float = 0.0) -> list[str]:
    """Limits the day breaks by more than the tolerances, as sentences (empty: compliant); a layout is
    resolved first."""
    out = []
    plant = resolve_plant(plant)
    lim = plant.limits
    for key, limit, text in (("nh4_mean_mg_L", lim.nh4_mean_mg_L, "effluent NH4-N daily mean"),
                             ("nh4_max_mg_L", lim.nh4_max_mg_L, "effluent NH4-N largest period mean"),
                             ("tn_mean_mg_L", lim.tn_mean_mg_L, "effluent TN daily mean")):
        if limit is None:
            continue
        value = figures[key]
        if value > limit * (1.0 + effluent_tolerance):
            out.append(f"{text} {value:.3f} mg/L exceeds the limit {limit:g} mg/L "
                       f"by {100.0 * (value / limit - 1.0):.1f} %")
    for zid, margin in figures["do_margin_mg_L"].items():
        if margin < -do_tolerance_mg_L:
            lo, hi = do_limits(plant)[zid]
            out.append(f"zone {zid}: DO leaves its range ({lo if lo is not None else '-'}"
                       f"..{hi if hi is not None else '-'} mg/L) by {-margin:.3f} mg/L")
    return out


__all__ = ["DO_TOLERANCE_mg_L", "EFFLUENT_TOLERANCE", "day_figures", "do_limits", "violations"]
