"""A sweep's folder: one row file per finished scenario, and the table gathered from them.

The sweep folder (``--out``) is a working folder that outlives an interruption::

    DIR/.airtaper-sweep.json    what wrote the folder (the marker; a folder without it is not ours)
    DIR/scenarios/ID.toml       each scenario's values as an override file (``optimize --overrides`` reads it)
    DIR/runs/ID/                each scenario's own output folder, written as one set (report.outputs)
    DIR/rows/ID.json            each finished scenario's row, written atomically when the scenario ends
    DIR/results.parquet, .csv   the table: one row per scenario, gathered from rows/

A scenario is finished when its row file exists and carries the scenario's
fingerprint (the layout's and influent's SHA-256, the scenario's values, the run's
options and airtaper's version): rerunning the same command skips it, so an
interrupted sweep resumes where it stopped and never loses a finished row. A row
whose worker was lost is not written, so the scenario runs again.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import shutil
from pathlib import Path

from airtaper import __version__
from airtaper.errors import InputError, Problem
from airtaper.optimize.results import summary_figures
from airtaper.report.atomic import write_bytes_atomic, write_csv_atomic, write_json_atomic
from airtaper.report.outputs import sha256_of

MARKER = ".airtaper-sweep.json"
ROWS, RUNS, SCENARIOS = "rows", "runs", "scenarios"

#: The row's columns after the inputs, in the table's order (docs/outputs.md describes each).
RESULT_COLUMNS = (
    "status", "exit_code", "energy_kWh_per_day", "cost_per_day", "currency", "energy_cost_per_day",
    "demand_charge_per_day", "start_costs_per_day", "peak_kW", "baseline_energy_kWh_per_day",
    "baseline_cost_per_day", "saving_percent", "cost_saving_percent", "compliant", "verified",
    "nh4_mean_mg_L", "nh4_max_mg_L", "tn_mean_mg_L", "nh4_mean_margin_mg_L", "nh4_max_margin_mg_L",
    "tn_mean_margin_mg_L", "min_do_margin_mg_L", "ipopt_s", "ipopt_cpu_s", "run_s", "run_cpu_s", "message",
    "folder",
)


def fingerprint(input_files: list[str], values: dict, options: list[str]) -> str:
    """SHA-256 naming what a scenario's result depends on: input bytes, values, options, version."""
    h = hashlib.sha256()
    for f in input_files:
        h.update(f"{os.path.abspath(f)}={sha256_of(f)}\n".encode())
    h.update(json.dumps(values, sort_keys=True, default=str).encode())
    h.update(json.dumps(list(options)).encode())
    h.update(__version__.encode())
    return h.hexdigest()


def open_sweep_folder(out, kind: str, overwrite: bool) -> Path:
    """Make or reopen the sweep folder ``out``; refuse a folder that another command or person filled.

    ``kind`` ("sweep" or "year") is recorded in the marker; the same command rerun
    reopens the folder (resume). ``overwrite`` empties a folder this command wrote.
    """
    shown = os.fspath(out)
    dest = Path(os.path.abspath(shown))
    if dest.exists() and not dest.is_dir():
        raise InputError(Problem(shown, "--out", "names an existing file, not a folder", None,
                                 "a folder path (new, or an earlier sweep to resume)"))
    marker = dest / MARKER
    if dest.is_dir() and any(dest.iterdir()):
        try:
            recorded = json.loads(marker.read_text(encoding="utf-8")).get("kind")
        except (OSError, ValueError, AttributeError):
            recorded = None
        if recorded is None:
            raise InputError(Problem(shown, "--out", "the folder holds files that no airtaper sweep wrote (kept)",
                                     None, "a new folder, or an earlier sweep's folder to resume"))
        if recorded != kind:
            raise InputError(Problem(shown, "--out", f"the folder holds an airtaper {recorded}, not a {kind}",
                                     recorded, f"a new folder, or an earlier {kind}'s folder to resume"))
        if overwrite:
            for name in (ROWS, RUNS, SCENARIOS):
                shutil.rmtree(dest / name, ignore_errors=True)
    try:
        for name in (ROWS, RUNS, SCENARIOS):
            (dest / name).mkdir(parents=True, exist_ok=True)
        if not os.access(dest, os.W_OK | os.X_OK):
            raise PermissionError(13, "not writable")
    except OSError as exc:
        raise InputError(Problem(shown, "--out", f"cannot write the folder: {exc.strerror or exc}", None,
                                 "a folder you can write to")) from None
    write_json_atomic(marker, {"kind": kind, "airtaper_version": __version__})
    _remove_unfinished(dest / RUNS)
    return dest


