"""`airtaper simulate LAYOUT --out DIR [--do-setpoint X | --schedule FILE]`: the periodic day.

Runs the independent simulator (:mod:`airtaper.simulate`) from the steady state
at mean load until the day repeats, and writes ``timeseries.csv`` (time_h,
zone, the 13 ASM1 components, airflow_Sm3_h, kla_per_h, otr_kg_h),
``effluent.csv`` and ``summary.json`` to DIR, as one set
(:mod:`airtaper.report.outputs`: checked before the run, an earlier run's
folder kept unless ``--overwrite``).

``--schedule`` reads zone airflows per period from a CSV with the columns
``period_start_h``, ``zone`` and ``airflow_Sm3_h`` (the optimiser's
``schedule.csv`` has them, other columns are ignored). Every zone with a
diffuser grid needs one row per period: a missing (period, zone) pair is an
error naming the pairs, as is a pair listed twice; a schedule whose every
airflow lies below its zone's minimum, where 60 times the values would fit, is
refused as likely typed in Sm3/min. Without either option every aerated
diffused zone is held at the layout's baseline DO setpoint (ideal DO control).
"""

from __future__ import annotations

import io
import math
import sys

import numpy as np
import pandas as pd

from airtaper.cli.main import add_output_options
from airtaper.errors import EXIT_OK, InputError, Problem
from airtaper.layout.reader import LayoutWarning, UnreadableInput, read_input_file
from airtaper.report.atomic import write_csv_atomic, write_json_atomic
from airtaper.report.outputs import output_folder

OUTPUT_NAMES = ("timeseries.csv", "effluent.csv", "summary.json")
#: Largest schedule CSV read, bytes (288 periods x 200 zones of rows fit many times over).
MAX_SCHEDULE_BYTES = 20_000_000
#: A schedule in Sm3/min is 60 times too small; refused when x 60 stays within this factor of the zone maxima.
SM3_MIN_FIT = 1.5
SCHEDULE_COLUMNS = ("period_start_h", "zone", "airflow_Sm3_h")
#: Most days `--max-days` may ask for (a day that has not repeated after a year will not).
MAX_DAYS = 365


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "simulate", help="simulate the periodic day of a layout (independent simulator)",
        description="Simulate the layout from its steady state at mean load until the day repeats; "
                    "write timeseries.csv, effluent.csv and summary.json.")
    p.add_argument("layout", metavar="LAYOUT", help="layout TOML file")
    add_output_options(p)
    g = p.add_mutually_exclusive_group()
    g.add_argument("--do-setpoint", type=float, metavar="MG_L",
                   help="ideal DO control of every aerated zone to this setpoint, mg/L")
    g.add_argument("--schedule", metavar="CSV", help="zone airflows per period (period_start_h, zone, airflow_Sm3_h)")
    p.add_argument("--max-days", type=int, default=30, help="days to simulate at most (default 30)")
    p.add_argument("--tol", type=float, default=1e-3,
                   help="the day repeats when max |y(24 h) - y(0)| / max(|y|, 1) is below this (default 1e-3)")
    p.set_defaults(handler=run)


def _number(value) -> float:
    try:
        return float(value)
    except (TypeError, ValueError, OverflowError):
        return math.nan


def _hours(x: float) -> str:
    return f"{x:g} h"


