"""Plant-data CSV (what a plant logged) to a validated :class:`PlantRecord`, and its model-grid inputs.

docs/calibration.md describes the format column by column. In short: one row per
logged time, ``time_h`` in hours from midnight of the record's first day, then

* ``flow_m3_d`` (required): influent flow;
* optionally all six influent quality columns of the influent CSV
  (``cod_total_mg_L`` ... ``alkalinity_mol_m3``); without them the layout's diurnal
  influent quality is used by time of day;
* ``airflow_<zone>_Sm3_h`` for every zone with a diffuser grid (required: the
  measured airflows are imposed on the model);
* ``do_<zone>_mg_L`` for aerated zones (at least one DO column);
* ``nh4_<zone>_mg_L`` (in-basin) and ``nh4_effluent_mg_L`` where measured;
* ``temperature_C`` (optional): water temperature; without it, the layout's.

Rules, as for the influent CSV: every problem is one line ``error: <file>: row N,
column NAME: <problem> (got ..., expected ...)`` and all are reported at once (exit 2).
Empty or ``nan`` cells are missing values: in a measured output (DO, NH4-N) the row is
left out of the fit; in an input (flows, airflows, temperature) a run of missing values
up to :data:`MAX_FILL_h` long is filled linearly from its neighbours (a warning names
the rows), a longer one is an error. Suspicious magnitudes are warnings naming the
likely unit slip. Rows hold from their time until the next row's (the last row for the
median logging interval), like the influent CSV; :func:`period_inputs` averages the
inputs over the model's periods (flows and airflows time-weighted, concentrations
flow-weighted); observations stay at their logged times.
"""

from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass

import numpy as np

from airtaper import units
from airtaper.errors import InputError
from airtaper.layout.influent import CONCENTRATIONS, check_measured
from airtaper.layout.reader import Collector, LayoutWarning, did_you_mean
from airtaper.layout.textfile import read_text_file
from airtaper.layout.types import Layout

MAX_CSV_BYTES = 50_000_000
#: Longest run of missing input values filled by interpolation, h. Common practice (no source).
MAX_FILL_h = 1.0
#: A logging gap this many times the median interval is reported. Common practice (no source).
GAP_FACTOR = 3.0
#: Longest record one fit takes, d (the problem grows linearly with it).
MAX_DAYS = 14.0
#: DO above this is not a DO in mg/L (saturation at 0 degC and 10 m depth is about 30). From memory.
DO_MAX_PLAUSIBLE_mg_L = 25.0
#: NH4-N above this in an aeration tank or effluent is suspicious. Common practice (no source).
NH4_MAX_PLAUSIBLE_mg_L = 150.0
#: Water temperature above this is more likely degF than degC. Common practice (no source).
TEMPERATURE_MAX_PLAUSIBLE_C = 40.0

TIME = "time_h"
FLOW = "flow_m3_d"
TEMPERATURE = "temperature_C"
EFFLUENT = "effluent"
_AIR = ("airflow_", "_Sm3_h")
_DO = ("do_", "_mg_L")
_NH4 = ("nh4_", "_mg_L")


@dataclass(frozen=True)
class PlantRecord:
    """A validated plant-data file: logged samples, missing outputs as NaN.

    ``time_h`` from midnight of the first day; inputs (``flow_m3_d``, ``quality``,
    ``temperature_C``, ``airflow_Sm3_h``) have no gaps left; ``do_mg_L`` and
    ``nh4_mg_L`` (keys: zone ids, and ``"effluent"`` for NH4-N) hold NaN where not
    measured. ``interval_h`` is the median logging interval.
    """

    path: str
    time_h: np.ndarray
    flow_m3_d: np.ndarray
    quality: dict | None  # influent column -> (n,) or None (the layout's diurnal quality)
    temperature_C: np.ndarray | None
    airflow_Sm3_h: dict  # zone -> (n,)
    do_mg_L: dict  # zone -> (n,) with NaN gaps
    nh4_mg_L: dict  # zone or "effluent" -> (n,) with NaN gaps
    interval_h: float

    @property
    def start_h(self) -> float:
        return float(self.time_h[0])

    @property
    def end_h(self) -> float:
        """End of the record: the last row holds for one logging interval."""
        return float(self.time_h[-1] + self.interval_h)

    @property
    def days(self) -> float:
        return (self.end_h - self.start_h) / units.HOURS_PER_DAY

    def __eq__(self, other):  # arrays: compare by value
        if not isinstance(other, PlantRecord):
            return NotImplemented
        a, b = _flat(self), _flat(other)
        return a.keys() == b.keys() and all(
            np.array_equal(a[k], b[k], equal_nan=True) if isinstance(a[k], np.ndarray) else a[k] == b[k] for k in a)

    __hash__ = None


