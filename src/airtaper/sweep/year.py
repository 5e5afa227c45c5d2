"""The year from representative days: annual energy, cost with demand charges billed monthly, compliance days.

Two ways to describe the year:

* **months** (``airtaper year --months FILE.csv``): twelve rows, one per calendar
  month, each with the month's water temperature and the flow and load factors
  (and optionally the air temperature and an alpha factor) applied to the layout's
  base profile. Each month is one representative day repeated for the month's days
  (a common year: 31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31). Months with the
  same values share one optimisation.
* **load days** (the layout's ``[[load_days]]``): each named day weighted by its days
  per year. The days are not placed in months, so every month is billed at the
  highest peak of any day that stands for a day or more of the year (an upper
  bound of the demand charges; said so in the summary).

Money: a day's energy part is its energy cost plus start costs (the summary's
``cost_per_day`` less its share of the demand charge); the demand charge is the
tariff's ``demand_charge_per_kW`` per billing period, billed once per month on that
month's peak power. Energy per year = sum over months (or days) of days x energy
per day. Compliance days = the days of months (or load days) whose optimised
schedule meets every limit and passed verification.
"""

from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass

from airtaper.errors import InputError, Problem
from airtaper.layout.textfile import read_text_file

#: Days of each month in a common year (the Gregorian calendar; February of a common year).
MONTH_DAYS = (31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31)
MONTHS = ("Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec")
MAX_MONTHS_BYTES = 100_000
#: Columns of a months table: (name, required, lowest, highest); bounds as the layout's own for these values.
MONTH_COLUMNS = (("water_temperature_C", True, 0.0, 45.0), ("flow_factor", True, 1e-9, 10.0),
                 ("load_factor", True, 1e-9, 10.0), ("air_temperature_C", False, -50.0, 60.0),
                 ("alpha_factor", False, 1e-9, 2.0))


@dataclass(frozen=True)
class Month:
    name: str  # Jan .. Dec
    days: int
    values: dict  # column -> value (only the columns given)


def _month_index(text: str) -> int | None:
    t = text.strip()
    if t.isdigit() and 1 <= int(t) <= 12:
        return int(t) - 1
    for i, m in enumerate(MONTHS):
        if t[:3].lower() == m.lower() and len(t) >= 3:
            return i
    return None


def read_months(path) -> list[Month]:
    """The twelve rows of a months table (CSV with a header row); problems in the one-line form, all at once."""
    label, text = read_text_file(path, MAX_MONTHS_BYTES, "months table", "CSV")
    rows = list(csv.reader(io.StringIO(text)))
    rows = [r for r in rows if any(c.strip() for c in r)]
    problems: list[Problem] = []
    if not rows:
        raise InputError(Problem(label, "(file)", "empty", None, "a header row and twelve month rows"))
    header = [h.strip() for h in rows[0]]
    known = ["month"] + [c for c, *_ in MONTH_COLUMNS]
    for h in header:
        if h not in known:
            problems.append(Problem(label, f"column {h}", "unknown column", h, ", ".join(known)))
    for c, required, *_ in (("month", True), *MONTH_COLUMNS):
        if required and c not in header:
            problems.append(Problem(label, f"column {c}", "missing column", None, "a column of that name"))
    if problems:
        raise InputError(problems)
    seen: dict[int, Month] = {}
    for n, raw in enumerate(rows[1:], start=2):
        cells = dict(zip(header, (c.strip() for c in raw)))
        if len(raw) != len(header):
            problems.append(Problem(label, f"row {n}", "wrong number of cells", len(raw), f"{len(header)}"))
            continue
        i = _month_index(cells["month"])
        if i is None:
            problems.append(Problem(label, f"row {n}, column month", "not a month", cells["month"],
                                    "Jan .. Dec, or 1 .. 12"))
            continue
        if i in seen:
            problems.append(Problem(label, f"row {n}, column month", "month given twice", cells["month"],
                                    "each month once"))
            continue
        values = {}
        for c, required, lo, hi in MONTH_COLUMNS:
            if c not in cells or (not required and cells[c] == ""):
                continue
            try:
                v = float(cells[c])
            except ValueError:
                v = math.nan
            if not (math.isfinite(v) and lo <= v <= hi):
                problems.append(Problem(label, f"row {n}, column {c}", "must be a number in range", cells[c],
                                        f">= {lo:g} and <= {hi:g}"))
                continue
            values[c] = v
        seen[i] = Month(MONTHS[i], MONTH_DAYS[i], values)
    missing = [MONTHS[i] for i in range(12) if i not in seen]
    if missing and not problems:
        problems.append(Problem(label, "column month", "missing months", ", ".join(missing), "all twelve months"))
    if problems:
        raise InputError(problems)
    return [seen[i] for i in range(12)]


