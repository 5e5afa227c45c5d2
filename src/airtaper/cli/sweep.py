"""`airtaper sweep LAYOUT --grid GRID.toml --out DIR`: many `optimize` runs at once on Dask.

Each scenario of the grid file (:mod:`airtaper.sweep.grid`) is a set of layout values
by key path. All are validated first through the layout's parser: a scenario with a
bad value is a failed row (exit code 2, the one-line message naming the grid file,
the scenario and the key) and the others run. Each scenario then runs the
``optimize`` command itself in a Dask worker (:func:`optimize_scenario`), with the
scenario's values as an override file, into its own output folder; its row is
written to the sweep folder's journal (:mod:`airtaper.sweep.journal`) the moment it
ends. Rerunning the same command skips finished scenarios. The rows are gathered
into ``results.parquet`` and ``results.csv``, with ``sweep.json`` and a report.

Exit code 0 when every scenario has its row (failed and infeasible scenarios are
rows too: read ``status``); 2 for a bad grid file, layout or option; 1 when a
scenario was lost (its workers kept dying: run the command again to retry it).
"""

from __future__ import annotations

import contextlib
import io
import json
import os
import shutil
import sys
import time
from pathlib import Path

from airtaper.cli.main import number_option_problems
from airtaper.errors import EXIT_FAILURE, EXIT_INPUT, EXIT_OK, InputError, Problem
from airtaper.report.text import CAUTION


def add_cluster_options(p) -> None:
    """``--out``, ``--overwrite``, ``--scheduler``, ``--workers``, ``--quiet``, ``--no-report``: sweep and year."""
    p.add_argument("--out", required=True, metavar="DIR",
                   help="sweep folder: one row file and one output folder per scenario, the table and the report; "
                        "the same command rerun resumes it")
    p.add_argument("--overwrite", action="store_true", help="start the folder's sweep again from nothing")
    p.add_argument("--scheduler", metavar="ADDRESS",
                   help="address of a running Dask scheduler to use as it is (default: a local cluster)")
    p.add_argument("--workers", type=int, metavar="N",
                   help="worker processes of the local cluster (default: one per core)")
    p.add_argument("--objective", choices=("energy", "cost"), help="override the layout's objective")
    p.add_argument("--scenario-reports", action="store_true",
                   help="build each scenario's report.html and figures too (default: tables and summary.json; "
                        "`airtaper report DIR/runs/ID` builds one later)")
    p.add_argument("--no-report", action="store_true", help="skip the sweep's own report.html and figures")
    p.add_argument("--quiet", action="store_true", help="no progress bar")


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "sweep", help="optimise many scenarios (a grid of layout values) in parallel on Dask",
        description="Run `optimize` for every scenario of a grid file (layout values by key path) on a Dask "
                    "cluster, one output folder per scenario, and gather one table with a row per scenario. "
                    "Rerunning the same command resumes an interrupted sweep.")
    p.add_argument("layout", metavar="LAYOUT", help="layout TOML file, e.g. layouts/demo.toml")
    p.add_argument("--grid", required=True, metavar="GRID",
                   help="grid file: [common], [grid] and [[scenarios]] of key paths, e.g. layouts/demo_grid.toml")
    add_cluster_options(p)
    p.set_defaults(handler=run)


