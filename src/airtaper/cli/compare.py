"""`airtaper compare A.toml B.toml ... --out DIR`: layouts optimised over their load days, side by side.

Runs :func:`airtaper.optimize.compare.run_compare` and writes ``compare.csv``,
``load_days.csv``, ``summary.json``, ``train_<k>.png`` and ``report.html`` to DIR as
one set. Exit codes: 0 every layout optimised and verified; 2 bad input; 3 a layout
cannot meet its limits; 4 a re-simulated schedule breaks a limit; 1 a solve failed.
"""

from __future__ import annotations

import sys

from airtaper.cli.design import grid_problems, periods_problems
from airtaper.cli.main import add_output_options
from airtaper.errors import InputError, Problem
from airtaper.layout import layout_input_files
from airtaper.plant import load_plant
from airtaper.report.outputs import output_folder


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "compare", help="optimise several layouts over their load days and set them side by side",
        description="Optimise each layout on each of its load days as `optimize` does, sum the year, and tabulate "
                    "energy, cost, margins, diffusers and blower use side by side with the differences against "
                    "the first layout; the trains are drawn side by side.")
    p.add_argument("layouts", nargs="+", metavar="LAYOUT", help="layout TOML files; the first is the reference")
    add_output_options(p)
    p.add_argument("--periods", type=int, metavar="N",
                   help="periods per day of every schedule (a divisor or multiple of each layout's)")
    p.add_argument("--no-figure", action="store_true", help="skip the train drawings")
    p.add_argument("--quiet", action="store_true", help="no progress display")
    p.set_defaults(handler=run)


def run(args) -> int:
    from airtaper.optimize.compare import run_compare
    from airtaper.optimize.progress import Progress
    from airtaper.report.design import compare_console, write_compare_outputs

    warnings: list = []
    problems: list[Problem] = []
    plants, inputs = [], []
    for path in args.layouts:
        try:
            plant = load_plant(path, warnings=warnings)  # every check `check` and `optimize` run
        except InputError as exc:
            problems.extend(exc.problems)
            continue
        problems += periods_problems(args.periods, plant, f"{path}'s") + grid_problems(path, plant,
                                                                                       "no airflow to optimise")
        plants.append((path, plant))
        inputs += [f for f in layout_input_files(path, plant.layout) if f not in inputs]
    for w in warnings:
        print(str(w), file=sys.stderr)
    if problems:
        raise InputError(problems)
    with output_folder(args.out, inputs=inputs, overwrite=args.overwrite) as out:
        progress = Progress(enabled=not args.quiet)
        result = run_compare(plants, args.periods, progress)
        progress.phase("writing outputs")
        result.summary.update(out.provenance())
        write_compare_outputs(out.staging, result, figures=not args.no_figure)
    print(compare_console(result.summary))
    return result.exit_code
