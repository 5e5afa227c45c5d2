"""A finished output folder read back: the one input of the report, the figures and the workbook.

``airtaper optimize`` writes its tables and summary, then builds the report from the
folder exactly as ``airtaper report DIR`` does later, so both give the same pages.
Required: ``summary.json`` and ``schedule.csv``; optional: ``header.csv``,
``timeseries.csv``, ``blowers.csv`` and the layout that ``summary.json`` names (read
again for the inputs summary, the zone ranges and the drawing of the train). Whatever
is absent is left out of the report without an error.
"""

from __future__ import annotations

import json
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from airtaper import units
from airtaper.errors import InputError, Problem
from airtaper.optimize.results import StudySummary
from airtaper.plant import ResolvedPlant

#: Files the report reads, in the order docs/outputs.md lists them.
REQUIRED = ("summary.json", "schedule.csv")
OPTIONAL_TABLES = ("header.csv", "timeseries.csv", "blowers.csv")


@dataclass
class StudyFolder:
    """The contents of a finished output folder (see module notes)."""

    path: Path
    summary: dict
    schedule: pd.DataFrame
    header: pd.DataFrame | None = None
    timeseries: pd.DataFrame | None = None
    blowers: pd.DataFrame | None = None
    plant: ResolvedPlant | None = None  # the layout that summary.json names, resolved
    notes: list[str] = field(default_factory=list)  # what could not be read, for the report

    # -- derived views -------------------------------------------------------------------------
    @property
    def study(self) -> StudySummary:
        """``summary.json`` as the study's typed summary (:class:`~airtaper.optimize.results.StudySummary`)."""
        return StudySummary.from_dict(self.summary)

    @property
    def zones(self) -> list[str]:
        """Zones of the schedule, in the schedule's (flow) order."""
        return list(dict.fromkeys(self.schedule["zone"]))

    @property
    def period_edges_h(self) -> np.ndarray:
        """Period boundaries over the day, h (n_periods + 1 values)."""
        if not len(self.schedule):  # no schedule (a run stopped before solving): the layout's periods
            if self.plant is None:
                return np.array([0.0, units.HOURS_PER_DAY])
            return np.arange(self.plant.n_periods + 1) * self.plant.period_h
        first = self.schedule.drop_duplicates("period_start_h").sort_values("period_start_h")
        return np.append(first["period_start_h"].to_numpy(float), first["period_end_h"].to_numpy(float)[-1])

    def pivot(self, column: str) -> pd.DataFrame | None:
        """``column`` of the schedule as zones (rows, flow order) x period start hour (columns); None when the
        schedule has no such column or no rows."""
        if column not in self.schedule or not len(self.schedule):
            return None
        table = self.schedule.pivot(index="zone", columns="period_start_h", values=column)
        return table.reindex(self.zones)

    def header_by_period(self) -> pd.DataFrame | None:
        """header.csv in period order, or None when it is absent or its periods are not the schedule's."""
        if self.header is None or "period_start_h" not in self.header:
            return None
        out = self.header.sort_values("period_start_h", kind="stable").reset_index(drop=True)
        edges = self.period_edges_h
        if len(edges) - 1 != len(out) or not np.allclose(out["period_start_h"].to_numpy(float), edges[:-1]):
            return None
        return out

    def _plant_zones(self) -> list[str]:
        """The schedule's zones the plant has (empty without the layout)."""
        if self.plant is None:
            return []
        return [z for z in self.zones if z in self.plant.zone_ids]

    def zone_airflow_range_Sm3_h(self) -> dict[str, tuple[float, float]]:
        """Zone -> (min, max) airflow its diffusers, mixing and valve allow (empty without the layout)."""
        return {z: self.plant.air.zone(z).airflow_range_Sm3_h if self.plant.has_diffusers(z) else (0.0, 0.0)
                for z in self._plant_zones()}

    def diffuser_range_Sm3_h(self) -> dict[str, tuple[float, float]]:
        """Zone -> (min, max) airflow per diffuser of its diffuser type (empty without the layout)."""
        return {z: (self.plant.air.zone(z).diffuser_airflow_min_Sm3_h, self.plant.air.zone(z).diffuser_airflow_max_Sm3_h)
                for z in self._plant_zones() if self.plant.has_diffusers(z)}

    def tariff_price(self) -> np.ndarray | None:
        """Energy price of every period (currency/kWh), or None."""
        if self.plant is None or self.plant.tariff is None:
            return None
        price = np.asarray(self.plant.tariff.price_per_kWh, dtype=float)
        return price if len(price) == len(self.period_edges_h) - 1 else None