# --------------------------------------------------------------------------- the worker's task
def optimize_scenario(task: dict) -> dict:
    """Run ``airtaper optimize`` for one scenario (in a Dask worker) and write its row; return the row.

    The command is the one a user runs (same parsing, checks, study, outputs and
    exit codes), with the scenario's override file; its console output is kept
    out of the worker's log and its error lines go into the row's message.
    """
    from airtaper.cli.main import main
    from airtaper.sweep.journal import finished_row, summary_row, write_row

    done = finished_row(Path(task["root"]), task["id"], task["fingerprint"])
    if done is not None:
        # Dask runs a task again when the worker holding its result is lost: the scenario has finished and its
        # row and folder stand (running it again would rewrite the row and remove the folder meanwhile).
        return done
    t0, c0 = time.perf_counter(), time.process_time()
    out = Path(task["out"])
    if out.exists():  # an earlier run of a scenario that did not finish (no row): ours, start it again
        shutil.rmtree(out)
    argv = ["optimize", task["layout"], *(["--overrides", task["overrides"]] if task["overrides"] else []),
            "--out", str(out), "--quiet", *task["options"]]
    err = io.StringIO()
    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(err):
        code = main(argv)
    summary = None
    if (out / "summary.json").is_file():
        summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    row = {"scenario": task["id"], "inputs": task["inputs"], **summary_row(summary)}
    errors = [line for line in err.getvalue().splitlines() if line.startswith("error:")]
    row["exit_code"] = code
    if summary is None:
        row["status"] = "bad input" if code == EXIT_INPUT else "failed"
    if errors:
        row["message"] = "; ".join(errors + ([row["message"]] if row.get("message") else []))
    row["run_s"] = time.perf_counter() - t0
    row["run_cpu_s"] = time.process_time() - c0
    row["folder"] = os.path.relpath(out, task["root"]) if out.is_dir() else None
    row["fingerprint"] = task["fingerprint"]
    write_row(task["row"], row)
    return row


# --------------------------------------------------------------------------- planning the runs
def _refuse_inputs_inside(out: str, files: list[str]) -> None:
    dest = Path(os.path.realpath(out))
    for f in files:
        real = Path(os.path.realpath(f))
        if real == dest or dest in real.parents:
            raise InputError(Problem(out, "--out", "the sweep folder holds an input of this run", f,
                                     "a folder that holds no input"))


def plan(layout_path: str, grid, folder: Path, options: list[str], stream=None, kind: str = "sweep"):
    """(rows known before any solve, tasks to run): bad scenarios and finished ones are rows already.

    Every scenario's layout is validated here; its values are written as
    ``scenarios/ID.toml`` for the worker (and for anyone rerunning it by hand).
    """
    from airtaper.layout import layout_input_files
    from airtaper.layout.overrides import overrides_to_toml
    from airtaper.report.atomic import write_text_atomic
    from airtaper.sweep.grid import check_scenario
    from airtaper.sweep.journal import RUNS, SCENARIOS, finished_row, fingerprint, row_path, write_row

    stream = stream if stream is not None else sys.stderr
    known, tasks = {}, []
    resumed = 0
    for sc in grid.scenarios:
        inputs = sc.inputs()
        run_options = [*options, *sc.options]
        try:
            layout = check_scenario(layout_path, grid.path, sc)
            files = layout_input_files(layout_path, layout)
        except InputError as exc:
            for p in exc.problems:
                print(str(p), file=stream)
            fp = fingerprint([layout_path, grid.path], sc.values, run_options)
            row = finished_row(folder, sc.id, fp)
            if row is None:
                row = {"scenario": sc.id, "inputs": inputs, "status": "bad input", "exit_code": EXIT_INPUT,
                       "message": "; ".join(str(p) for p in exc.problems), "folder": None, "fingerprint": fp}
                write_row(row_path(folder, sc.id), row)
            known[sc.id] = row
            continue
        fp = fingerprint(files, sc.values, run_options)
        row = finished_row(folder, sc.id, fp)
        if row is not None:
            known[sc.id] = row
            resumed += 1
            continue
        overrides = None
        if sc.values:
            overrides = folder / SCENARIOS / f"{sc.id}.toml"
            write_text_atomic(overrides, overrides_to_toml(
                sc.values, header=f"scenario {sc.id} of the {kind} of {layout_path}" +
                (f" by {grid.path}" if grid.path else "")))
        tasks.append({"id": sc.id, "inputs": inputs, "layout": os.path.abspath(layout_path),
                      "overrides": None if overrides is None else str(overrides),
                      "out": str(folder / RUNS / sc.id), "root": str(folder),
                      "row": str(row_path(folder, sc.id)), "fingerprint": fp, "options": run_options})
    if resumed:
        print(f"{resumed} of {len(grid.scenarios)} scenarios already have their row from an earlier run "
              f"({len(tasks)} to run)", file=stream)
    return known, tasks


