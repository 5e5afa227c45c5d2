"""``results.xlsx``: the output tables in one workbook, one sheet each, units in the headings (openpyxl).

Sheets: ``summary`` (the headline figures as name, value, unit), ``schedule``,
``header``, ``blowers`` (when blowers.csv is present), ``timeseries``,
``marginal costs`` and ``verification``. The table sheets hold the CSVs' values
unchanged, with each heading ``name (unit)`` (:func:`airtaper.report.columns.heading`).
"""

from __future__ import annotations

import io
import math
import zipfile

import pandas as pd

from airtaper.report.columns import heading
from airtaper.report.folder import StudyFolder
from airtaper.report.text import CAUTION, marginal_sentence

#: Table sheets: (sheet name, StudyFolder attribute).
TABLE_SHEETS = (("schedule", "schedule"), ("header", "header"), ("blowers", "blowers"), ("timeseries", "timeseries"))


def _summary_rows(s: dict) -> list[tuple[str, object, str]]:
    cur = s.get("currency") or ""
    base = s.get("baseline") or {}
    eff = s.get("effluent") or {}
    ver = s.get("verification") or {}
    rows = [
        ("caution", CAUTION, ""),
        ("plant", s.get("plant"), ""),
        ("layout", s.get("layout"), ""),
        ("status", s.get("status"), ""),
        ("objective", s.get("objective"), ""),
        ("energy", s.get("energy_kWh_per_day"), "kWh/d"),
        ("cost", s.get("cost_per_day"), f"{cur}/d"),
        ("baseline energy", base.get("energy_kWh_per_day"), "kWh/d"),
        ("baseline cost", base.get("cost_per_day"), f"{cur}/d"),
        ("energy saving", s.get("saving_percent"), "%"),
        ("cost saving", s.get("cost_saving_percent"), "%"),
        ("effluent NH4-N daily mean", eff.get("nh4_mean_mg_L"), "mg N/L"),
        ("effluent NH4-N largest period mean", eff.get("nh4_max_mg_L"), "mg N/L"),
        ("effluent TN daily mean", eff.get("tn_mean_mg_L"), "mg N/L"),
        ("smallest DO margin, optimiser", s.get("optimiser_min_do_margin_mg_L", s.get("min_do_margin_mg_L")), "mg/L"),
        ("smallest DO margin, re-simulated", ver.get("min_do_margin_mg_L"), "mg/L"),
        ("verified", ver.get("verified"), ""),
    ]
    dp = s.get("dispatch") or {}
    rows += [("energy cost", dp.get("energy_cost"), f"{cur}/d"), ("demand charge", dp.get("demand_charge"), f"{cur}/d"),
             ("start costs", dp.get("start_costs"), f"{cur}/d"), ("peak blower power", dp.get("peak_kW"), "kW")]
    for i, m in enumerate(s.get("messages") or [], 1):
        rows.append((f"message {i}", str(m), ""))
    for i, m in enumerate(s.get("infeasibility") or [], 1):
        rows.append((f"finding {i}", str(m.get("message", m)) if isinstance(m, dict) else str(m), ""))
    return [(k, v, u) for k, v, u in rows if v is not None]


def _marginal_frame(s: dict) -> pd.DataFrame:
    cur = s.get("currency") or ""
    items = s.get("marginal_costs") or []
    return pd.DataFrame([{
        "limit": i.get("limit"), "where": i.get("where"), "change": i.get("per"),
        "energy (kWh/d)": i.get("kWh_per_day"), f"cost ({cur}/d)": i.get("cost_per_day"),
        "binding": i.get("binding"), "in words": marginal_sentence(i, cur)} for i in items],
        columns=["limit", "where", "change", "energy (kWh/d)", f"cost ({cur}/d)", "binding", "in words"])


def _verification_frame(s: dict) -> pd.DataFrame:
    ver = s.get("verification") or {}
    rows = []
    for key in ("nh4_mean_mg_L", "nh4_max_mg_L", "tn_mean_mg_L"):
        opt, sim = (ver.get("optimiser_effluent") or {}).get(key), (ver.get("effluent") or {}).get(key)
        if opt is not None or sim is not None:
            rows.append({"figure": key, "where": "effluent", "optimiser": opt, "re-simulated": sim,
                         "limit": (s.get("limits") or {}).get(key)})
    o_do, s_do = ver.get("optimiser_do_margin_mg_L") or {}, ver.get("do_margin_mg_L") or {}
    for z in dict.fromkeys([*o_do, *s_do]):
        rows.append({"figure": "do_margin_mg_L", "where": z, "optimiser": o_do.get(z), "re-simulated": s_do.get(z),
                     "limit": 0.0})
    return pd.DataFrame(rows, columns=["figure", "where", "optimiser", "re-simulated", "limit"])


