"""`airtaper calibrate LAYOUT --data DATA.csv --out DIR`: fit alpha x F per zone (and mu_A, K_OH) to plant data.

Reads the layout (optionally with ``--overrides``) and the plant-data CSV
(:mod:`airtaper.layout.plantdata`, docs/calibration.md), runs
:func:`airtaper.calibrate.run_calibration` and writes ``overrides.toml``,
``parameters.csv``, ``fit.csv``, ``summary.json``, ``fit.png``, ``residuals.png`` and
``report.html`` to DIR (each atomically; never over an input). Exit codes: 0 fitted,
2 bad input, 1 the fit did not converge.
"""

from __future__ import annotations

import sys

from airtaper import units
from airtaper.cli.main import add_output_options, number_option_problems
from airtaper.errors import EXIT_FAILURE, EXIT_OK, InputError, Problem
from airtaper.layout import layout_input_files
from airtaper.plant import load_plant
from airtaper.layout.plantdata import load_plant_data
from airtaper.report.calibration import console_summary, write_calibration_outputs
from airtaper.report.outputs import output_folder


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "calibrate", help="fit each zone's alpha x F (and the nitrifiers) to logged plant data",
        description="Fit alpha x F of every diffused zone (optionally mu_A and K_OH) to logged DO and NH4-N with "
                    "the logged airflows imposed, as one nonlinear least-squares problem over the data's days; "
                    "report intervals and identifiability and write the values as an override file.")
    p.add_argument("layout", metavar="LAYOUT", help="layout TOML file, e.g. layouts/demo.toml")
    p.add_argument("--data", required=True, metavar="DATA.csv", help="plant-data CSV (docs/calibration.md)")
    add_output_options(p)
    p.add_argument("--overrides", metavar="FILE", help="override file applied to the layout first")
    p.add_argument("--mu-a", action="store_true", help="also fit mu_A, the autotrophs' maximum growth rate "
                                                       "(needs NH4-N data)")
    p.add_argument("--k-oh", action="store_true", help="also fit K_OH, the heterotrophs' oxygen half-saturation")
    p.add_argument("--do-sd", type=float, default=0.1, metavar="MG_L",
                   help="standard deviation of the DO measurements, the weight of DO residuals (default 0.1)")
    p.add_argument("--nh4-sd", type=float, default=0.3, metavar="MG_L",
                   help="standard deviation of the NH4-N measurements (default 0.3)")
    p.add_argument("--warmup-h", type=float, default=6.0, metavar="H",
                   help="hours at the start of the record left out of the fit (default 6)")
    p.add_argument("--steps-per-period", type=int, metavar="N",
                   help="integration steps per period of the model (default: steps of at most 15 min)")
    p.add_argument("--no-figure", action="store_true", help="skip fit.png and residuals.png")
    p.add_argument("--quiet", action="store_true", help="no progress display")
    p.set_defaults(handler=run)


def _check(args) -> list[Problem]:
    problems = number_option_problems((("--do-sd", args.do_sd, 1e-9), ("--nh4-sd", args.nh4_sd, 1e-9),
                                       ("--warmup-h", args.warmup_h, 0.0)))
    if args.steps_per_period is not None and not 1 <= args.steps_per_period <= 60:
        problems.append(Problem("<command line>", "--steps-per-period", "out of range", args.steps_per_period,
                                "1 to 60"))
    return problems


def run(args) -> int:
    from airtaper.calibrate import CalibrationOptions, run_calibration

    problems = _check(args)
    if problems:
        raise InputError(problems)
    warnings: list = []
    plant = load_plant(args.layout, args.overrides, warnings=warnings)
    record = load_plant_data(args.data, plant.layout, warnings=warnings)  # the data file's own boundary reader
    for w in warnings:
        print(str(w), file=sys.stderr)
    inputs = layout_input_files(args.layout, plant.layout) + [args.data] + ([args.overrides] if args.overrides else [])
    if args.mu_a and not record.nh4_mg_L:
        raise InputError(Problem(args.data, "--mu-a", "fitting mu_A needs NH4-N data", None,
                                 "an nh4_effluent_mg_L or nh4_<zone>_mg_L column"))
    options = CalibrationOptions(mu_A=args.mu_a, K_OH=args.k_oh, do_sd_mg_L=args.do_sd, nh4_sd_mg_L=args.nh4_sd,
                                 warmup_h=args.warmup_h, steps_per_period=args.steps_per_period)
    if args.warmup_h >= units.HOURS_PER_DAY * record.days:
        raise InputError(Problem("<command line>", "--warmup-h", "the warm-up covers the whole record",
                                 args.warmup_h, f"< {units.HOURS_PER_DAY * record.days:g} h"))
    progress = (lambda text: None) if args.quiet else (lambda text: print(f"... {text}", file=sys.stderr))
    with output_folder(args.out, inputs=inputs, overwrite=args.overwrite) as out:
        result = run_calibration(plant, record, options, progress)
        for z, msg in result.held.items():
            print(f"warning: {args.data}: do_{z}_mg_L: {msg}", file=sys.stderr)
        result.summary.update(out.provenance())
        write_calibration_outputs(out.staging, result, figures=not args.no_figure)
    print(console_summary(result.summary))
    return EXIT_OK if result.status == "fitted" else EXIT_FAILURE