def _flat(r: PlantRecord) -> dict:
    out = {"path": r.path, "time_h": r.time_h, "flow_m3_d": r.flow_m3_d, "interval_h": r.interval_h,
           "temperature_C": r.temperature_C if r.temperature_C is not None else "none"}
    for name, d in (("quality", r.quality or {}), ("air", r.airflow_Sm3_h), ("do", r.do_mg_L), ("nh4", r.nh4_mg_L)):
        out[name + ":keys"] = tuple(sorted(d))
        out.update({f"{name}:{k}": np.asarray(v) for k, v in d.items()})
    return out


def column_kind(name: str) -> tuple[str, str | None]:
    """("time"|"flow"|"quality"|"temperature"|"airflow"|"do"|"nh4"|"unknown", zone or None) of a column."""
    if name == TIME:
        return "time", None
    if name == FLOW:
        return "flow", None
    if name in CONCENTRATIONS:
        return "quality", None
    if name == TEMPERATURE:
        return "temperature", None
    for kind, (pre, post) in (("airflow", _AIR), ("do", _DO), ("nh4", _NH4)):
        if name.startswith(pre) and name.endswith(post) and len(name) > len(pre) + len(post):
            return kind, name[len(pre):-len(post)]
    return "unknown", None


def _known_names(layout: Layout) -> list[str]:
    names = [TIME, FLOW, TEMPERATURE, *CONCENTRATIONS, f"nh4_{EFFLUENT}_mg_L"]
    for z in layout.zones:
        names.append(f"nh4_{z.id}_mg_L")
        if z.aerated:
            names.append(f"do_{z.id}_mg_L")
        if z.has_diffusers:
            names.append(f"airflow_{z.id}_Sm3_h")
    return names


def _is_missing(cell: str) -> bool:
    return cell == "" or cell.lower() in ("nan", "na", "n/a", "null", "-")


# --------------------------------------------------------------------------- reading
def load_plant_data(path, layout: Layout, warnings: list | None = None) -> PlantRecord:
    """Read and validate a plant-data CSV for ``layout``; every problem in one :class:`InputError`."""
    label, text = read_text_file(path, MAX_CSV_BYTES, "plant data", "CSV", encoding="utf-8-sig")
    return parse_plant_data(text, layout, label, warnings)


def parse_plant_data(text: str, layout: Layout, label: str = "<memory>", warnings: list | None = None) -> PlantRecord:
    """:func:`load_plant_data` for text in memory (tests, fuzzing); ``label`` names it in messages."""
    col = Collector(label)
    record = read_plant_csv_text(col, text, layout)
    if warnings is not None:
        warnings.extend(col.warnings)
    if col.problems:
        raise InputError(col.problems)
    assert record is not None
    return record


def _rows(col: Collector, text: str):
    header, records = None, []
    for lineno, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        if not stripped or stripped.startswith("#"):
            continue
        try:
            fields = [f.strip() for f in next(csv.reader(io.StringIO(line)))]
        except (csv.Error, StopIteration) as exc:
            col.error(f"row {lineno}", f"not valid CSV: {exc}")
            continue
        if header is None:
            header = (lineno, fields)
        else:
            records.append((lineno, fields))
    return header, records