def read_schedule(path: str, plant, warnings: list | None = None):
    """Airflow (periods, zones) of a resolved plant from a schedule CSV; :class:`InputError` listing every bad
    row or missing pair (the schedule's input boundary: the simulator trusts what this returns).

    ``warnings`` receives a line for airflows outside their zone's range (the
    simulator runs them as given).
    """
    try:
        raw = read_input_file(path, MAX_SCHEDULE_BYTES, "the schedule")
        frame = pd.read_csv(io.BytesIO(raw), dtype=str, keep_default_na=False, skip_blank_lines=False)
    except UnreadableInput as exc:
        raise InputError(Problem(path, "--schedule" if exc.got is None else "(file)", exc.problem, exc.got,
                                 exc.expected)) from None
    except (ValueError, pd.errors.ParserError) as exc:  # not UTF-8, not CSV, no columns
        raise InputError(Problem(path, "(file)", f"cannot read the CSV ({str(exc).splitlines()[0]})", None,
                                 "columns " + ", ".join(SCHEDULE_COLUMNS))) from None
    frame.columns = [str(c).strip() for c in frame.columns]
    missing = [c for c in SCHEDULE_COLUMNS if c not in frame.columns]
    if missing:
        raise InputError(Problem(path, "row 1", "missing columns", got=", ".join(missing),
                                 expected=", ".join(SCHEDULE_COLUMNS)))
    n, period_h = plant.n_periods, plant.period_h
    ids = {zid: i for i, zid in enumerate(plant.zone_ids)}
    ranges = {d.id: (d.airflow_min_Sm3_h, d.airflow_max_Sm3_h) for d in plant.diffused}
    gridded = [zid for zid in plant.zone_ids if zid in ranges and ranges[zid][1] > 0.0]
    air = np.zeros((n, plant.n_zones))
    seen: dict[tuple[int, str], int] = {}
    problems = []
    for row_no, (zone, start, q) in enumerate(zip(frame["zone"], frame["period_start_h"], frame["airflow_Sm3_h"]),
                                              start=2):
        zone, start, q = zone.strip(), start.strip(), q.strip()
        if not (zone or start or q):
            continue  # a blank line
        if zone not in ids:
            problems.append(Problem(path, f"row {row_no}, column zone", "no zone with this id", got=zone,
                                    expected="one of " + ", ".join(ids)))
            continue
        k = _number(start) / period_h
        if not math.isfinite(k) or abs(k - round(k)) > 1e-6 or not 0 <= round(k) < n:
            problems.append(Problem(path, f"row {row_no}, column period_start_h", "not the start of a period",
                                    got=start, expected=f"a multiple of {period_h:g} h below 24"))
            continue
        qv = _number(q)
        if not math.isfinite(qv) or qv < 0.0:
            problems.append(Problem(path, f"row {row_no}, column airflow_Sm3_h", "must be a number >= 0", got=q,
                                    expected="an airflow in Sm3/h"))
            continue
        p = int(round(k))
        if (p, zone) in seen:
            problems.append(Problem(path, f"row {row_no}", f"period {_hours(p * period_h)}, zone {zone} listed twice",
                                    got=f"also row {seen[(p, zone)]}", expected="one row per period and zone"))
            continue
        seen[(p, zone)] = row_no
        if zone not in gridded and qv > 0.0:
            problems.append(Problem(path, f"row {row_no}, column airflow_Sm3_h", f"zone {zone} takes no air "
                                    "(no diffuser grid, or not aerated)", got=q, expected="0, or no row"))
            continue
        air[p, ids[zone]] = qv
    absent = [(p, z) for p in range(n) for z in gridded if (p, z) not in seen]
    if absent:
        listed = "; ".join(f"{_hours(p * period_h)} {z}" for p, z in absent[:8])
        more = f" and {len(absent) - 8} more" if len(absent) > 8 else ""
        problems.append(Problem(path, "rows", f"no airflow for {len(absent)} (period, zone) pair(s): {listed}{more}",
                                None, "one row per period for every zone with diffusers"))
    if problems:
        raise InputError(problems)
    given = [(air[p, ids[z]], *ranges[z]) for p in range(n) for z in gridded]
    if given and all(q < lo for q, lo, _ in given) and all(60.0 * q <= SM3_MIN_FIT * hi for q, _, hi in given):
        low = min(q for q, _, _ in given)
        high = max(q for q, _, _ in given)
        raise InputError(Problem(path, "column airflow_Sm3_h", "every airflow is below its zone's minimum: was the "
                                 "schedule typed in Sm3/min?", f"{low:.4g}-{high:.4g}",
                                 f"Sm3/h (x 60: {60 * low:.4g}-{60 * high:.4g} Sm3/h)"))
    if warnings is not None:
        below = [(p, z, air[p, ids[z]], lo) for p in range(n) for z in gridded
                 for lo in [ranges[z][0]] if 0.0 < air[p, ids[z]] < lo]
        if below:
            p, z, q, lo = below[0]
            warnings.append(LayoutWarning(path, "column airflow_Sm3_h", f"{len(below)} airflow(s) below the zone's "
                                          f"minimum (first: {_hours(p * period_h)} {z} {q:g} < {lo:g} Sm3/h): the "
                                          "diffusers run outside their tested range"))
    return air


