import json
import os

import pandas as pd
import pytest

from airtaper.errors import InputError
from airtaper.report.atomic import guard_inputs, write_csv_atomic, write_json_atomic, write_text_atomic


def test_text_written_and_no_temp_left(tmp_path):
    p = write_text_atomic(tmp_path / "sub" / "a.txt", "hello")
    assert p.read_text() == "hello"
    assert os.listdir(tmp_path / "sub") == ["a.txt"]


def test_failed_write_keeps_old_file(tmp_path):
    target = tmp_path / "s.json"
    write_json_atomic(target, {"a": 1})
    with pytest.raises(ValueError):
        write_json_atomic(target, {"a": float("nan")})  # JSON has no NaN
    assert json.loads(target.read_text()) == {"a": 1}
    assert os.listdir(tmp_path) == ["s.json"]


def test_csv_round_trip(tmp_path):
    df = pd.DataFrame({"zone": ["Z1", "Z2"], "airflow_Sm3_h": [1.5, 2.25]})
    write_csv_atomic(tmp_path / "x.csv", df)
    back = pd.read_csv(tmp_path / "x.csv")
    assert back.equals(df)


def test_guard_refuses_to_overwrite_input(tmp_path):
    inp = tmp_path / "schedule.csv"
    inp.write_text("x")
    with pytest.raises(InputError, match="overwrite an input"):
        guard_inputs(tmp_path, [inp], ["schedule.csv", "summary.json"])
    guard_inputs(tmp_path / "other", [inp], ["schedule.csv"])  # different folder: fine


def test_outputs_get_the_usual_permissions(tmp_path):
    mask = os.umask(0o022)
    try:
        p = write_text_atomic(tmp_path / "a.txt", "x")
    finally:
        os.umask(mask)
    assert (p.stat().st_mode & 0o777) == 0o644
