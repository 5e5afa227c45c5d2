"""`airtaper year LAYOUT --out DIR`: a year of operation from representative days, on the sweep's Dask path.

The days are the layout's load days (``[[load_days]]``, each weighted by its days per
year; without any, the layout's own day stands for the year), or, with ``--months
FILE.csv``, twelve monthly days built from a table of water temperature and flow and
load factors (:mod:`airtaper.sweep.year`). Each distinct day runs ``airtaper optimize
LAYOUT --day ID`` in a Dask worker into the folder's ``runs/ID`` (a month's day as an
override file of one load day), exactly as ``airtaper sweep`` runs a scenario, with
the same journal: rerunning resumes. Writes ``results.parquet``/``.csv`` (one row per
day), ``months.csv`` (one row per month, or per load day), ``year.json`` (annual
energy, cost with demand charges billed monthly, peak, compliance days) and the
report. Exit codes as ``airtaper sweep``.
"""

from __future__ import annotations

import json
import sys

from airtaper.cli.sweep import add_cluster_options, check_cluster_options, count_line, plan, run_plan
from airtaper.errors import EXIT_FAILURE, EXIT_OK
from airtaper.report.text import CAUTION
from airtaper.report.text import fmt as _fmt


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "year", help="a year's energy, cost and compliance from representative days, optimised on Dask",
        description="Optimise the layout's load days (or twelve monthly days from --months) as representative "
                    "days and weight them into annual energy, cost (demand charges billed monthly), peak power "
                    "per month and days meeting every limit.")
    p.add_argument("layout", metavar="LAYOUT", help="layout TOML file, e.g. layouts/demo.toml")
    p.add_argument("--months", metavar="CSV",
                   help="monthly table: month, water_temperature_C, flow_factor, load_factor "
                        "(optional air_temperature_C, alpha_factor), twelve rows")
    add_cluster_options(p)
    p.set_defaults(handler=run)


def _month_scenarios(months, path: str):
    """One scenario per distinct month (months with equal values share it) and each month's scenario id."""
    from airtaper.sweep.grid import Scenario

    by_values: dict[str, str] = {}
    scenarios, day_of_month = [], []
    for m in months:
        key = json.dumps(m.values, sort_keys=True)
        if key not in by_values:
            sid = m.name.lower()
            by_values[key] = sid
            day = {"id": sid, "days_per_year": 365.0, **m.values}  # one day standing for itself: no weighting here
            scenarios.append(Scenario(sid, {"load_days": [day]}, (), options=("--day", sid), shown=dict(m.values)))
        day_of_month.append(by_values[key])
    return scenarios, day_of_month


def _load_day_scenarios(layout):
    from airtaper.layout.loaddays import layout_days
    from airtaper.sweep.grid import Scenario

    scenarios, weights = [], {}
    for d in layout_days(layout):
        shown = {"days_per_year": d.days_per_year, "flow_factor": d.flow_factor, "load_factor": d.load_factor,
                 "water_temperature_C": None if d.water_temperature_C is None else
                 float(sum(d.water_temperature_C) / len(d.water_temperature_C)),
                 "alpha_factor": d.alpha_factor}
        opts = ("--day", d.id) if layout.load_days else ()
        scenarios.append(Scenario(d.id, {}, (), options=opts, shown=shown))
        weights[d.id] = d.days_per_year
    return scenarios, weights


def run(args) -> int:
    import pandas as pd

    from airtaper.plant import load_plant
    from airtaper.report.atomic import write_csv_atomic, write_json_atomic
    from airtaper.sweep.grid import Grid
    from airtaper.sweep.journal import gather_table, open_sweep_folder, write_table
    from airtaper.sweep.year import read_months, year_load_days, year_months
    from airtaper.cli.sweep import _options, _refuse_inputs_inside

    check_cluster_options(args)
    warnings: list = []
    plant = load_plant(args.layout, warnings=warnings)  # every check `optimize` runs, before any day
    for w in warnings:
        print(str(w), file=sys.stderr)
    months = read_months(args.months) if args.months else None
    if months is not None:
        scenarios, day_of_month = _month_scenarios(months, args.months)
        inputs = tuple(dict.fromkeys(k for m in months for k in m.values))
    else:
        scenarios, weights = _load_day_scenarios(plant.layout)  # load days apply to the layout as given
        inputs = ("days_per_year", "flow_factor", "load_factor", "water_temperature_C", "alpha_factor")
    grid = Grid(args.months or args.layout, tuple(scenarios), (), inputs)
    _refuse_inputs_inside(args.out, [args.layout] + ([args.months] if args.months else []))
    folder = open_sweep_folder(args.out, "year", args.overwrite)
    known, tasks = plan(args.layout, grid, folder, _options(args), kind="year")
    rows, facts = run_plan(known, tasks, [s.id for s in scenarios], args)
    by_id = {r["scenario"]: r for r in rows}
    rate = plant.tariff.demand_charge_per_kW if plant.tariff is not None else None
    if months is not None:
        per, totals = year_months(months, day_of_month, by_id, rate)
    else:
        per, totals = year_load_days(weights, by_id, rate)
    frame = gather_table(rows, inputs)
    files = write_table(folder, frame)
    month_frame = pd.DataFrame(per)
    files.append(write_csv_atomic(folder / "months.csv", month_frame))
    currency = plant.tariff.currency if plant.tariff is not None else ""
    summary = {"kind": "year", "layout": args.layout, "months": args.months, "inputs": list(inputs),
               "currency": currency, **facts, "statuses": count_line(rows), "year": totals,
               "periods": per, "caution": CAUTION}
    files.append(write_json_atomic(folder / "year.json", summary))
    if not args.no_report:
        from airtaper.report.sweep import write_sweep_report

        files += write_sweep_report(folder, frame, summary, months=month_frame)
    lost = [r["scenario"] for r in rows if r.get("status") == "lost"]
    print(f"days              {len(rows)} optimised ({count_line(rows)}), {totals['days']:g} days of the year")
    print(f"energy            {_fmt((totals['energy_kWh'] or 0) / 1000.0)} MWh per year"
          if totals["energy_kWh"] is not None else "energy            - (a day has no result)")
    if totals.get("cost") is not None:
        print(f"cost              {_fmt(totals['cost'], 0)} {currency} per year (energy {_fmt(totals['energy_cost'], 0)}"
              f" + demand {_fmt(totals['demand_charge'], 0)}; demand billed {totals['demand_billing']})")
    print(f"peak              {_fmt(totals['peak_kW'])} kW")
    print(f"compliance        {_fmt(totals['compliant_days'], 0)} of {_fmt(totals['days'], 0)} days meet every limit")
    print(f"outputs           {folder}")
    if lost:
        print(f"note              lost (run the command again to retry): {', '.join(lost)}")
    print("caution           " + CAUTION)
    return EXIT_FAILURE if lost else EXIT_OK