def _check_header(col: Collector, hrow: int, names: list[str], layout: Layout) -> dict:
    """Column name -> (kind, zone) for valid columns; problems for the others."""
    known = _known_names(layout)
    zone_ids = [z.id for z in layout.zones]
    out: dict = {}
    seen: set[str] = set()
    for name in names:
        key = f"row {hrow}, column {name}"
        if name in seen:
            col.error(key, "duplicate column")
            continue
        seen.add(name)
        kind, zone = column_kind(name)
        if kind == "unknown":
            hint = did_you_mean(name, known)
            if hint:
                col.error(key, f"unknown column, did you mean {hint!r}?")
            else:
                col.error(key, "unknown column", None, "time_h, flow_m3_d, airflow_<zone>_Sm3_h, do_<zone>_mg_L, "
                          "nh4_<zone>_mg_L, nh4_effluent_mg_L, temperature_C or an influent quality column")
            continue
        if zone is not None and not (kind == "nh4" and zone == EFFLUENT):
            if zone not in zone_ids:
                hint = did_you_mean(zone, zone_ids)
                col.error(key, "no zone with this id" + (f", did you mean {hint!r}?" if hint else ""), zone,
                          "one of " + ", ".join(zone_ids))
                continue
            z = layout.zone(zone)
            if kind == "airflow" and not z.has_diffusers:
                col.error(key, "this zone has no diffuser grid to take an airflow", zone,
                          "zones with a [zones.grid]: " + ", ".join(x.id for x in layout.zones if x.has_diffusers))
                continue
            if kind == "do" and not z.aerated:
                col.error(key, "DO is fitted only in aerated or swing zones (this one is anoxic)", zone,
                          "an aerated zone")
                continue
        out[name] = (kind, zone)
    if TIME not in seen:
        col.error(f"row {hrow}", f"missing column {TIME}", None, "hours from midnight of the first day")
    if FLOW not in seen:
        col.error(f"row {hrow}", f"missing column {FLOW}", None, "the influent flow, m3/d")
    for z in layout.zones:
        if z.has_diffusers and f"airflow_{z.id}_Sm3_h" not in seen:
            col.error(f"row {hrow}", f"missing column airflow_{z.id}_Sm3_h", None,
                      "the measured airflow of every zone with diffusers (it is imposed on the model)")
    if not any(k == "do" for k, _ in out.values()):
        col.error(f"row {hrow}", "no DO column", None, "at least one do_<zone>_mg_L column")
    quality = [c for c in CONCENTRATIONS if c in seen]
    if quality and len(quality) != len(CONCENTRATIONS):
        missing = [c for c in CONCENTRATIONS if c not in seen]
        col.error(f"row {hrow}", "influent quality is all six columns or none; missing " + ", ".join(missing),
                  None, ", ".join(CONCENTRATIONS))
    return out