def _remove_unfinished(runs: Path) -> None:
    """Staging folders a killed worker left behind (hidden, named by report.outputs): ours, never complete."""
    for entry in runs.iterdir():
        if entry.name.startswith(".") and ".airtaper-" in entry.name and entry.is_dir():
            shutil.rmtree(entry, ignore_errors=True)


def row_path(folder: Path, scenario_id: str) -> Path:
    return folder / ROWS / f"{scenario_id}.json"


def finished_row(folder: Path, scenario_id: str, fp: str) -> dict | None:
    """The scenario's row if it finished with this fingerprint, else None (run it)."""
    try:
        row = json.loads(row_path(folder, scenario_id).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    return row if isinstance(row, dict) and row.get("fingerprint") == fp else None


def write_row(path: str | Path, row: dict) -> None:
    write_json_atomic(path, _plain(row))


def _plain(obj):
    if isinstance(obj, dict):
        return {str(k): _plain(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_plain(v) for v in obj]
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    return obj


def summary_row(summary: dict | None) -> dict:
    """The table's result columns from a scenario's summary.json (None: the run wrote no folder)."""
    row = dict.fromkeys(RESULT_COLUMNS)
    if summary:
        row.update({k: v for k, v in summary_figures(summary).items() if k in row})
    return row


def input_cell(value):
    """An input value as one table cell: numbers, strings and booleans as they are, lists as JSON text."""
    if isinstance(value, (list, tuple, dict)):
        return json.dumps(value)
    return value


def gather_table(rows: list[dict], inputs: tuple[str, ...]):
    """The sweep's table (a pandas DataFrame): ``scenario``, the inputs, then :data:`RESULT_COLUMNS`."""
    import pandas as pd

    records = []
    for row in rows:
        rec = {"scenario": row["scenario"]}
        values = row.get("inputs") or {}
        rec.update({k: input_cell(values.get(k)) for k in inputs})
        rec.update({k: row.get(k) for k in RESULT_COLUMNS})
        records.append(rec)
    frame = pd.DataFrame(records, columns=["scenario", *inputs, *RESULT_COLUMNS])
    frame["exit_code"] = frame["exit_code"].astype("Int64")  # whole numbers, missing only for a lost row
    for col in inputs:  # a column of mixed numbers and text (or lists) is text in Parquet
        kinds = {type(v) for v in frame[col] if v is not None}
        if len(kinds) > 1 and not kinds <= {int, float}:
            frame[col] = frame[col].map(lambda v: None if v is None else str(v))
    return frame


def write_table(folder: Path, frame, stem: str = "results") -> list[Path]:
    """``stem.parquet`` and ``stem.csv`` in ``folder``, each written atomically."""
    import io

    buf = io.BytesIO()
    frame.to_parquet(buf, index=False)
    return [write_bytes_atomic(folder / f"{stem}.parquet", buf.getvalue()),
            write_csv_atomic(folder / f"{stem}.csv", frame)]


__all__ = ["MARKER", "RESULT_COLUMNS", "finished_row", "fingerprint", "gather_table", "open_sweep_folder",
           "row_path", "summary_row", "write_row", "write_table"]
