"""The [influent] section: a diurnal CSV, constant values, or ASM1 components.

CSV rows hold from their ``time_h`` until the next row's (the last until 24 h),
and the day repeats. Each horizon period gets the interval mean: the flow is
time-averaged, concentrations are flow-weighted, so the period carries the same
volume and the same loads as the rows it covers.
"""

from __future__ import annotations

import csv
import io
import os

from airtaper import units
from airtaper.layout import defaults
from airtaper.layout.reader import (
    Collector, Table, UnreadableInput, check_number, did_you_mean, fixed, read_input_file,
)
from airtaper.layout.types import ASM1_COMPONENTS, Fractionation, Influent

#: Measured influent quantities, as CSV columns and as [influent] keys.
MEASURED = (
    "flow_m3_d", "cod_total_mg_L", "cod_soluble_mg_L", "tkn_mg_L", "nh4_mg_L", "tss_mg_L", "alkalinity_mol_m3",
)
CSV_COLUMNS = ("time_h",) + MEASURED
CONCENTRATIONS = MEASURED[1:]
MAX_CSV_BYTES = 5_000_000


def read_fractionation(t: Table | None) -> Fractionation | None:
    d = defaults
    if t is None:
        return Fractionation(d.SI_OF_COD, d.XI_OF_COD, d.XBH_OF_COD, d.XBA_OF_COD, d.SND_OF_ORGANIC_N, d.SNO_mg_L)
    before = t.col.count
    values = dict(
        si_of_cod=t.number("si_of_cod", d.SI_OF_COD, ge=0.0, le=1.0),
        xi_of_cod=t.number("xi_of_cod", d.XI_OF_COD, ge=0.0, le=1.0),
        xbh_of_cod=t.number("xbh_of_cod", d.XBH_OF_COD, ge=0.0, le=1.0),
        xba_of_cod=t.number("xba_of_cod", d.XBA_OF_COD, ge=0.0, le=1.0),
        snd_of_organic_n=t.number("snd_of_organic_n", d.SND_OF_ORGANIC_N, ge=0.0, le=1.0),
        sno_mg_L=t.number("sno_mg_L", d.SNO_mg_L, ge=0.0),
    )
    t.finish()
    if t.col.count > before:
        return None
    total = values["si_of_cod"] + values["xi_of_cod"] + values["xbh_of_cod"] + values["xba_of_cod"]
    if total >= 1.0:
        t.col.error(t.path, "fractions of total COD leave nothing biodegradable",
                    round(total, 6), "si_of_cod + xi_of_cod + xbh_of_cod + xba_of_cod < 1")
        return None
    return Fractionation(**values)


def check_measured(col: Collector, frac: Fractionation | None, row: dict, key_of, file: str | None = None) -> None:
    """Cross-column checks of one row (or the constant values).

    ``key_of(column)`` names the key or CSV cell. Fractionation consistency:
    SS = CODs - SI >= 0 and XS = COD - CODs - XI - XBH - XBA >= 0, with
    SI, XI, XBH, XBA the given fractions of total COD (the split
    airtaper.process uses; XP = 0 in raw wastewater).
    """
    cod, cods = row["cod_total_mg_L"], row["cod_soluble_mg_L"]
    if cods > cod:
        col.error(key_of("cod_soluble_mg_L"), "soluble COD exceeds total COD", cods,
                  f"<= cod_total_mg_L = {cod:g}", file=file)
    elif frac is not None:
        si = frac.si_of_cod * cod
        if cods < si:
            col.error(key_of("cod_soluble_mg_L"), "soluble COD below the soluble inert part (SS < 0)", cods,
                      f">= si_of_cod x cod_total_mg_L = {si:g}", file=file)
        particulate_fixed = (frac.xi_of_cod + frac.xbh_of_cod + frac.xba_of_cod) * cod
        xs = cod - cods - particulate_fixed
        if xs < -1e-9:
            col.error(key_of("cod_soluble_mg_L"), "particulate COD too small for the fractionation (XS < 0)", cods,
                      f"<= cod_total_mg_L x (1 - xi_of_cod - xbh_of_cod - xba_of_cod) = {cod - particulate_fixed:g}",
                      file=file)
    if row["nh4_mg_L"] > row["tkn_mg_L"]:
        col.error(key_of("nh4_mg_L"), "NH4-N exceeds TKN", row["nh4_mg_L"], f"<= tkn_mg_L = {row['tkn_mg_L']:g}",
                  file=file)