def read_plant_csv_text(col: Collector, text: str, layout: Layout) -> PlantRecord | None:
    """Parse and validate the CSV text; record problems and warnings in ``col``; None on error."""
    before = col.count
    header, records = _rows(col, text)
    if header is None:
        col.error("row 1", "no header row", None, "time_h, flow_m3_d, airflow_<zone>_Sm3_h, do_<zone>_mg_L, ...")
        return None
    hrow, names = header
    kinds = _check_header(col, hrow, names, layout)
    if col.count > before:
        return None
    if len(records) < 2:
        col.error(f"row {hrow + 1}", "too few data rows", len(records), "at least two rows")
        return None
    n = len(records)
    values = {name: np.full(n, np.nan) for name in names}
    linenos = np.array([ln for ln, _ in records])
    for i, (lineno, fields) in enumerate(records):
        if len(fields) != len(names):
            col.error(f"row {lineno}", "wrong number of fields", len(fields), f"{len(names)} (one per column)")
            continue
        for name, cell in zip(names, fields):
            key = f"row {lineno}, column {name}"
            if _is_missing(cell):
                if name == TIME:
                    col.error(key, "empty time", cell or None, "hours from midnight of the first day")
                continue
            try:
                v = float(cell)
            except ValueError:
                col.error(key, "not a number", cell, "a number (or an empty cell for a missing value)")
                continue
            if not math.isfinite(v):
                col.error(key, "must be finite", cell, "a finite number (or an empty cell for a missing value)")
                continue
            lo_ok = v > 0.0 if name == FLOW else (True if name in (TIME, TEMPERATURE) else v >= 0.0)
            if not lo_ok:
                col.error(key, "must be positive" if name == FLOW else "must not be negative", v,
                          "> 0" if name == FLOW else ">= 0")
                continue
            values[name][i] = v
    if col.count > before:
        return None
    t = values[TIME]
    bad_time = False
    for i in range(1, n):
        if not t[i] > t[i - 1]:
            col.error(f"row {linenos[i]}, column {TIME}", "times must increase from row to row"
                      + (" (a repeated row?)" if t[i] == t[i - 1] else " (a clock change or rows out of order?)"),
                      float(t[i]), f"> {t[i - 1]:g}")
            bad_time = True
    if t[0] < 0.0:
        col.error(f"row {linenos[0]}, column {TIME}", "out of range", float(t[0]), ">= 0 (hours from midnight of day 1)")
        bad_time = True
    if bad_time:
        return None
    dt = np.diff(t)
    interval = float(np.median(dt))
    span_d = (t[-1] + interval - t[0]) / units.HOURS_PER_DAY
    if span_d > MAX_DAYS:
        col.error(f"row {linenos[-1]}, column {TIME}", "record too long for one fit", round(span_d, 3),
                  f"at most {MAX_DAYS:g} days (fit a shorter stretch)")
        return None
    if interval < 1.0 / 600.0:
        col.warn(f"column {TIME}", f"median interval {interval * 3600:.3g} s: is time_h in minutes or seconds "
                                   "instead of hours? (expected hours from midnight of day 1)")
    if t[-1] > units.HOURS_PER_DAY * MAX_DAYS and interval >= 1.0:
        col.warn(f"column {TIME}", "times run past the record limit: minutes instead of hours?")
    for i in np.flatnonzero(dt > GAP_FACTOR * interval):
        col.warn(f"rows {linenos[i]}-{linenos[i + 1]}, column {TIME}",
                 f"a {dt[i]:g} h gap in the log ({dt[i] / interval:.3g} x the median interval {interval:g} h): "
                 "a logger outage? the inputs are held across it")
    # fill short runs of missing inputs; longer ones are errors
    inputs = [c for c, (k, _) in kinds.items() if k in ("flow", "quality", "temperature", "airflow")]
    for name in inputs:
        _fill(col, name, t, values[name], linenos)
    if col.count > before:
        return None
    _unit_warnings(col, kinds, values, layout)
    quality = None
    if CONCENTRATIONS[0] in kinds:
        quality = {c: values[c] for c in CONCENTRATIONS}
        frac = layout.influent.fractionation
        for i in range(n):
            row = {c: float(values[c][i]) for c in CONCENTRATIONS}
            mark = col.count
            check_measured(col, frac, row, lambda c, ln=linenos[i]: f"row {ln}, column {c}")
            if col.count > mark:
                break
    if col.count > before:
        return None
    do = {z: values[c] for c, (k, z) in kinds.items() if k == "do"}
    nh4 = {z: values[c] for c, (k, z) in kinds.items() if k == "nh4"}
    for c, (k, z) in kinds.items():
        if k in ("do", "nh4"):
            miss = int(np.isnan(values[c]).sum())
            if miss == n:
                col.warn(f"column {c}", "no values: the column is ignored")
            elif miss > 0.1 * n:
                col.warn(f"column {c}", f"{miss} of {n} values missing: those rows are left out of the fit")
    do = {z: v for z, v in do.items() if not np.isnan(v).all()}
    nh4 = {z: v for z, v in nh4.items() if not np.isnan(v).all()}
    if not do:
        col.error(f"row {hrow}", "no DO values in any DO column", None, "at least one measured DO")
        return None
    return PlantRecord(
        path=col.file, time_h=t, flow_m3_d=values[FLOW], quality=quality,
        temperature_C=values[TEMPERATURE] if TEMPERATURE in kinds else None,
        airflow_Sm3_h={z: values[c] for c, (k, z) in kinds.items() if k == "airflow"},
        do_mg_L=do, nh4_mg_L=nh4, interval_h=interval)


def _fill(col: Collector, name: str, t: np.ndarray, v: np.ndarray, linenos) -> None:
    """Fill runs of NaN in an input column linearly (in place); too long a run is an error."""
    miss = np.isnan(v)
    if not miss.any():
        return
    if miss.all():
        col.error(f"row {linenos[0]}, column {name}", "no values in an input column", None,
                  "a value in every row (short gaps are filled)")
        return
    edges = np.flatnonzero(np.diff(np.concatenate(([0], miss.astype(int), [0]))))
    for a, b in zip(edges[::2], edges[1::2]):  # missing rows a..b-1
        left = t[a - 1] if a > 0 else None
        right = t[b] if b < len(t) else None
        span = (right if right is not None else t[b - 1]) - (left if left is not None else t[a])
        rows = f"rows {linenos[a]}-{linenos[b - 1]}" if b - a > 1 else f"row {linenos[a]}"
        if left is None or right is None or span > MAX_FILL_h:
            col.error(f"{rows}, column {name}", "missing input values that cannot be filled"
                      + (" at the start or end of the record" if left is None or right is None else ""),
                      f"{b - a} empty", f"gaps inside the record of at most {MAX_FILL_h:g} h")
            continue
        v[a:b] = np.interp(t[a:b], [left, right], [v[a - 1], v[b]])
        col.warn(f"{rows}, column {name}", f"{b - a} missing value(s) filled by linear interpolation")


