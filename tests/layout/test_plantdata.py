"""Plant-data CSV: one precise line per problem (exit 2 through the CLI), warnings naming unit slips,
short input gaps filled, model-grid means that keep volumes and loads."""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from airtaper.errors import InputError
from airtaper.layout import load_layout
from airtaper.layout.plantdata import load_plant_data, parse_plant_data, period_inputs
from airtaper.layout.reader import Collector
from airtaper.layout.plantdata import read_plant_csv_text

from .conftest import LAYOUTS

FUZZ = int(__import__("os").environ.get("AIRTAPER_FUZZ_EXAMPLES", "60"))


@pytest.fixture(scope="module")
def demo():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return load_layout(LAYOUTS / "demo.toml")


HEADER = ("time_h,flow_m3_d,airflow_Z2_Sm3_h,airflow_Z3_Sm3_h,airflow_Z4_Sm3_h,airflow_Z5_Sm3_h,airflow_Z6_Sm3_h,"
          "do_Z2_mg_L,do_Z6_mg_L,nh4_effluent_mg_L")


def _row(t, q=12000.0, air=(3000.0, 2500.0, 2000.0, 1500.0, 1000.0), do2=1.8, do6=2.1, nh4=0.6):
    return ",".join(str(x) for x in (t, q, *air, do2, do6, nh4))


def _text(n=12, dt=0.25, header=HEADER, rows=None):
    body = rows if rows is not None else [_row(round(i * dt, 6)) for i in range(n)]
    return "\n".join(["# test data", header, *body]) + "\n"


def _errors(text, layout):
    with pytest.raises(InputError) as exc:
        parse_plant_data(text, layout, label="data.csv")
    return [str(p) for p in exc.value.problems]


def _warnings(text, layout):
    w = []
    parse_plant_data(text, layout, label="data.csv", warnings=w)
    return [str(x) for x in w]


def test_a_good_file_parses(demo):
    rec = parse_plant_data(_text(), demo, label="data.csv")
    assert rec.interval_h == 0.25 and rec.days == pytest.approx(12 * 0.25 / 24)
    assert set(rec.airflow_Sm3_h) == {"Z2", "Z3", "Z4", "Z5", "Z6"}
    assert set(rec.do_mg_L) == {"Z2", "Z6"} and set(rec.nh4_mg_L) == {"effluent"}
    assert rec.quality is None and rec.temperature_C is None


def test_the_example_file_in_layouts_parses(demo):
    w = []
    rec = load_plant_data(LAYOUTS / "demo_plant_data.csv", demo, warnings=w)
    assert not w
    assert rec.days == pytest.approx(3.0) and rec.interval_h == 0.25
    assert set(rec.do_mg_L) == {"Z2", "Z3", "Z4", "Z5", "Z6"}
    assert set(rec.nh4_mg_L) == {"Z6", "effluent"}
    assert "SYNTHETIC" in (LAYOUTS / "demo_plant_data.csv").read_text().splitlines()[0]


@pytest.mark.parametrize("mutate, expected", [
    (lambda t: t.replace("do_Z2_mg_L", "do_Z2_mgL"),
     "error: data.csv: row 2, column do_Z2_mgL: unknown column, did you mean 'do_Z2_mg_L'?"),
    (lambda t: t.replace("do_Z6_mg_L", "do_Z9_mg_L"),
     "error: data.csv: row 2, column do_Z9_mg_L: no zone with this id (got 'Z9', expected one of "
     "Z1, Z2, Z3, Z4, Z5, Z6)"),
    (lambda t: t.replace("do_Z6_mg_L", "do_Z1_mg_L"),
     "error: data.csv: row 2, column do_Z1_mg_L: DO is fitted only in aerated or swing zones (this one is anoxic) "
     "(got 'Z1', expected an aerated zone)"),
    (lambda t: t.replace("airflow_Z6_Sm3_h,", "").replace(",1000.0,", ","),
     "error: data.csv: row 2: missing column airflow_Z6_Sm3_h (expected the measured airflow of every zone with "
     "diffusers (it is imposed on the model))"),
    (lambda t: t.replace("\n0.5,12000.0", "\n0.5,12k"),
     "error: data.csv: row 5, column flow_m3_d: not a number (got '12k', expected a number (or an empty cell for a "
     "missing value))"),
    (lambda t: t.replace("\n0.5,12000.0", "\n0.5,-5"),
     "error: data.csv: row 5, column flow_m3_d: must be positive (got -5.0, expected > 0)"),
    (lambda t: t.replace("\n0.5,", "\n0.2,"),
     "error: data.csv: row 5, column time_h: times must increase from row to row (a clock change or rows out of "
     "order?) (got 0.2, expected > 0.25)"),
    (lambda t: t.replace("\n0.5,", "\n0.25,"),
     "error: data.csv: row 5, column time_h: times must increase from row to row (a repeated row?) (got 0.25, "
     "expected > 0.25)"),
    (lambda t: t.replace("\n0.5,12000.0,3000.0", "\n0.5,12000.0,3000.0,7"),
     "error: data.csv: row 5: wrong number of fields (got 11, expected 10 (one per column))"),
    (lambda t: t.replace(",nh4_effluent_mg_L", ",tkn_mg_L"),
     "error: data.csv: row 2: influent quality is all six columns or none; missing cod_total_mg_L, cod_soluble_mg_L, "
     "nh4_mg_L, tss_mg_L, alkalinity_mol_m3 (expected cod_total_mg_L, cod_soluble_mg_L, tkn_mg_L, nh4_mg_L, tss_mg_L, "
     "alkalinity_mol_m3)"),
])
def test_each_mistake_gives_its_own_line(demo, mutate, expected):
    errors = _errors(mutate(_text()), demo)
    assert expected in errors, errors