def _cell(v):
    """A value openpyxl can store: numpy scalars to Python, NaN to empty, control characters escaped."""
    from openpyxl.cell.cell import ILLEGAL_CHARACTERS_RE

    if hasattr(v, "item"):
        v = v.item()
    if isinstance(v, float) and math.isnan(v):
        return None
    if isinstance(v, str):
        return ILLEGAL_CHARACTERS_RE.sub(lambda m: f"\\x{ord(m.group()):02x}", v)
    return v


def _write_sheet(wb, title: str, frame: pd.DataFrame, headings: list[str], widths: dict | None = None) -> None:
    """A sheet of ``wb`` (a write-only workbook): the headings in bold and frozen, then the rows.

    A write-only sheet streams its rows to the file as they are appended (no cell objects kept), so its column
    widths and frozen pane are set first; ``widths``: column letter -> width, beyond the headings' own.
    """
    from openpyxl.cell import WriteOnlyCell
    from openpyxl.styles import Font
    from openpyxl.utils import get_column_letter

    ws = wb.create_sheet(title)
    for i, h in enumerate(headings, 1):
        ws.column_dimensions[get_column_letter(i)].width = max(10, min(60, len(str(h)) + 2))
    for letter, width in (widths or {}).items():
        ws.column_dimensions[letter].width = width
    ws.freeze_panes = "A2"
    bold = Font(bold=True)
    cells = []
    for h in headings:
        cell = WriteOnlyCell(ws, value=_cell(h))
        cell.font = bold
        cells.append(cell)
    ws.append(cells)
    for row in frame.itertuples(index=False):
        ws.append([_cell(v) for v in row])


class _StampedZip(zipfile.ZipFile):
    """A zip archive whose entries all carry one fixed date, so that the same content gives the same bytes."""

    def write(self, filename, arcname=None, compress_type=None, compresslevel=None):
        with open(filename, "rb") as f:
            self.writestr(arcname or filename, f.read(), compress_type, compresslevel)

    def writestr(self, zinfo_or_arcname, data, compress_type=None, compresslevel=None):
        if not isinstance(zinfo_or_arcname, zipfile.ZipInfo):
            info = zipfile.ZipInfo(zinfo_or_arcname, date_time=(2000, 1, 1, 0, 0, 0))
            info.compress_type = self.compression
            info.external_attr = 0o600 << 16
            zinfo_or_arcname = info
        super().writestr(zinfo_or_arcname, data, compress_type, compresslevel)


def workbook_bytes(folder: StudyFolder) -> bytes:
    """The workbook (see module notes) as .xlsx bytes (written in openpyxl's write-only mode: about a third of
    the time of building every cell first)."""
    from openpyxl import Workbook

    wb = Workbook(write_only=True)
    _write_sheet(wb, "summary", pd.DataFrame(_summary_rows(folder.summary), columns=["figure", "value", "unit"]),
                 ["figure", "value", "unit"], widths={"B": 40})
    for sheet, attr in TABLE_SHEETS:
        frame = getattr(folder, attr)
        if frame is None:
            continue
        _write_sheet(wb, sheet, frame, [heading(c) for c in frame.columns])
    for sheet, frame in (("marginal costs", _marginal_frame(folder.summary)),
                         ("verification", _verification_frame(folder.summary))):
        _write_sheet(wb, sheet, frame, list(frame.columns))
    # fixed document dates: the same folder gives the same workbook
    import datetime

    from openpyxl.writer.excel import ExcelWriter

    stamp = datetime.datetime(2000, 1, 1)
    wb.properties.created = stamp
    wb.properties.modified = stamp
    buf = io.BytesIO()
    # (Workbook.save would stamp the document with the time of saving, and the zip its entries)
    ExcelWriter(wb, _StampedZip(buf, "w", zipfile.ZIP_DEFLATED)).save()
    return buf.getvalue()


__all__ = ["TABLE_SHEETS", "workbook_bytes"]