def check_magnitudes(col: Collector, rows: list[dict], key_of, file: str | None = None) -> None:
    """Unit slips in the measured influent, named where they were typed (CSV row, or key).

    ``key_of(i, column)`` names row ``i``'s cell. A total COD below
    ``COD_GRAMS_PER_LITRE_MAX_mg_L`` in every row is an error (the
    concentrations were typed in g/L); a COD outside the usual range and an
    alkalinity likely given in mg/L as CaCO3 are warnings.
    """
    cods = [r["cod_total_mg_L"] for r in rows]
    top = max(cods)
    if top < defaults.COD_GRAMS_PER_LITRE_MAX_mg_L:
        i = cods.index(top)
        col.error(key_of(i, "cod_total_mg_L"), f"total COD at most {top:g} mg/L in every row: were the "
                  "concentrations typed in g/L?", top, f"mg/L (x 1000: {1000 * top:g} mg/L)", file=file)
        return
    lo, hi = defaults.WARN_COD_TOTAL_mg_L
    odd = [i for i, c in enumerate(cods) if not lo <= c <= hi]
    if odd:
        col.warn(key_of(odd[0], "cod_total_mg_L"),
                 f"unusual total COD {fixed(cods[odd[0]], 0)} mg/L (usual {lo:g}-{hi:g})", file=file)
    alk = [i for i, r in enumerate(rows) if r["alkalinity_mol_m3"] > defaults.WARN_ALKALINITY_mol_m3]
    if alk:
        a = rows[alk[0]]["alkalinity_mol_m3"]
        col.warn(key_of(alk[0], "alkalinity_mol_m3"), f"alkalinity {a:g} mol/m3: was it given in mg/L as CaCO3 "
                 f"({a / units.MG_CACO3_PER_MOL_ALK:.1f} mol/m3)?", file=file)
    if len(rows) > 2:
        _outliers(col, rows, key_of, file)
    flow = sum(r["flow_m3_d"] for r in rows)
    mean = {c: sum(r["flow_m3_d"] * r[c] for r in rows) / flow for c in MEASURED[1:]}
    if mean["alkalinity_mol_m3"] < defaults.WARN_ALKALINITY_MIN_mol_m3:
        key = key_of(0, "alkalinity_mol_m3")
        col.warn(key if not key.startswith("row ") else "column alkalinity_mol_m3",
                 f"alkalinity {mean['alkalinity_mol_m3']:.3g} mol/m3 on the daily mean is unusually low (usual above "
                 f"{defaults.WARN_ALKALINITY_MIN_mol_m3:g}): was it given in mol/L or eq/L?", file=file)
    for c, (lo, hi), what, of in (("tkn_mg_L", defaults.WARN_TKN_PER_COD, "TKN / COD", "cod_total_mg_L"),
                                  ("tss_mg_L", defaults.WARN_TSS_PER_COD, "TSS / COD", "cod_total_mg_L"),
                                  ("nh4_mg_L", defaults.WARN_NH4_PER_TKN, "NH4-N / TKN", "tkn_mg_L")):
        ratio = mean[c] / mean[of] if mean[of] > 0.0 else 0.0
        if not lo <= ratio <= hi:
            key = key_of(0, c)
            col.warn(key if not key.startswith("row ") else f"column {c}",
                     f"{what} of the daily means is {ratio:.3g} (usual {lo:g}-{hi:g}): is a column in another "
                     "unit?", file=file)


