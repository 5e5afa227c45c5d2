"""results.xlsx of the demo: opens with pandas, one sheet per table, headings with units, values as in the CSVs."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from airtaper.report.columns import heading, unit_of

pytestmark = [pytest.mark.solver, pytest.mark.slow]


@pytest.fixture(scope="module")
def book(demo_dir):
    return pd.read_excel(demo_dir / "results.xlsx", sheet_name=None, engine="openpyxl")


def test_workbook_has_one_sheet_per_table(book, demo_dir):
    staged = ["blowers"] if (demo_dir / "blowers.csv").exists() else []  # a staged run writes blowers.csv
    assert list(book) == ["summary", "schedule", "header", *staged, "timeseries", "marginal costs", "verification"]


@pytest.mark.parametrize("name", ["schedule", "header", "timeseries"])
def test_table_sheets_match_the_csvs(book, demo_dir, name):
    csv = pd.read_csv(demo_dir / f"{name}.csv")
    sheet = book[name]
    assert list(sheet.columns) == [heading(c) for c in csv.columns]
    assert sheet.shape == csv.shape
    for c in csv.columns:
        a, b = csv[c], sheet[heading(c)]
        if a.dtype.kind in "fi":
            np.testing.assert_allclose(b.to_numpy(float), a.to_numpy(float), rtol=0, atol=0, equal_nan=True)
        else:
            assert list(a.astype(str)) == list(b.astype(str))


def test_headings_carry_units(book):
    assert "airflow_Sm3_h (Sm3/h)" in book["schedule"].columns
    assert "pressure_gauge_kPa (kPa gauge)" in book["header"].columns
    assert "SNH (g N/m3)" in book["timeseries"].columns
    assert unit_of("energy_kWh_per_day") == "kWh/d" and unit_of("zone") == ""


def test_summary_and_marginal_sheets(book, demo_dir):
    s = json.loads((demo_dir / "summary.json").read_text())
    summ = book["summary"].set_index("figure")
    assert summ.loc["energy", "value"] == pytest.approx(s["energy_kWh_per_day"])
    assert summ.loc["energy", "unit"] == "kWh/d"
    assert "licensed engineers" in summ.loc["caution", "value"]
    mc = book["marginal costs"]
    assert len(mc) == len(s["marginal_costs"])
    assert mc["energy (kWh/d)"].to_numpy(float) == pytest.approx([i["kWh_per_day"] for i in s["marginal_costs"]])
    ver = book["verification"]
    assert ver.loc[ver["where"] == "Z6", "re-simulated"].iloc[0] == pytest.approx(
        s["verification"]["do_margin_mg_L"]["Z6"])


def test_every_output_column_is_documented(demo_dir):
    # docs/outputs.md names every column of every table the run wrote, each in a table row of its file's section
    doc = (Path(__file__).resolve().parents[2] / "docs" / "outputs.md").read_text()
    for name in ("schedule.csv", "header.csv", "timeseries.csv", "blowers.csv"):
        if not (demo_dir / name).is_file():
            continue
        section = doc[doc.index(f"### `{name}`"):]
        section = section[:section.index("\n### ", 5)]
        for col in pd.read_csv(demo_dir / name, nrows=1).columns:
            assert f"`{col}`" in section, f"{name}: {col} is not in docs/outputs.md"
    for key in json.loads((demo_dir / "summary.json").read_text()):
        assert f"`{key}`" in doc, f"summary.json: {key} is not in docs/outputs.md"
