"""`airtaper report DIR`: rebuild the report and workbook of a finished output folder, without solving.

Reads the folder's ``summary.json`` and tables (and the layout the summary names, or
``--layout``) and writes the figures' PNG files, ``report.html`` and ``results.xlsx`` into
the folder, each atomically, through the same
:func:`airtaper.report.build.write_report` that ``airtaper optimize`` runs. A folder of
``airtaper design`` or ``airtaper compare`` (known by its ``candidates.csv`` or
``compare.csv``) gets its figures and ``report.html`` through the same functions those
commands run (:func:`airtaper.report.design.write_design_report`,
:func:`~airtaper.report.design.write_compare_report`). Exit codes: 0 done; 2 the folder
is not a finished output folder, or ``--layout`` does not read.
"""

from __future__ import annotations

from airtaper.report.build import write_report
from airtaper.report.design import folder_kind, write_compare_report, write_design_report


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "report", help="rebuild report.html and results.xlsx of a finished output folder (no solve)",
        description="Rebuild the figures, report.html and results.xlsx of an output folder of `airtaper optimize` "
                    "(the figures and report.html of a folder of `airtaper design` or `airtaper compare`) from its "
                    "files, without solving again.")
    p.add_argument("folder", metavar="DIR", help="output folder of airtaper optimize, design or compare")
    p.add_argument("--layout", metavar="LAYOUT",
                   help="the layout of the run, when the path recorded in summary.json no longer leads to it "
                        "(optimize and design folders)")
    p.add_argument("--no-figure", action="store_true", help="no figures (no PNG files, none in the page)")
    p.set_defaults(handler=run)


def run(args) -> int:
    kind = folder_kind(args.folder)
    if kind == "design":
        written = write_design_report(args.folder, layout_path=args.layout, figures=not args.no_figure)
    elif kind == "compare":
        written = write_compare_report(args.folder, figures=not args.no_figure)
    else:
        written = write_report(args.folder, layout_path=args.layout, figures=not args.no_figure)
    for path in written:
        print(f"wrote {path}")
    return 0
