"""`airtaper optimize LAYOUT --out DIR`: the diurnal tapered-aeration schedule at least blower energy or cost.

Runs :func:`airtaper.optimize.diurnal.run_optimization` (baseline under uniform DO
control, the optimisation on the cyclic model, verification by the independent
simulator, marginal costs) with a progress display on stderr, writes
``schedule.csv``, ``header.csv``, ``blowers.csv``, ``timeseries.csv``, ``summary.json``,
``schedule.png`` and ``report.html`` to DIR as one set (:mod:`airtaper.report.outputs`:
the folder is checked before the solve, appears complete or not at all, and an
earlier run's folder is kept unless ``--overwrite``), and prints a short
summary. Exit codes: 0 done and verified; 2 bad input; 3 the limits cannot all be
met (the summary says which, where and when); 4 the re-simulated schedule breaks
a limit; 1 the solver failed.
"""

from __future__ import annotations

import sys

from airtaper.cli.main import add_output_options, number_option_problems
from airtaper.errors import InputError, Problem
from airtaper.layout import layout_input_files
from airtaper.plant import load_plant, resolve_plant
from airtaper.report.outputs import output_folder
from airtaper.report.study_files import console_summary, write_study_outputs


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "optimize", help="optimise the diurnal aeration schedule (least blower energy or cost)",
        description="Find the airflow per zone and period (and the DO it gives) that meets the effluent and DO "
                    "limits at the least blower energy, or cost under the layout's tariff; compare with uniform "
                    "DO control, verify by re-simulation, and report marginal costs.")
    p.add_argument("layout", metavar="LAYOUT", help="layout TOML file, e.g. layouts/demo.toml")
    add_output_options(p)
    p.add_argument("--overrides", metavar="FILE",
                   help="override file (e.g. from `airtaper calibrate`) applied to the layout before validation")
    p.add_argument("--day", metavar="ID", help="optimise the layout's load day ID ([[load_days]]) instead of its "
                                               "base profile")
    p.add_argument("--objective", choices=("energy", "cost"), help="override the layout's objective")
    p.add_argument("--smoothing-weight", type=float, metavar="W",
                   help="weight of the penalty on period-to-period airflow change (default: the layout's)")
    p.add_argument("--mixing-min", type=float, metavar="SM3_H_M2",
                   help="mixing minimum airflow per floor area for every aerated zone, Sm3/(m2 h)")
    p.add_argument("--baseline-do", type=float, metavar="MG_L", help="DO setpoint of the baseline (default 2.0)")
    p.add_argument("--solve-budget", type=float, metavar="CPU_S",
                   help="CPU seconds the run's Ipopt solves may take together before the run ends with exit 3 "
                        "(default 420; a study solved again on 30-minute steps gets the same again; raise it "
                        "for large plants or many periods)")
    p.add_argument("--no-figure", action="store_true", help="skip schedule.png")
    p.add_argument("--no-report", action="store_true",
                   help="write the tables and summary.json only (build the report later with `airtaper report DIR`)")
    p.add_argument("--quiet", action="store_true", help="no progress display")
    p.set_defaults(handler=run)


def _check(args) -> list[Problem]:
    return number_option_problems((("--smoothing-weight", args.smoothing_weight, 0.0),
                                   ("--mixing-min", args.mixing_min, 0.0), ("--baseline-do", args.baseline_do, 1e-9),
                                   ("--solve-budget", args.solve_budget, 1.0)))


def _load_day(path, layout, day_id: str):
    """The Layout of the load day ``day_id`` (bad input when the layout names no such day)."""
    from airtaper.layout.loaddays import day_layout

    for day in layout.load_days:
        if day.id == day_id:
            return day_layout(layout, day)
    ids = ", ".join(d.id for d in layout.load_days)
    raise InputError(Problem(path, "--day", "no load day with that id", day_id,
                             f"one of {ids}" if ids else "a layout with [[load_days]]"))


def run(args) -> int:
    from airtaper.optimize.progress import Progress
    from airtaper.optimize.diurnal import StudyOptions, run_optimization

    problems = _check(args)
    if problems:
        raise InputError(problems)
    warnings: list = []
    plant = load_plant(args.layout, args.overrides, warnings=warnings)
    for w in warnings:
        print(str(w), file=sys.stderr)
    if args.day is not None:  # a load day applies to the layout before resolution (the input boundary)
        plant = resolve_plant(_load_day(args.layout, plant.layout, args.day))
    if not plant.diffused:
        raise InputError(Problem(args.layout, "zones", "no zone has a diffuser grid: there is no airflow to optimise",
                                 None, "at least one aerated zone with a [zones.grid]"))
    if args.objective == "cost" and plant.tariff is None:
        raise InputError(Problem(args.layout, "--objective", "a cost objective needs a [tariff] in the layout",
                                 "cost", '"energy", or add [tariff]'))
    options = StudyOptions(objective=args.objective, smoothing_weight=args.smoothing_weight,
                           mixing_airflow_min_Sm3_h_m2=args.mixing_min, baseline_do_setpoint_mg_L=args.baseline_do,
                           **({} if args.solve_budget is None else {"solve_budget_s": args.solve_budget}))
    inputs = layout_input_files(args.layout, plant.layout) + ([args.overrides] if args.overrides else [])
    with output_folder(args.out, inputs=inputs, overwrite=args.overwrite) as out:
        progress = Progress(enabled=not args.quiet)
        result = run_optimization(plant, options, progress)
        progress.phase("writing outputs")
        summary = {**result.summary, **out.provenance()}
        write_study_outputs(out.staging, schedule=result.schedule, header=result.header,
                            timeseries=result.timeseries, summary=summary, figure=not args.no_figure,
                            blowers=result.blowers, report=not args.no_report)
    print(console_summary(summary))
    if summary.get("status") == "unverified":
        print("WARNING: the optimised schedule breaks a limit when re-simulated by the independent simulator; "
              "do not use it as it is (see summary.json, verification).", file=sys.stderr)
    return result.exit_code
