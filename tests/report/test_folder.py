"""Reading an output folder back: a damaged folder gives the error form (exit 2), never a crash of the report."""

from __future__ import annotations

import copy
import json
import os

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from airtaper.errors import InputError
from airtaper.report.build import render
from airtaper.report.folder import SUMMARY_SHAPE, read_study_folder
from airtaper.report.study_files import write_study_outputs

from .test_study_files import _tables

#: Examples of the fuzz below; AIRTAPER_FUZZ_EXAMPLES=2000 for a longer hunt.
N_EXAMPLES = min(int(os.environ.get("AIRTAPER_FUZZ_EXAMPLES", "40")), 5000)


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    """A small finished folder (two zones, four periods), no solve; its summary."""
    out = tmp_path_factory.mktemp("small")
    schedule, header, ts, summary = _tables()
    summary["infeasibility"] = []
    write_study_outputs(out, schedule=schedule, header=header, timeseries=ts, summary=summary, figure=False)
    return out, json.loads((out / "summary.json").read_text())


def _paths(obj, prefix=()):
    """Every key path of a JSON object (dicts and list items)."""
    yield prefix
    if isinstance(obj, dict):
        for k, v in obj.items():
            yield from _paths(v, prefix + (k,))
    elif isinstance(obj, list):
        for i, v in enumerate(obj):
            yield from _paths(v, prefix + (i,))


JSON = st.recursive(st.none() | st.booleans() | st.integers(-10**6, 10**6) | st.floats(allow_nan=False)
                    | st.text(max_size=8), lambda inner: st.lists(inner, max_size=3)
                    | st.dictionaries(st.text(max_size=5), inner, max_size=3), max_leaves=6)


@settings(max_examples=N_EXAMPLES, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture,
                                                                          HealthCheck.too_slow])
@given(data=st.data())
def test_any_summary_value_gives_a_report_or_the_error_form(small, tmp_path_factory, data):
    out, summary = small
    paths = [p for p in _paths(summary) if p]
    path = data.draw(st.sampled_from(paths))
    value = data.draw(JSON)
    bad = copy.deepcopy(summary)
    node = bad
    for k in path[:-1]:
        node = node[k]
    node[path[-1]] = value
    (out / "summary.json").write_text(json.dumps(bad))
    try:
        folder = read_study_folder(out)
    except InputError as exc:
        for p in exc.problems:
            line = str(p)
            assert line.startswith(f"error: {out / 'summary.json'}: ") and "\n" not in line
        return
    finally:
        (out / "summary.json").write_text(json.dumps(summary))
    page = render(folder, figures=False)["report.html"].decode()
    assert "Caution." in page


def test_a_wrong_kind_is_named_with_its_key(small):
    out, summary = small
    bad = dict(summary, verification=dict(summary["verification"], do_margin_mg_L={"Z2": "low"}), limits="none")
    (out / "summary.json").write_text(json.dumps(bad))
    try:
        with pytest.raises(InputError) as err:
            read_study_folder(out)
    finally:
        (out / "summary.json").write_text(json.dumps(summary))
    lines = sorted(str(p) for p in err.value.problems)
    assert lines == [
        f"error: {out / 'summary.json'}: limits: not a table (got 'none', expected a JSON object)",
        f"error: {out / 'summary.json'}: verification.do_margin_mg_L.Z2: of the wrong kind (got 'low', expected a "
        "number or null)",
    ]
    assert set(SUMMARY_SHAPE) >= {"verification", "limits", "marginal_costs"}


def test_damaged_tables_give_the_error_form(small, tmp_path):
    out, _ = small
    import shutil

    copy_dir = tmp_path / "c"
    shutil.copytree(out, copy_dir)
    text = (copy_dir / "schedule.csv").read_text().splitlines()
    fields = text[2].split(",")
    fields[3] = "lots"  # the airflow of the second row, line 3 of the file
    (copy_dir / "schedule.csv").write_text("\n".join(text[:2] + [",".join(fields)] + text[3:]) + "\n")
    with pytest.raises(InputError) as err:
        read_study_folder(copy_dir)
    assert [str(p) for p in err.value.problems] == [
        f"error: {copy_dir / 'schedule.csv'}: row 3, column airflow_Sm3_h: not a number (got 'lots', expected a number)"]
    (copy_dir / "schedule.csv").write_text("\n".join(text[:2] + [text[1]]) + "\n")  # a row twice
    with pytest.raises(InputError) as err:
        read_study_folder(copy_dir)
    assert "appears twice" in str(err.value.problems[0])


def test_a_run_stopped_before_any_schedule_still_gets_its_report(small, tmp_path):
    # a pre-screen may stop the run before solving: the tables then hold their headings only
    out, summary = small
    import shutil

    d = tmp_path / "stopped"
    shutil.copytree(out, d)
    for name in ("schedule.csv", "header.csv", "timeseries.csv"):
        head = (d / name).read_text().splitlines()[0]
        (d / name).write_text(head + "\n")
    s = dict(summary, status="infeasible", infeasibility=[{"message": "the grids cannot meet the peak oxygen demand"}])
    (d / "summary.json").write_text(json.dumps(s))
    files = render(read_study_folder(d))
    page = files["report.html"].decode()
    assert "No schedule: the run stopped" in page and "the grids cannot meet the peak oxygen demand" in page
    assert "schedule.png" not in files and files["results.xlsx"][:2] == b"PK"