def run(args) -> int:
    from airtaper.layout import layout_input_files
    from airtaper.optimize.simday import step_airflow
    from airtaper.optimize.staging import dispatch_summary, steps_dispatch
    from airtaper.plant import load_plant
    from airtaper.simulate import periodic
    from airtaper.simulate.summary import summarize

    if not 1 <= args.max_days <= MAX_DAYS:
        raise InputError(Problem("<command line>", "--max-days", "out of range", got=args.max_days,
                                 expected=f"1 to {MAX_DAYS} days"))
    if args.do_setpoint is not None and not 0.0 < args.do_setpoint < 20.0:
        raise InputError(Problem("<command line>", "--do-setpoint", "out of range", got=args.do_setpoint,
                                 expected="0 < setpoint < 20 mg/L"))
    if not 0.0 < args.tol < 1.0:
        raise InputError(Problem("<command line>", "--tol", "out of range", got=args.tol, expected="0 < tol < 1"))
    warnings: list = []
    plant = load_plant(args.layout, warnings=warnings)
    for w in warnings:
        print(str(w), file=sys.stderr)
    inputs = layout_input_files(args.layout, plant.layout) + ([args.schedule] if args.schedule else [])
    with output_folder(args.out, inputs=inputs, overwrite=args.overwrite) as out:
        warnings = []
        schedule = read_schedule(args.schedule, plant, warnings) if args.schedule else None
        for w in warnings:
            print(str(w), file=sys.stderr)
        result = periodic(plant, schedule=schedule, do_setpoint_mg_L=args.do_setpoint,
                          max_days=args.max_days, tol=args.tol)
        clarifier = result.start.clarifier if result.start is not None else None
        if clarifier is not None and clarifier["overloaded"]:
            print(f"warning: {args.layout}: clarifier: {clarifier['message']}", file=sys.stderr)
        summary = summarize(result)
        dp = steps_dispatch(plant, *step_airflow(plant, result), plant.operation.objective)
        if dp is not None:  # the blowers billed one by one, by the optimiser's dispatch rule
            summary["dispatch"] = dispatch_summary(plant, dp)
            summary["dispatch"]["shortfall"] = [f["message"] for f in dp.findings]
            summary["blower_kWh_per_day"] = summary["dispatch"]["energy_kWh_per_day"]
            summary["blower_kW_max"] = summary["dispatch"]["peak_kW"]
        summary = {**summary, **out.provenance()}
        write_csv_atomic(out.file("timeseries.csv"), result.timeseries)
        write_csv_atomic(out.file("effluent.csv"), result.effluent)
        write_json_atomic(out.file("summary.json"), summary)
    eff = summary["effluent_mg_L"]
    state = "periodic" if result.converged else f"NOT periodic after {result.days} days (change {result.day_change:.2g})"
    print(f"{plant.name}: {state} after {result.days} day(s), {result.seconds:.2f} s")
    print(f"  effluent NH4-N mean {eff['SNH']['mean']:.2f} max {eff['SNH']['max']:.2f} mg/L, "
          f"TN mean {eff['tn_mg_L']['mean']:.2f} mg/L")
    print(f"  air {summary['air_Sm3_per_day']:,.0f} Sm3/d, blower {summary['blower_kWh_per_day']:,.0f} kWh/d")
    if "dispatch" in summary:
        d = summary["dispatch"]
        print("  blowers (dispatched one by one): " + ", ".join(
            f"{b} {v['running_h']:g} h" for b, v in d["blowers"].items() if not v["out_of_service"]))
        for short in d["shortfall"]:
            print(f"warning: {args.layout}: blowers: {short}", file=sys.stderr)  # the one warning form
    for short in summary["setpoint_not_held"]:
        print(f"WARNING: {short['message']}", file=sys.stderr)
    print(f"  wrote {', '.join(OUTPUT_NAMES)} to {args.out}")
    return EXIT_OK