def _outliers(col: Collector, rows: list[dict], key_of, file: str | None) -> None:
    """Warn once per column about a value far from the column's median over the day (a cell in another unit)."""
    factor = defaults.WARN_ROW_OUTLIER_FACTOR
    for c in MEASURED:
        values = sorted(r[c] for r in rows)
        median = values[len(values) // 2]
        if median <= 0.0:
            continue
        odd = [i for i, r in enumerate(rows) if not median / factor <= r[c] <= median * factor]
        if odd:
            v = rows[odd[0]][c]
            col.warn(key_of(odd[0], c), f"{c} {v:g} is far from the day's median {median:g} (more than "
                     f"{factor:g} times apart): typed in another unit?", file=file)


def _bounds(column: str) -> dict:
    if column == "flow_m3_d":
        return {"gt": 0.0, "le": defaults.FLOW_MAX_m3_d}
    if column == "alkalinity_mol_m3":
        return {"ge": 0.0, "le": defaults.ALKALINITY_MAX_mol_m3}
    return {"ge": 0.0, "le": defaults.CONCENTRATION_MAX_mg_L}


def read_csv_text(col: Collector, file: str, text: str, frac: Fractionation | None):
    """Parse the CSV text; return (times_h, rows) or None. Rows are dicts column -> float.

    Rows are named by their line number in the file (the header is usually row 1).
    Blank lines and lines starting with '#' are skipped.
    """
    before = col.count
    lines = text.splitlines()
    header = None
    records: list[tuple[int, list[str]]] = []
    reader_input = []
    for lineno, line in enumerate(lines, start=1):
        stripped = line.strip()
        if not stripped or stripped.startswith("#"):
            continue
        reader_input.append((lineno, line))
    for lineno, line in reader_input:
        try:
            fields = next(csv.reader(io.StringIO(line)))
        except (csv.Error, StopIteration) as exc:
            col.error(f"row {lineno}", f"not valid CSV: {exc}", None, "comma-separated values", file=file)
            continue
        fields = [f.strip() for f in fields]
        if header is None:
            header = (lineno, fields)
        else:
            records.append((lineno, fields))
    if header is None:
        col.error("row 1", "no header row", None, "columns " + ", ".join(CSV_COLUMNS), file=file)
        return None
    hrow, names = header
    seen: set[str] = set()
    for name in names:
        if name in seen:
            col.error(f"row {hrow}, column {_column(name)}", "duplicate column", None, "each column once", file=file)
        seen.add(name)
        if name not in CSV_COLUMNS:
            hint = did_you_mean(name, CSV_COLUMNS)
            if hint:
                col.error(f"row {hrow}, column {_column(name)}", f"unknown column, did you mean {hint!r}?", file=file)
            else:
                col.error(f"row {hrow}, column {_column(name)}", "unknown column", None,
                          "one of " + ", ".join(CSV_COLUMNS), file=file)
    for name in CSV_COLUMNS:
        if name not in seen:
            col.error(f"row {hrow}", f"missing column {name}", None, "columns " + ", ".join(CSV_COLUMNS), file=file)
    if col.count > before:
        return None
    if not records:
        col.error(f"row {hrow + 1}", "no data rows", None, "at least one row", file=file)
        return None
    rows: list[dict] = []
    linenos: list[int] = []
    for lineno, fields in records:
        if len(fields) != len(names):
            col.error(f"row {lineno}", "wrong number of fields", len(fields), f"{len(names)} (one per column)",
                      file=file)
            continue
        row: dict = {}
        ok = True
        for name, cell in zip(names, fields):
            key = f"row {lineno}, column {name}"
            if cell == "":
                col.error(key, "empty cell", None, "a number", file=file)
                ok = False
                continue
            try:
                value = float(cell)
            except ValueError:
                col.error(key, "not a number", cell, "a number", file=file)
                ok = False
                continue
            bounds = {"ge": 0.0, "lt": units.HOURS_PER_DAY} if name == "time_h" else _bounds(name)
            checked = check_number(_FileCollector(col, file), key, value, **bounds)
            if checked is None:
                ok = False
                continue
            row[name] = checked
        if ok:
            check_measured(col, frac, row, lambda c, n=lineno: f"row {n}, column {c}", file=file)
            rows.append(row)
            linenos.append(lineno)
    if col.count > before:
        return None
    check_magnitudes(col, rows, lambda i, c: f"row {linenos[i]}, column {c}", file=file)
    times = [r["time_h"] for r in rows]
    if times[0] != 0.0:
        col.error(f"row {linenos[0]}, column time_h", "the first row must start the day", times[0], "0", file=file)
    for i in range(1, len(times)):
        if times[i] <= times[i - 1]:
            col.error(f"row {linenos[i]}, column time_h", "times must increase from row to row", times[i],
                      f"> {times[i - 1]:g}", file=file)
    if col.count > before:
        return None
    if len(times) > 2:
        spans = sorted(b - a for a, b in zip(times, times[1:]))
        last = units.HOURS_PER_DAY - times[-1]
        if last > defaults.WARN_LAST_ROW_FACTOR * spans[len(spans) // 2]:
            col.warn(f"row {linenos[-1]}, column time_h", f"the last row holds from {times[-1]:g} h until 24 h, "
                     f"{last / spans[len(spans) // 2]:.0f} times longer than the others: were the times in another "
                     "unit than hours?", file=file)
    return times, rows


def _column(name: str) -> str:
    """A CSV header cell as a message names it: quoted when it is empty or holds more than letters, digits and '_'."""
    return name if name and all(c.isascii() and (c.isalnum() or c == "_") for c in name) else repr(name)


class _FileCollector:
    """Adapter so check_number records problems against another file."""

    def __init__(self, col: Collector, file: str):
        self._col, self._file = col, file

    def error(self, key, problem, got=None, expected=None):
        self._col.error(key, problem, got, expected, file=self._file)


def resample(times: list[float], rows: list[dict], n_periods: int) -> dict[str, tuple[float, ...]]:
    """Interval means of a periodic piecewise-constant day over ``n_periods`` equal periods.

    Flow: time mean. Concentrations: flow-weighted mean (same load).
    """
    period_h = units.HOURS_PER_DAY / n_periods
    ends = list(times[1:]) + [units.HOURS_PER_DAY]
    out: dict[str, list[float]] = {c: [] for c in MEASURED}
    for p in range(n_periods):
        a, b = p * period_h, (p + 1) * period_h
        vol = 0.0
        loads = {c: 0.0 for c in CONCENTRATIONS}
        for t0, t1, row in zip(times, ends, rows):
            overlap = min(b, t1) - max(a, t0)
            if overlap <= 0.0:
                continue
            v = overlap * row["flow_m3_d"]
            vol += v
            for c in CONCENTRATIONS:
                loads[c] += v * row[c]
        out["flow_m3_d"].append(vol / period_h)
        for c in CONCENTRATIONS:
            out[c].append(loads[c] / vol)
    return {c: tuple(v) for c, v in out.items()}


def read_influent(t: Table, n: int, base_dir: str | None, tss_per_cod: float,
                  n_content: tuple[float, float] = (defaults.DISPLAY_I_XB, defaults.DISPLAY_I_XP)) -> Influent | None:
    """Read [influent].

    ``tss_per_cod`` and ``n_content`` (i_XB, i_XP) are used only to display TSS
    and TKN of influents given as ASM1 components.
    """
    col = t.col
    before = col.count
    frac = read_fractionation(t.table("fractionation"))
    csv_name = t.raw("csv")
    asm1 = t.table("asm1")
    given = [c for c in MEASURED if c in t.data]
    t.allow(*MEASURED)
    result = None
    if csv_name is not None:
        if asm1 is not None:
            col.error(t.key("asm1"), "give either csv or asm1, not both", None, "csv alone, or asm1 alone")
        extra = given
        for c in extra:
            col.error(t.key(c), "constant values and csv are exclusive", None, "csv alone, or constant values alone")
        if not isinstance(csv_name, str) or not csv_name:
            col.error(t.key("csv"), "must be a file name", csv_name, "a CSV file name relative to the layout")
        elif col.count == before:
            result = _from_csv(col, csv_name, n, base_dir, frac)
    elif asm1 is not None:
        result = _from_asm1(t, asm1, n, frac, tss_per_cod, n_content)
    else:
        values = {c: t.per_period(c, n, **_bounds(c)) for c in MEASURED}
        if col.count == before:
            for p in range(n):
                row = {c: values[c][p] for c in MEASURED}
                mark = col.count
                check_measured(col, frac, row,
                               lambda c, p=p: t.key(c) if not isinstance(t.data[c], list) else f"{t.key(c)}[{p + 1}]")
                if col.count > mark:
                    break
            if col.count == before:
                check_magnitudes(col, [{c: values[c][p] for c in MEASURED} for p in range(n)],
                                 lambda p, c: t.key(c) if not isinstance(t.data[c], list) else f"{t.key(c)}[{p + 1}]")
            if col.count == before:
                result = Influent("constant", *(values[c] for c in MEASURED), fractionation=frac)
    t.finish()
    if col.count > before or result is None:
        return None
    return result


def read_day_influent(col: Collector, key: str, csv_name, n: int, base_dir: str | None,
                      frac: Fractionation | None) -> Influent | None:
    """A load day's own influent profile: a CSV of the same columns as [influent], with the base fractionation."""
    if not isinstance(csv_name, str) or not csv_name:
        col.error(key, "must be a file name", csv_name, "a CSV file name relative to the layout")
        return None
    if frac is None:
        return None  # the fractionation's problem is reported under [influent]
    return _from_csv(col, csv_name, n, base_dir, frac, key)


def csv_display_path(file_label: str, base_dir: str | None, csv_name: str) -> str:
    """The CSV path shown in messages: next to the layout file as the user named it."""
    if os.path.isabs(csv_name):
        return csv_name
    if base_dir is None:
        return csv_name
    folder = os.path.dirname(file_label) if file_label and not file_label.startswith("<") else base_dir
    return os.path.join(folder, csv_name) if folder else csv_name


def influent_csv_path(layout_path: str | os.PathLike, csv_name: str) -> str:
    """Where the loader reads a layout's influent CSV from: the layout's own folder."""
    if os.path.isabs(csv_name):
        return csv_name
    return os.path.join(os.path.dirname(os.path.abspath(layout_path)), csv_name)


def _from_csv(col: Collector, csv_name: str, n: int, base_dir: str | None, frac, key: str = "influent.csv"):
    shown = csv_display_path(col.file, base_dir, csv_name)
    if base_dir is None:
        col.error(key, "a CSV influent needs the layout's folder", csv_name,
                  "load the layout from a file, or pass base_dir")
        return None
    full = csv_name if os.path.isabs(csv_name) else os.path.join(str(base_dir), csv_name)
    try:
        raw = read_input_file(full, MAX_CSV_BYTES, "the influent CSV")
    except UnreadableInput as exc:
        if exc.problem.startswith("cannot read") and exc.got is None:
            col.error(key, exc.problem, csv_name, "an existing file relative to the layout's folder")
        else:
            col.error("(file)", exc.problem, exc.got, exc.expected, file=shown)
        return None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        col.error("(file)", "not UTF-8 text", f"byte {exc.start}", "a UTF-8 CSV file", file=shown)
        return None
    return influent_from_csv_text(col, shown, csv_name, text, n, frac)


def influent_from_csv_text(col: Collector, shown: str, source: str, text: str, n: int, frac):
    """The influent of a CSV given as text (also used by the tests and the fuzzer)."""
    parsed = read_csv_text(col, shown, text, frac)
    if parsed is None or frac is None:
        return None
    times, rows = parsed
    series = resample(times, rows, n)
    return Influent(source, *(series[c] for c in MEASURED), fractionation=frac)


def _from_asm1(t: Table, asm1: Table, n: int, frac, tss_per_cod: float, n_content: tuple[float, float]):
    col = t.col
    before = col.count
    flow = t.per_period("flow_m3_d", n, gt=0.0)
    for c in MEASURED[1:]:
        if c in t.data:
            col.error(t.key(c), "derived from [influent.asm1]; do not give it", None, "only flow_m3_d with asm1")
    comps = {c: asm1.per_period(c, n, ge=0.0) for c in ASM1_COMPONENTS}
    asm1.finish()
    if col.count > before:
        return None
    table = tuple(tuple(comps[c][p] for c in ASM1_COMPONENTS) for p in range(n))
    g = {c: comps[c] for c in ASM1_COMPONENTS}

    def per(fn):
        return tuple(fn(p) for p in range(n))

    cod = per(lambda p: sum(g[c][p] for c in ("SI", "SS", "XI", "XS", "XBH", "XBA", "XP")))
    cods = per(lambda p: g["SI"][p] + g["SS"][p])
    i_xb, i_xp = n_content
    tkn = per(lambda p: g["SNH"][p] + g["SND"][p] + g["XND"][p]
              + i_xb * (g["XBH"][p] + g["XBA"][p]) + i_xp * (g["XI"][p] + g["XP"][p]))
    tss = per(lambda p: tss_per_cod * (cod[p] - cods[p]))
    if frac is None:
        return None
    return Influent("constant", flow, cod, cods, tkn, g["SNH"], tss, g["SALK"], fractionation=frac, asm1_mg_L=table)