# -- what summary.json must look like for the report: checked once, here -------------------------------
_NUM, _STR, _BOOL, _LIST = "a number or null", "text", "true or false", "a list"
_NUMS = {"*": _NUM}
_EFFLUENT = {"nh4_mean_mg_L": _NUM, "nh4_max_mg_L": _NUM, "tn_mean_mg_L": _NUM}
SUMMARY_SHAPE: dict = {
    "status": _STR, "plant": _STR, "layout": _STR, "objective": _STR, "currency": _STR,
    "energy_kWh_per_day": _NUM, "cost_per_day": _NUM, "saving_percent": _NUM, "cost_saving_percent": _NUM,
    "min_do_margin_mg_L": _NUM, "optimiser_min_do_margin_mg_L": _NUM, "do_margin_mg_L": _NUMS, "effluent": _EFFLUENT, "messages": _LIST,
    "baseline": {"energy_kWh_per_day": _NUM, "cost_per_day": _NUM, "compliant": _BOOL, "effluent": _EFFLUENT},
    "limits": {"nh4_mean_mg_L": _NUM, "nh4_max_mg_L": _NUM, "tn_mean_mg_L": _NUM, "do_min_mg_L": _NUMS,
               "do_max_mg_L": _NUMS},
    "verification": {"verified": _BOOL, "rule": _STR, "effluent": _EFFLUENT, "optimiser_effluent": _EFFLUENT,
                     "do_margin_mg_L": _NUMS, "optimiser_do_margin_mg_L": _NUMS, "min_do_margin_mg_L": _NUM,
                     "violations": _LIST, "energy_kWh_per_day": _NUM, "start": _STR},
    "marginal_costs": [{"limit": _STR, "where": _STR, "kWh_per_day": _NUM, "cost_per_day": _NUM, "per": _STR,
                        "binding": _BOOL, "limit_value_mg_L": _NUM, "estimated": _STR}],
    "infeasibility": [{"message": _STR, "zone": _STR, "start_h": _NUM, "end_h": _NUM}],
    "smoothing": {"weight": _NUM, "penalty": _NUM},
    "solver": {"iterations": _NUM, "variables": _NUM, "constraints": _NUM, "timings": _NUMS,
               "attempts": [{"iterations": _NUM, "seconds": _NUM}]},
    "inputs": [{"path": _STR}],
    "dispatch": {"energy_cost": _NUM, "demand_charge": _NUM, "start_costs": _NUM, "cost_per_day": _NUM,
                 "peak_kW": _NUM, "rounds": _LIST, "converged": _BOOL, "stopped": _STR, "feasibility_breaches": _LIST,
                 "blowers": {"*": {"running_h": _NUM, "starts": _NUM, "out_of_service": _BOOL}},
                 "swing_zones": {"*": {"aerated_periods": _LIST, "switches": _NUM}}},
}


def _shape_problems(value, shape, key: str, file: str) -> list[Problem]:
    """Where ``value`` departs from ``shape`` (null is allowed anywhere; keys not in the shape pass)."""
    if value is None:
        return []
    if isinstance(shape, dict):
        if not isinstance(value, dict):
            return [Problem(file, key, "not a table", _short(value), "a JSON object")]
        out = []
        for k, v in value.items():
            sub = shape.get(k, shape.get("*"))
            if sub is not None:
                out += _shape_problems(v, sub, f"{key}.{k}" if key else str(k), file)
        return out
    if isinstance(shape, list):
        if not isinstance(value, list):
            return [Problem(file, key, "not a list", _short(value), "a JSON array")]
        out = []
        for i, v in enumerate(value):
            if v is None and isinstance(shape[0], dict):
                out.append(Problem(file, f"{key}[{i}]", "an empty entry", None, "a JSON object"))
            else:
                out += _shape_problems(v, shape[0], f"{key}[{i}]", file)
        return out
    ok = {_NUM: lambda v: isinstance(v, (int, float)) and not isinstance(v, bool),
          _STR: lambda v: isinstance(v, str), _BOOL: lambda v: isinstance(v, bool),
          _LIST: lambda v: isinstance(v, list)}[shape](value)
    return [] if ok else [Problem(file, key, "of the wrong kind", _short(value), shape)]


def _short(value):
    """The value for a message (its repr there), cut to 40 characters."""
    text = repr(value)
    return value if len(text) <= 40 else text[:37] + "..."


def _table_problems(frame: pd.DataFrame, path: Path, numeric: tuple[str, ...]) -> list[Problem]:
    out = []
    if not len(frame):
        return out
    for col in numeric:
        if col in frame and not pd.api.types.is_numeric_dtype(frame[col]):
            bad = pd.to_numeric(frame[col], errors="coerce").isna() & frame[col].notna()
            row = int(bad.to_numpy().argmax()) + 2 if bad.any() else None
            out.append(Problem(str(path), f"row {row}, column {col}" if row else f"column {col}", "not a number",
                               str(frame[col][bad].iloc[0]) if bad.any() else None, "a number"))
    return out


