"""`airtaper report DIR`: rebuild the report and workbook of a finished output folder, without solving.

Reads the folder's ``summary.json`` and tables (and the layout the summary names, or
``--layout``) and writes the figures' PNG files, ``report.html`` and ``results.xlsx`` into
the folder, each atomically, through the same
:func:`airtaper.report.build.write_report` that ``airtaper optimize`` runs. Exit
codes: 0 done; 2 the folder is not a finished output folder, or ``--layout`` does
not read.
"""

from __future__ import annotations

from airtaper.report.build import write_report


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "report", help="rebuild report.html and results.xlsx of a finished output folder (no solve)",
        description="Rebuild the figures, report.html and results.xlsx of an output folder of `airtaper optimize` "
                    "from its files, without solving again.")
    p.add_argument("folder", metavar="DIR", help="output folder of airtaper optimize")
    p.add_argument("--layout", metavar="LAYOUT",
                   help="the layout of the run, when the path recorded in summary.json no longer leads to it")
    p.add_argument("--no-figure", action="store_true", help="no figures (no PNG files, none in the page)")
    p.set_defaults(handler=run)


def run(args) -> int:
    for path in write_report(args.folder, layout_path=args.layout, figures=not args.no_figure):
        print(f"wrote {path}")
    return 0
