"""Words and numbers of the outputs: the caution, number formats and marginal costs in plain words."""

from __future__ import annotations

import numpy as np

CAUTION = (
    "Planning estimates from a process model and clean-water diffuser data. Local codes, discharge permits "
    "and licensed engineers decide what is built and how the plant is operated; check every schedule "
    "against plant data before using it for control."
)


def fmt(x, digits: int = 1) -> str:
    """A number for people: thousands separated, fixed decimals, never "-0.0"; "-" for None."""
    if x is None:
        return "-"
    if isinstance(x, (bool, np.bool_)):
        return "yes" if x else "no"
    if isinstance(x, (int, float, np.integer, np.floating)):
        if not np.isfinite(x):
            return "-"
        text = f"{x:,.{digits}f}"
        return text[1:] if text.startswith("-") and not text.strip("-0.,") else text  # no "-0.00"
    return str(x)


def fmt_margin(x, digits: int = 3) -> str:
    """A limit margin, signed, never rounded to zero: -9.9e-09 stays visible as negative."""
    if x is None or not np.isfinite(x):
        return "-"
    if x != 0 and abs(x) < 0.5 * 10.0 ** -digits:
        return f"{x:+.1e}"
    return f"{x:+.{digits}f}"


#: Plain names of the effluent limits in summary.json.
EFFLUENT_LIMITS = {
    "nh4_mean_mg_L": "effluent NH4-N daily-mean limit",
    "nh4_max_mg_L": "effluent NH4-N limit on the largest period mean",
    "tn_mean_mg_L": "effluent TN daily-mean limit",
}


def _money(cost, currency: str) -> str:
    return f"{fmt(abs(cost), 2)} {currency}/d" if cost is not None else ""


def marginal_sentence(item: dict, currency: str) -> str:
    """One marginal-cost entry of summary.json as a sentence.

    >>> marginal_sentence({"limit": "do_min_mg_L", "where": "Z2", "kWh_per_day": 14.28, "cost_per_day": 2.3,
    ...                    "per": "per 0.1 mg/L higher DO minimum", "binding": True}, "EUR")
    "Raising Z2's DO minimum by 0.1 mg/L costs 14.3 kWh/d (2.30 EUR/d)."
    """
    limit, where = item.get("limit"), item.get("where")
    kwh, cost = item.get("kWh_per_day"), item.get("cost_per_day")
    value = item.get("limit_value_mg_L")
    now = f" (now {value:g} mg/L)" if isinstance(value, (int, float)) else ""
    if limit == "do_min_mg_L":
        action = f"Raising {where}'s DO minimum{now} by 0.1 mg/L"
    elif limit == "do_max_mg_L":
        action = f"Lowering {where}'s DO maximum{now} by 0.1 mg/L"
    elif limit in EFFLUENT_LIMITS:
        action = f"Tightening the {EFFLUENT_LIMITS[limit]}{now} by 0.1 mg/L"
    elif limit == "diffusers":
        action = f"One more diffuser in {where}"
    else:
        action = f"Changing {limit} at {where} ({item.get('per', '')})"
    if not item.get("binding", True):
        return f"{action} costs nothing: the limit is not reached by the optimised schedule."
    if kwh is None and cost is None:
        return f"{action}: no estimate."
    ref = kwh if kwh is not None else cost
    verb = "costs" if ref >= 0 else "saves"
    parts = []
    if kwh is not None:
        parts.append(f"{fmt(abs(kwh), 1)} kWh/d")
    money = _money(cost, currency)
    if money:
        parts.append(f"({money})" if parts else money)
    return f"{action} {verb} {' '.join(parts)}."


__all__ = ["CAUTION", "EFFLUENT_LIMITS", "fmt", "fmt_margin", "marginal_sentence"]
