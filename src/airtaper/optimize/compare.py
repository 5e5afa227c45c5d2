"""Layouts side by side: ``airtaper compare A.toml B.toml ...``.

An added zone, a swing conversion, another blower set or another grid is just another
layout. Each layout is optimised exactly as ``airtaper optimize`` does it
(:func:`airtaper.optimize.diurnal.run_optimization`: blower staging, verification by the
independent simulator, marginal costs) on each of its load days
(:func:`airtaper.layout.loaddays.layout_days`: the base profile as the one day of the
year when it names none), and the year is summed with the days' weights. The first
layout is the reference: every figure of the others is also given as its difference
from the first (so a layout compared with itself shows zero differences).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import pandas as pd

from airtaper.errors import EXIT_FAILURE, EXIT_INFEASIBLE, EXIT_OK, EXIT_UNVERIFIED
from airtaper.layout.loaddays import day_layout, layout_days
from airtaper.layout.types import Layout
from airtaper.optimize.diurnal import StudyOptions, run_optimization
from airtaper.optimize.results import jsonable, summary_figures
from airtaper.optimize.horizon import with_periods
from airtaper.optimize.progress import Progress, Silent
from airtaper.plant import ResolvedPlant, resolve_plant

#: Figures of compare.csv that get a difference against the first layout (name -> column).
DIFFERENCE_COLUMNS = ("energy_kWh_per_year", "cost_per_year", "diffusers", "aerated_volume_m3", "blowers_in_service",
                      "blower_running_h_per_year", "min_do_margin_mg_L", "nh4_mean_margin_mg_L",
                      "tn_mean_margin_mg_L")
_ORDER = {"optimal": 0, "unverified": 1, "infeasible": 2, "failed": 3}


@dataclass
class CompareResult:
    layouts: pd.DataFrame  # compare.csv
    days: pd.DataFrame  # load_days.csv
    summary: dict
    exit_code: int
    plans: list[Layout] = field(default_factory=list)


def _day_row(label: str, day, result) -> dict:
    s = result.summary
    row = summary_figures(s)
    marginal = "; ".join(f"{e['limit']} {e['where']}: {e['cost_per_day'] if e['cost_per_day'] is not None else 0:+.3g}"
                         f" per day {e['per']}" for e in s.get("marginal_costs") or [] if e.get("binding"))
    return {"layout": label, "load_day": day.id, "days_per_year": day.days_per_year,
            **{k: row[k] for k in ("status", "energy_kWh_per_day", "cost_per_day", "saving_percent",
                                   "min_do_margin_mg_L", "nh4_mean_margin_mg_L", "tn_mean_margin_mg_L",
                                   "blower_running_h", "verified")},
            "marginal_costs": marginal}


def _weighted(rows: list[dict], key: str):
    if any(r[key] is None for r in rows):
        return None
    return sum(r["days_per_year"] * r[key] for r in rows)


def _lowest(rows: list[dict], key: str):
    vals = [r[key] for r in rows]
    return None if not vals or any(v is None for v in vals) else min(vals)


def run_compare(layouts: list[tuple[str, ResolvedPlant | Layout]], n_periods: int | None = None,
                progress: Progress | None = None, options: StudyOptions | None = None) -> CompareResult:
    """Optimise every (label, plant or layout) over its load days and set them side by side (module notes)."""
    prog = progress or Silent()
    day_rows, rows, plans = [], [], []
    for k, (label, layout) in enumerate(layouts, start=1):
        # the input the days' plants are made from (a load day's profile, the periods) is the boundary
        layout = layout.layout if isinstance(layout, ResolvedPlant) else layout
        if n_periods is not None and n_periods != layout.horizon.n_periods:
            layout = with_periods(layout, n_periods)
        plans.append(layout)
        mine = []
        for day in layout_days(layout):
            prog.phase(f"layout {k} of {len(layouts)} ({label}), load day {day.id}")
            result = run_optimization(day_layout(layout, day), options, prog)
            mine.append(_day_row(label, day, result))
        day_rows += mine
        plant = resolve_plant(layout)
        status = max((r["status"] for r in mine), key=lambda s: _ORDER.get(s, 3))
        rows.append({
            "layout": label, "plant": plant.name, "status": status, "zones": plant.n_zones,
            "aerated_volume_m3": sum(z.volume_m3 for z in plant.zones if z.aerated),
            "total_volume_m3": sum(z.volume_m3 for z in plant.zones),
            "diffusers": sum(d.diffusers for d in plant.diffused),
            "diffusers_by_zone": " ".join(f"{d.id}:{d.diffusers}" for d in plant.diffused),
            "blowers_in_service": sum(not b.out_of_service for b in plant.blowers),
            "load_days": len(mine), "days_per_year": sum(r["days_per_year"] for r in mine),
            "energy_kWh_per_year": _weighted(mine, "energy_kWh_per_day"),
            "cost_per_year": _weighted(mine, "cost_per_day"),
            "blower_running_h_per_year": _weighted(mine, "blower_running_h"),
            "min_do_margin_mg_L": _lowest(mine, "min_do_margin_mg_L"),
            "nh4_mean_margin_mg_L": _lowest(mine, "nh4_mean_margin_mg_L"),
            "tn_mean_margin_mg_L": _lowest(mine, "tn_mean_margin_mg_L"),
        })
    first = rows[0]
    for r in rows:
        for c in DIFFERENCE_COLUMNS:
            a, b = r[c], first[c]
            r[f"{c}_vs_first"] = None if a is None or b is None else a - b
        base, value = first["cost_per_year"], r["cost_per_year"]
        r["cost_vs_first_percent"] = (None if base in (None, 0) or value is None else 100.0 * (value - base) / base)
    worst = max((r["status"] for r in rows), key=lambda s: _ORDER.get(s, 3))
    code = {"optimal": EXIT_OK, "unverified": EXIT_UNVERIFIED, "infeasible": EXIT_INFEASIBLE}.get(worst, EXIT_FAILURE)
    currency = next((p.tariff.currency for p in map(resolve_plant, plans) if p.tariff is not None), "")
    messages = [f"{r['layout']}: {r['status']}" for r in rows if r["status"] != "optimal"]
    summary = {"status": worst, "currency": currency, "reference": first["layout"], "layouts": rows,
               "messages": messages}
    return CompareResult(pd.DataFrame(rows), pd.DataFrame(day_rows), jsonable(summary), code, plans)


__all__ = ["CompareResult", "DIFFERENCE_COLUMNS", "run_compare"]