def run_plan(known: dict, tasks: list, order: list[str], args, fn=None) -> tuple[list[dict], dict]:
    """Run the tasks on Dask (or the scheduler given); return the rows in ``order`` and run facts."""
    from airtaper.sweep.execute import Execution

    t0 = time.perf_counter()
    ex = Execution(tasks, fn or optimize_scenario, scheduler=args.scheduler, workers=args.workers,
                   progress=not args.quiet)
    got = dict(known)
    for row in ex.rows():
        got[row["scenario"]] = row
    facts = {"scenarios": len(order), "run_now": len(tasks), "known_before": len(known), "workers": ex.n_workers,
             "scheduler": args.scheduler or "local cluster", "wall_s": time.perf_counter() - t0,
             "peak_memory_per_worker_MB": {w: b / 2**20 for w, b in ex.peak_memory_bytes.items()}}
    return [got[i] for i in order], facts


def _options(args) -> list[str]:
    opts = [] if args.scenario_reports else ["--no-report"]
    if args.objective:
        opts += ["--objective", args.objective]
    return opts


def check_cluster_options(args) -> None:
    problems = number_option_problems((("--workers", args.workers, 1),))
    if problems:
        raise InputError(problems)


def count_line(rows: list[dict]) -> str:
    counts: dict = {}
    for r in rows:
        counts[r.get("status")] = counts.get(r.get("status"), 0) + 1
    return ", ".join(f"{n} {s}" for s, n in sorted(counts.items(), key=lambda kv: str(kv[0])))


def run(args) -> int:
    from airtaper.plant import load_plant
    from airtaper.report.atomic import write_json_atomic
    from airtaper.sweep.grid import read_grid
    from airtaper.sweep.journal import gather_table, open_sweep_folder, write_table

    check_cluster_options(args)
    grid = read_grid(args.grid)
    warnings: list = []
    load_plant(args.layout, warnings=warnings)  # the layout itself must pass every check `optimize` runs first
    for w in warnings:
        print(str(w), file=sys.stderr)
    _refuse_inputs_inside(args.out, [args.layout, args.grid])
    folder = open_sweep_folder(args.out, "sweep", args.overwrite)
    known, tasks = plan(args.layout, grid, folder, _options(args))
    rows, facts = run_plan(known, tasks, [s.id for s in grid.scenarios], args)
    frame = gather_table(rows, grid.inputs)
    files = write_table(folder, frame)
    summary = {"kind": "sweep", "layout": args.layout, "grid": args.grid, "axes": list(grid.axes),
               "inputs": list(grid.inputs), **facts, "statuses": count_line(rows), "caution": CAUTION}
    files.append(write_json_atomic(folder / "sweep.json", summary))
    if not args.no_report:
        from airtaper.report.sweep import write_sweep_report

        files += write_sweep_report(folder, frame, summary)
    lost = [r["scenario"] for r in rows if r.get("status") == "lost"]
    print(f"scenarios         {len(rows)} ({count_line(rows)})")
    print(f"ran now           {facts['run_now']} on {facts['workers']} workers in {facts['wall_s']:.1f} s"
          f"; {facts['known_before']} known before (an earlier run, or bad input)")
    print(f"table             {files[0]} and {files[1].name}")
    if lost:
        print(f"note              lost (their workers kept failing; run the command again to retry): "
              f"{', '.join(lost)}")
    print("caution           " + CAUTION)
    return EXIT_FAILURE if lost else EXIT_OK
