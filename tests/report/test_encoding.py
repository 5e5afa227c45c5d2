"""How the report's files are encoded (PNG compression level, openpyxl's write-only mode) leaves their content as
it was: the same pixels, the same cells, bold frozen headings and column widths."""

from __future__ import annotations

import io

import numpy as np
import pandas as pd
import pytest
from openpyxl import load_workbook
from PIL import Image

from airtaper.report import figures as F
from airtaper.report.columns import heading
from airtaper.report.folder import read_study_folder
from airtaper.report.study_files import write_study_outputs
from airtaper.report.workbook import workbook_bytes

from .test_study_files import _tables


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    """A small finished folder (two zones, four periods), no solve."""
    out = tmp_path_factory.mktemp("small")
    schedule, header, ts, summary = _tables()
    write_study_outputs(out, schedule=schedule, header=header, timeseries=ts, summary=summary, figure=False)
    return read_study_folder(out)


def _pixels(png: bytes) -> np.ndarray:
    return np.asarray(Image.open(io.BytesIO(png)).convert("RGBA"))


@pytest.mark.parametrize("name", ["airflow_figure", "do_figure", "effluent_figure", "air_side_figure"])
def test_the_fast_png_level_gives_the_same_pixels_as_the_default_level(small, name, monkeypatch):
    fast = F.figure_png(getattr(F, name)(small))
    monkeypatch.setattr(F, "PNG_COMPRESS_LEVEL", 6)  # Pillow's default level
    default = F.figure_png(getattr(F, name)(small))
    assert fast != default  # (the level is applied: other bytes)
    np.testing.assert_array_equal(_pixels(fast), _pixels(default))


def test_the_workbook_holds_every_table_with_bold_frozen_headings_and_widths(small):
    wb = load_workbook(io.BytesIO(workbook_bytes(small)))
    assert wb.sheetnames == ["summary", "schedule", "header", "timeseries", "marginal costs", "verification"]
    for ws in wb.worksheets:
        head = [c.value for c in ws[1]]
        assert all(c.font.b for c in ws[1]) and ws.freeze_panes == "A2", ws.title
        for i, h in enumerate(head, 1):
            letter = ws.cell(row=1, column=i).column_letter
            want = 40 if (ws.title, letter) == ("summary", "B") else max(10, min(60, len(str(h)) + 2))
            assert ws.column_dimensions[letter].width == want, (ws.title, letter)
        assert not any(c.font.b for row in ws.iter_rows(min_row=2) for c in row), ws.title
    for name in ("schedule", "header", "timeseries"):
        frame = getattr(small, name)
        sheet = pd.read_excel(io.BytesIO(workbook_bytes(small)), sheet_name=name, engine="openpyxl")
        assert list(sheet.columns) == [heading(c) for c in frame.columns] and sheet.shape == frame.shape
        for c in frame.columns:
            a, b = frame[c], sheet[heading(c)]
            if a.dtype.kind in "fi":
                np.testing.assert_array_equal(b.to_numpy(float), a.to_numpy(float))
            else:
                assert list(a.astype(str)) == list(b.astype(str))
    summary = pd.read_excel(io.BytesIO(workbook_bytes(small)), sheet_name="summary").set_index("figure")
    assert summary.loc["energy", "value"] == 1200.0 and summary.loc["energy", "unit"] == "kWh/d"


def test_the_same_folder_gives_the_same_workbook_bytes(small):
    """Fixed document dates and zip entry dates: a rerun later gives equal bytes (the zip's dates have a
    resolution of 2 s, the document's of 1 s)."""
    import time

    first = workbook_bytes(small)
    time.sleep(2.1)
    assert workbook_bytes(small) == first