def _read_csv(path: Path, notes: list[str]) -> pd.DataFrame | None:
    if not path.is_file():
        return None
    try:
        frame = pd.read_csv(path)
    except (OSError, ValueError) as exc:
        notes.append(f"{path.name} could not be read ({exc}); the parts that need it are left out")
        return None
    return frame


def _find_layout(folder: Path, summary: dict, layout_path: str | Path | None) -> tuple[Path | None, str | None]:
    """Where the layout is: the given path, else the summary's, as given (from the working folder) or
    relative to the output folder."""
    if layout_path is not None:
        return Path(layout_path), None
    named = summary.get("layout")
    if not named or named == "<memory>":
        return None, "the summary names no layout file"
    for cand in (Path(named), folder / named, folder.parent / Path(named).name):
        if cand.is_file():
            return cand, None
    return None, f"the layout {named} named in summary.json was not found (give it with --layout)"


def read_study_folder(path: str | Path, layout_path: str | Path | None = None) -> StudyFolder:
    """Read a finished output folder; raise :class:`InputError` when it is not one."""
    from airtaper.plant import load_plant

    folder = Path(path)
    problems = []
    if not folder.is_dir():
        raise InputError(Problem(str(folder), "-", "not a folder", None, "an output folder of airtaper optimize"))
    for name in REQUIRED:
        if not (folder / name).is_file():
            problems.append(Problem(str(folder / name), "-", "missing", None,
                                    "a finished output folder of airtaper optimize"))
    if problems:
        raise InputError(problems)
    try:
        summary = json.loads((folder / "summary.json").read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, ValueError) as exc:
        raise InputError(Problem(str(folder / "summary.json"), "-", f"not readable JSON ({exc})", None,
                                 "the summary written by airtaper optimize")) from None
    if not isinstance(summary, dict):
        raise InputError(Problem(str(folder / "summary.json"), "-", "not a JSON object", type(summary).__name__,
                                 "the summary written by airtaper optimize"))
    problems = _shape_problems(summary, SUMMARY_SHAPE, "", str(folder / "summary.json"))
    notes: list[str] = []
    schedule = _read_csv(folder / "schedule.csv", notes)
    need = {"period_start_h", "period_end_h", "zone", "airflow_Sm3_h"}
    if schedule is None or not need <= set(schedule.columns):
        got = None if schedule is None else ", ".join(schedule.columns)
        raise InputError(problems + [Problem(str(folder / "schedule.csv"), "columns", "not a schedule table", got,
                                             ", ".join(sorted(need)))])
    sched_path = folder / "schedule.csv"
    problems += _table_problems(schedule, sched_path, tuple(c for c in schedule.columns if c != "zone"))
    if not problems:
        if schedule[["period_start_h", "period_end_h", "zone"]].isna().any().any():
            problems.append(Problem(str(sched_path), "rows", "a row without its period or zone", None,
                                    "one row per period and zone"))
        elif schedule.duplicated(["period_start_h", "zone"]).any():
            dup = schedule[schedule.duplicated(["period_start_h", "zone"])].iloc[0]
            problems.append(Problem(str(sched_path), f"zone {dup['zone']}, period_start_h {dup['period_start_h']:g}",
                                    "appears twice", None, "one row per period and zone"))
    tables = {name: _read_csv(folder / name, notes) for name in OPTIONAL_TABLES}
    tables = {name: (t if t is not None and len(t) else None) for name, t in tables.items()}  # empty: absent
    for name, frame in tables.items():
        if frame is not None:
            problems += _table_problems(frame, folder / name, tuple(
                c for c in frame.columns if c not in ("zone", "blower", "running")))
    if problems:
        raise InputError(problems)
    plant = None
    where, why = _find_layout(folder, summary, layout_path)
    if where is not None:
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                plant = load_plant(where, warnings=[])
        except InputError as exc:
            if layout_path is not None:
                raise
            why = f"the layout {where} no longer reads ({len(exc.problems)} problem(s): run airtaper check on it)"
    if why:
        notes.append(why + "; the inputs summary, zone ranges and the drawing of the train are left out")
    return StudyFolder(path=folder, summary=summary, schedule=schedule, header=tables["header.csv"],
                       timeseries=tables["timeseries.csv"], blowers=tables["blowers.csv"], plant=plant, notes=notes)


__all__ = ["OPTIONAL_TABLES", "REQUIRED", "StudyFolder", "read_study_folder"]