def test_a_long_input_gap_is_an_error_a_short_one_is_filled(demo):
    rows = [_row(round(i * 0.25, 6)) for i in range(20)]
    short = list(rows)
    short[5] = short[5].replace(",12000.0,", ",,")
    w = _warnings(_text(rows=short), demo)
    assert "warning: data.csv: row 8, column flow_m3_d: 1 missing value(s) filled by linear interpolation" in w
    long = list(rows)
    for i in range(4, 12):  # 2 h without airflow in Z2
        long[i] = long[i].replace(",12000.0,3000.0,", ",12000.0,,")
    errors = _errors(_text(rows=long), demo)
    assert errors == ["error: data.csv: rows 7-14, column airflow_Z2_Sm3_h: missing input values that cannot be "
                      "filled (got '8 empty', expected gaps inside the record of at most 1 h)"]


def test_missing_outputs_are_left_out_not_filled(demo):
    rows = [_row(round(i * 0.25, 6)) for i in range(12)]
    rows[3] = rows[3].rsplit(",", 1)[0] + ",nan"
    rec = parse_plant_data(_text(rows=rows), demo, label="data.csv")
    assert math.isnan(rec.nh4_mg_L["effluent"][3]) and np.isfinite(rec.nh4_mg_L["effluent"]).sum() == 11


@pytest.mark.parametrize("mutate, warning", [
    (lambda r: r.replace(",1.8,2.1,", ",95.0,2.1,"),
     "warning: data.csv: column do_Z2_mg_L: DO up to 95: percent saturation instead of mg/L?"),
    (lambda r: r.replace(",12000.0,", ",500.0,"), "m3/h instead of m3/d?"),
    (lambda r: r.replace(",3000.0,", ",20.0,"), "Sm3/min instead of Sm3/h?"),
])
def test_unit_slips_are_warned_with_the_likely_cause(demo, mutate, warning):
    rows = [mutate(_row(round(i * 0.25, 6))) for i in range(12)]
    w = _warnings(_text(rows=rows), demo)
    assert any(warning in x for x in w), w


def test_a_logging_gap_is_warned(demo):
    rows = [_row(round(i * 0.25, 6)) for i in range(8)] + [_row(round(4.0 + i * 0.25, 6)) for i in range(8)]
    w = _warnings(_text(rows=rows), demo)
    assert any("rows 10-11, column time_h: a 2.25 h gap in the log" in x for x in w), w


def test_period_means_keep_volume_and_load(demo):
    # flow and quality changing every 15 min; means over 1 h periods keep the volume (flow x time)
    # and the load (flow-weighted concentration), as the influent CSV's resampling does
    n = 16
    t = np.arange(n) * 0.25
    q = 10000 + 3000 * np.sin(t)
    cod = 400 + 50 * np.cos(t)
    header = HEADER + ",cod_total_mg_L,cod_soluble_mg_L,tkn_mg_L,nh4_mg_L,tss_mg_L,alkalinity_mol_m3"
    rows = [_row(t[i], q=q[i]) + f",{cod[i]},{0.4 * cod[i]},45,30,200,7" for i in range(n)]
    rec = parse_plant_data(_text(header=header, rows=rows), demo, label="data.csv")
    p = period_inputs(rec, 1.0)
    assert p.n_periods == 4
    assert p.flow_m3_d.sum() * 1.0 == pytest.approx(q.sum() * 0.25)
    assert (p.flow_m3_d * p.quality["cod_total_mg_L"]).sum() == pytest.approx((q * cod).sum() * 0.25)


_cells = st.one_of(st.sampled_from(["", "nan", "-1", "1e400", "abc", "0", "12000", "3.5", ",", '"']),
                   st.floats(allow_nan=True, allow_infinity=True).map(repr))


@settings(max_examples=FUZZ, deadline=None)
@given(st.lists(st.tuples(st.integers(3, 14), st.integers(0, 9), _cells), min_size=1, max_size=6))
def test_mutated_files_give_a_record_or_one_line_problems(edits):
    # property: whatever the cells hold, the parser returns a record or problems, never raises otherwise
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        layout = load_layout(LAYOUTS / "demo.toml")
    lines = _text().splitlines()
    for row, column, cell in edits:
        if row < len(lines):
            fields = lines[row].split(",")
            if column < len(fields):
                fields[column] = cell
                lines[row] = ",".join(fields)
    col = Collector("data.csv")
    rec = read_plant_csv_text(col, "\n".join(lines), layout)
    if rec is None:
        assert col.problems and all(str(p).startswith("error: data.csv: ") and "\n" not in str(p)
                                    for p in col.problems)
    else:
        assert np.all(np.isfinite(rec.flow_m3_d)) and np.all(np.diff(rec.time_h) > 0)