def _energy_part(row: dict):
    """A day's cost without its demand-charge share (energy cost + start costs), or None without a tariff."""
    cost = row.get("cost_per_day")
    if cost is None:
        return None
    return float(cost) - float(row.get("demand_charge_per_day") or 0.0)


def _ok(row: dict) -> bool:
    return bool(row.get("compliant"))


def year_months(months: list[Month], day_of_month: list[str], rows: dict[str, dict],
                demand_charge_per_kW: float | None) -> tuple[list[dict], dict]:
    """Monthly and annual figures when month ``i`` is the representative day ``day_of_month[i]``."""
    out = []
    for m, did in zip(months, day_of_month):
        r = rows[did]
        e, part, peak = r.get("energy_kWh_per_day"), _energy_part(r), r.get("peak_kW")
        demand = None if demand_charge_per_kW is None or peak is None else demand_charge_per_kW * float(peak)
        out.append({"month": m.name, "days": m.days, "day": did, "status": r.get("status"),
                    "energy_kWh": None if e is None else m.days * float(e),
                    "energy_cost": None if part is None else m.days * part,
                    "demand_charge": demand,
                    "cost": None if part is None else m.days * part + (demand or 0.0),
                    "peak_kW": peak, "compliant_days": m.days if _ok(r) else 0})
    return out, _totals(out, bound=False)


def year_load_days(weights: dict[str, float], rows: dict[str, dict], demand_charge_per_kW: float | None
                   ) -> tuple[list[dict], dict]:
    """Per-day and annual figures of load days weighted by days per year (demand: 12 months at the top peak)."""
    out = []
    for did, w in weights.items():
        r = rows[did]
        e, part = r.get("energy_kWh_per_day"), _energy_part(r)
        out.append({"month": did, "days": w, "day": did, "status": r.get("status"),
                    "energy_kWh": None if e is None else w * float(e),
                    "energy_cost": None if part is None else w * part, "demand_charge": None, "cost": None,
                    "peak_kW": r.get("peak_kW"), "compliant_days": w if _ok(r) else 0.0})
    peaks = [float(d["peak_kW"]) for d in out if d["peak_kW"] is not None and d["days"] >= 1.0]
    top = max(peaks) if peaks else None
    totals = _totals(out, bound=True)
    if demand_charge_per_kW is not None and top is not None and totals["energy_cost"] is not None:
        totals["demand_charge"] = 12 * demand_charge_per_kW * top
        totals["cost"] = totals["energy_cost"] + totals["demand_charge"]
    totals["peak_kW"] = top
    return out, totals


def _sum(items, key):
    vals = [d[key] for d in items]
    return None if any(v is None for v in vals) else float(sum(vals))


def _totals(items: list[dict], bound: bool) -> dict:
    peaks = [d["peak_kW"] for d in items if d["peak_kW"] is not None]
    return {"days": float(sum(d["days"] for d in items)), "energy_kWh": _sum(items, "energy_kWh"),
            "energy_cost": _sum(items, "energy_cost"), "demand_charge": None if bound else _sum(items, "demand_charge"),
            "cost": None if bound else _sum(items, "cost"), "peak_kW": max(peaks) if peaks else None,
            "compliant_days": float(sum(d["compliant_days"] for d in items)),
            "demand_billing": "every month at the highest day peak (the days are not placed in months)" if bound
            else "each month on its own peak"}


__all__ = ["MONTHS", "MONTH_DAYS", "Month", "read_months", "year_load_days", "year_months"]