def _unit_warnings(col: Collector, kinds: dict, values: dict, layout: Layout) -> None:
    """Warnings naming a likely unit slip (values legal but implausible)."""
    for c, (k, z) in kinds.items():
        v = values[c]
        if np.isnan(v).all():
            continue
        hi = float(np.nanmax(v))
        med = float(np.nanmedian(v))
        if k == "do" and hi > DO_MAX_PLAUSIBLE_mg_L:
            col.warn(f"column {c}", f"DO up to {hi:g}: percent saturation instead of mg/L?")
        elif k == "nh4" and hi > NH4_MAX_PLAUSIBLE_mg_L:
            col.warn(f"column {c}", f"NH4-N up to {hi:g} mg/L: ammonia as NH4 (x 1.29) or ug/L instead of mg/L N?")
        elif k == "temperature" and hi > TEMPERATURE_MAX_PLAUSIBLE_C:
            col.warn(f"column {c}", f"water temperature up to {hi:g}: degF instead of degC?")
        elif k == "flow":
            mean = layout.influent.mean_flow_m3_d
            if med < mean / 10.0:
                ratio = mean / med
                guess = "m3/h instead of m3/d" if 10 < ratio < 60 else "another unit (L/s, m3/h?) instead of m3/d"
                col.warn(f"column {c}", f"median {med:g} is {ratio:.3g} x below the layout's mean flow {mean:g} "
                                        f"m3/d: {guess}?")
            elif med > 10.0 * mean:
                col.warn(f"column {c}", f"median {med:g} is {med / mean:.3g} x the layout's mean flow {mean:g} m3/d: "
                                        "L/d or another unit instead of m3/d?")
        elif k == "airflow":
            zone = layout.zone(z)
            lo, top = layout.zone_airflow_range_Sm3_h(zone)
            if hi > 0 and hi < lo / 20.0:
                col.warn(f"column {c}", f"at most {hi:g}, far below the grid's minimum {lo:g} Sm3/h: "
                                        "Sm3/min instead of Sm3/h?")
            elif hi > 3.0 * top:
                col.warn(f"column {c}", f"up to {hi:g}, {hi / top:.3g} x the grid's capacity {top:g} Sm3/h: "
                                        "another unit (Nm3/d, scfm?) instead of Sm3/h?")


# --------------------------------------------------------------------------- model grid
@dataclass(frozen=True)
class PeriodInputs:
    """The record's inputs as means over ``n_periods`` periods of ``period_h`` from ``start_h``."""

    start_h: float
    period_h: float
    n_periods: int
    flow_m3_d: np.ndarray  # (P,)
    quality: dict | None  # column -> (P,), flow-weighted
    temperature_C: np.ndarray | None  # (P,)
    airflow_Sm3_h: dict  # zone -> (P,)


def _interval_means(t: np.ndarray, end: float, v: np.ndarray, edges: np.ndarray, w: np.ndarray | None = None):
    """Means over [edges[k], edges[k+1]) of a piecewise-constant series (row i holds over [t_i, t_i+1))."""
    ends = np.append(t[1:], end)
    out = np.empty(len(edges) - 1)
    for k in range(len(edges) - 1):
        a, b = edges[k], edges[k + 1]
        ov = np.clip(np.minimum(ends, b) - np.maximum(t, a), 0.0, None)
        if w is not None:
            ov = ov * w
        out[k] = float(ov @ v / ov.sum()) if ov.sum() > 0 else np.nan
    return out


def period_inputs(record: PlantRecord, period_h: float) -> PeriodInputs:
    """Inputs averaged over whole model periods covering the record (the last one may be partial)."""
    n = max(1, int(math.ceil((record.end_h - record.start_h) / period_h - 1e-9)))
    edges = record.start_h + period_h * np.arange(n + 1)
    edges[-1] = min(edges[-1], record.end_h)
    t, end = record.time_h, record.end_h
    q = record.flow_m3_d
    flow = _interval_means(t, end, q, edges)
    quality = None
    if record.quality is not None:
        quality = {c: _interval_means(t, end, v, edges, w=q) for c, v in record.quality.items()}
    temp = None if record.temperature_C is None else _interval_means(t, end, record.temperature_C, edges)
    air = {z: _interval_means(t, end, v, edges) for z, v in record.airflow_Sm3_h.items()}
    return PeriodInputs(record.start_h, float(period_h), n, flow, quality, temp, air)


__all__ = ["EFFLUENT", "LayoutWarning", "PeriodInputs", "PlantRecord", "column_kind", "load_plant_data",
           "parse_plant_data", "period_inputs", "read_plant_csv_text"]
