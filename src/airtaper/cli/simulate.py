"""`airtaper simulate LAYOUT --out DIR [--do-setpoint X | --schedule FILE]`: the periodic day.

Runs the independent simulator (:mod:`airtaper.simulate`) from the steady state
at mean load until the day repeats, and writes ``timeseries.csv`` (time_h,
zone, the 13 ASM1 components, airflow_Sm3_h, kla_per_h, otr_kg_h),
``effluent.csv`` and ``summary.json`` to DIR.

``--schedule`` reads zone airflows per period from a CSV with the columns
``period_start_h``, ``zone`` and ``airflow_Sm3_h`` (the optimiser's
``schedule.csv`` has them); zones or periods not listed get no air. Without
either option every aerated diffused zone is held at the layout's baseline DO
setpoint (ideal DO control).
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pandas as pd

from airtaper.errors import EXIT_OK, InputError, Problem
from airtaper.report.atomic import guard_inputs, write_csv_atomic, write_json_atomic

OUTPUT_NAMES = ("timeseries.csv", "effluent.csv", "summary.json")


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "simulate", help="simulate the periodic day of a layout (independent simulator)",
        description="Simulate the layout from its steady state at mean load until the day repeats; "
                    "write timeseries.csv, effluent.csv and summary.json.")
    p.add_argument("layout", metavar="LAYOUT", help="layout TOML file")
    p.add_argument("--out", required=True, metavar="DIR", help="output folder")
    g = p.add_mutually_exclusive_group()
    g.add_argument("--do-setpoint", type=float, metavar="MG_L",
                   help="ideal DO control of every aerated zone to this setpoint, mg/L")
    g.add_argument("--schedule", metavar="CSV", help="zone airflows per period (period_start_h, zone, airflow_Sm3_h)")
    p.add_argument("--max-days", type=int, default=30, help="days to simulate at most (default 30)")
    p.add_argument("--tol", type=float, default=1e-3,
                   help="the day repeats when max |y(24 h) - y(0)| / max(|y|, 1) is below this (default 1e-3)")
    p.set_defaults(handler=run)


def read_schedule(path: str, layout) -> np.ndarray:
    """Airflow (periods, zones) from a schedule CSV; :class:`InputError` on bad content."""
    try:
        frame = pd.read_csv(path)
    except (OSError, ValueError, pd.errors.ParserError) as exc:
        raise InputError(Problem(path, "--schedule", f"cannot read the CSV ({exc})")) from None
    missing = [c for c in ("period_start_h", "zone", "airflow_Sm3_h") if c not in frame.columns]
    if missing:
        raise InputError(Problem(path, "columns", "missing columns", got=", ".join(missing),
                                 expected="period_start_h, zone, airflow_Sm3_h"))
    n, period_h = layout.horizon.n_periods, layout.horizon.period_h
    ids = {z.id: i for i, z in enumerate(layout.zones)}
    air = np.zeros((n, len(layout.zones)))
    problems = []
    for row_no, row in enumerate(frame.itertuples(index=False), start=2):
        zone, start, q = row.zone, row.period_start_h, row.airflow_Sm3_h
        k = float(start) / period_h if np.isfinite(float(start)) else np.nan
        if str(zone) not in ids:
            problems.append(Problem(path, f"row {row_no}, column zone", "no zone with this id", got=zone))
            continue
        if not np.isfinite(k) or abs(k - round(k)) > 1e-6 or not 0 <= round(k) < n:
            problems.append(Problem(path, f"row {row_no}, column period_start_h", "not the start of a period",
                                    got=start, expected=f"a multiple of {period_h:g} h below 24"))
            continue
        try:
            qv = float(q)
        except (TypeError, ValueError):
            qv = np.nan
        if not np.isfinite(qv) or qv < 0.0:
            problems.append(Problem(path, f"row {row_no}, column airflow_Sm3_h", "must be a number >= 0", got=q))
            continue
        air[int(round(k)), ids[str(zone)]] = qv
    if problems:
        raise InputError(problems)
    return air


def run(args) -> int:
    from airtaper.layout import layout_input_files, load_layout
    from airtaper.simulate import periodic
    from airtaper.simulate.summary import summarize

    warnings: list = []
    layout = load_layout(args.layout, warnings=warnings)
    for w in warnings:
        print(str(w), file=sys.stderr)
    inputs = layout_input_files(args.layout, layout) + ([args.schedule] if args.schedule else [])
    guard_inputs(args.out, inputs, OUTPUT_NAMES)
    if args.max_days < 1:
        raise InputError(Problem("<command line>", "--max-days", "must be at least 1", got=args.max_days))
    if args.do_setpoint is not None and not 0.0 < args.do_setpoint < 20.0:
        raise InputError(Problem("<command line>", "--do-setpoint", "out of range", got=args.do_setpoint,
                                 expected="0 < setpoint < 20 mg/L"))
    schedule = read_schedule(args.schedule, layout) if args.schedule else None
    result = periodic(layout, schedule=schedule, do_setpoint_mg_L=args.do_setpoint,
                      max_days=args.max_days, tol=args.tol)
    summary = summarize(result)
    out = Path(args.out)
    write_csv_atomic(out / "timeseries.csv", result.timeseries)
    write_csv_atomic(out / "effluent.csv", result.effluent)
    write_json_atomic(out / "summary.json", summary)
    eff = summary["effluent_mg_L"]
    state = "periodic" if result.converged else f"NOT periodic after {result.days} days (change {result.day_change:.2g})"
    print(f"{layout.plant.name}: {state} after {result.days} day(s), {result.seconds:.2f} s")
    print(f"  effluent NH4-N mean {eff['SNH']['mean']:.2f} max {eff['SNH']['max']:.2f} mg/L, "
          f"TN mean {eff['tn_mg_L']['mean']:.2f} mg/L")
    print(f"  air {summary['air_Sm3_per_day']:,.0f} Sm3/d, blower {summary['blower_kWh_per_day']:,.0f} kWh/d")
    for short in summary["setpoint_not_held"]:
        print(f"WARNING: {short['message']}", file=sys.stderr)
    print(f"  wrote {', '.join(OUTPUT_NAMES)} to {out}")
    return EXIT_OK
