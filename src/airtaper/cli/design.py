"""`airtaper design LAYOUT --out DIR`: the diffuser count of every zone over the layout's load days.

Runs :func:`airtaper.optimize.design.run_design` (every load day's schedule and the
shared diffuser counts as one nonlinear problem, whole counts by a small search, each
day re-simulated, capital against energy) and writes ``design.csv``,
``load_days.csv``, ``schedule.csv``, ``candidates.csv``, ``summary.json``,
``taper.png``, ``train.png`` and ``report.html`` to DIR as one set. Exit codes: 0
done and verified; 2 bad input; 3 no grid in the design ranges meets every load
day's limits; 4 a re-simulated day breaks a limit; 1 the solver failed.
"""

from __future__ import annotations

import sys

from airtaper.cli.main import add_output_options
from airtaper.errors import InputError, Problem
from airtaper.layout import layout_input_files
from airtaper.plant import load_plant
from airtaper.report.outputs import output_folder


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "design", help="choose the diffuser count of every zone over the layout's load days",
        description="Choose the diffuser count of every diffused zone, shared by every load day of the layout, "
                    "with each day's schedule optimised, at the least annual cost of the grid's capital and the "
                    "year's energy; whole counts in the zones' count_step; every day verified by re-simulation; "
                    "payback and net present value against the current grid.")
    p.add_argument("layout", metavar="LAYOUT", help="layout TOML file with [capital] and [tariff], e.g. "
                                                    "layouts/demo.toml")
    add_output_options(p)
    p.add_argument("--overrides", metavar="FILE", help="override file applied to the layout first")
    p.add_argument("--periods", type=int, metavar="N",
                   help="periods per day of the design's search (a divisor or multiple of the layout's; fewer "
                        "periods solve faster); the chosen grid's days are then solved again, held and verified on "
                        "the layout's own periods")
    p.add_argument("--own-periods", metavar="DAY[,DAY]",
                   help="with --periods: the load days (ids) searched on the layout's own periods all the same "
                        "(default: the days whose basis is minimum_day, whose night the coarse periods average "
                        "away); an empty string for none")
    p.add_argument("--no-verify", action="store_true", help="skip the re-simulation of every load day")
    p.add_argument("--no-figure", action="store_true", help="skip taper.png and train.png")
    p.add_argument("--quiet", action="store_true", help="no progress display")
    p.set_defaults(handler=run)


def grid_problems(path: str, plant, what: str) -> list[Problem]:
    """A plant with no diffuser grid, for a command that needs one (``what`` it would do)."""
    if plant.diffused:
        return []
    return [Problem(path, "zones", f"no zone has a diffuser grid: there is {what}", None,
                    "at least one aerated zone with a [zones.grid]")]


def layout_problems(path: str, plant) -> list[Problem]:
    """What a layout's resolved plant lacks for a design (one line each)."""
    out = []
    if plant.capital is None:
        out.append(Problem(path, "capital", "a design weighs capital against energy: the layout gives no costs", None,
                           "a [capital] table with cost_per_diffuser"))
    return out + grid_problems(path, plant, "nothing to design")


def periods_problems(n: int | None, plant, whose: str = "the layout's") -> list[Problem]:
    """``--periods N``: the plant's diurnal grid must map onto N periods (optimize.horizon.with_periods)."""
    have = plant.n_periods
    if n is None or (1 <= n <= 288 and (have % n == 0 or n % have == 0)):
        return []
    return [Problem("<command line>", "--periods", f"must divide or be a multiple of {whose} periods", n,
                    f"a divisor or multiple of {have}, at most 288")]


def own_periods_problems(value: str | None, plant) -> tuple[tuple[str, ...] | None, list[Problem]]:
    """``--own-periods DAY[,DAY]``: the load days named must be the layout's (None: the default days)."""
    if value is None:
        return None, []
    days = tuple(d for d in (x.strip() for x in value.split(",")) if d)
    ids = [d.id for d in plant.load_days]
    bad = [d for d in days if d not in ids]
    if bad:
        return None, [Problem("<command line>", "--own-periods", "no such load day", bad[0],
                              ("one of " + ", ".join(ids)) if ids else "a layout with [[load_days]]")]
    return days, []


def run(args) -> int:
    from airtaper.optimize.design import DesignOptions, run_design
    from airtaper.optimize.progress import Progress
    from airtaper.report.design import design_console, write_design_outputs

    warnings: list = []
    plant = load_plant(args.layout, args.overrides, warnings=warnings)  # every check `check` and `optimize` run
    for w in warnings:
        print(str(w), file=sys.stderr)
    own, own_problems = own_periods_problems(args.own_periods, plant)
    problems = layout_problems(args.layout, plant) + periods_problems(args.periods, plant) + own_problems
    if problems:
        raise InputError(problems)
    inputs = layout_input_files(args.layout, plant.layout) + ([args.overrides] if args.overrides else [])
    with output_folder(args.out, inputs=inputs, overwrite=args.overwrite) as out:
        progress = Progress(enabled=not args.quiet)
        result = run_design(plant, DesignOptions(n_periods=args.periods, verify=not args.no_verify,
                                                   own_period_days=own), progress)
        progress.phase("writing outputs")
        result.summary.update(out.provenance())
        write_design_outputs(out.staging, result, figures=not args.no_figure)
    print(design_console(result.summary))
    return result.exit_code
