"""`airtaper report DIR`: the report of a finished folder rebuilt without solving, the same page as optimize's."""

from __future__ import annotations

import os
from pathlib import Path

import pandas as pd
import pytest

from airtaper.cli.main import main
from airtaper.errors import EXIT_INPUT, EXIT_OK

ROOT = Path(__file__).resolve().parents[2]
THREE = ROOT / "layouts" / "three_tank.toml"


@pytest.fixture(scope="module")
def finished(tmp_path_factory) -> Path:
    """The three-tank plant on six 4-hour periods (fast), optimised once."""
    tmp = tmp_path_factory.mktemp("three")
    lay = tmp / "three_short.toml"
    lay.write_text(THREE.read_text() + "\n[horizon]\nn_periods = 6\nsteps_per_period = 2\n")
    out = tmp / "out"
    assert main(["optimize", str(lay), "--out", str(out), "--quiet"]) == EXIT_OK
    return out


@pytest.mark.solver
def test_report_reproduces_the_html_of_optimize_without_solving(finished, capsys, monkeypatch):
    first = (finished / "report.html").read_bytes()
    book = pd.read_excel(finished / "results.xlsx", sheet_name=None)
    (finished / "report.html").unlink()
    (finished / "results.xlsx").unlink()
    import airtaper.optimize.diurnal as diurnal

    monkeypatch.setattr(diurnal, "run_optimization", lambda *a, **k: pytest.fail("report must not solve"))
    assert main(["report", str(finished)]) == EXIT_OK
    assert (finished / "report.html").read_bytes() == first
    again = pd.read_excel(finished / "results.xlsx", sheet_name=None)
    assert list(again) == list(book)
    for name in book:
        pd.testing.assert_frame_equal(again[name], book[name])
    out = capsys.readouterr().out
    assert "report.html" in out and "results.xlsx" in out
    assert not [p for p in os.listdir(finished) if p.endswith(".tmp")]  # written atomically, nothing left over


@pytest.mark.solver
def test_report_takes_the_layout_from_the_command_line(finished, tmp_path, capsys):
    assert main(["report", str(finished), "--layout", str(tmp_path / "missing.toml")]) == EXIT_INPUT
    err = capsys.readouterr().err
    assert "error:" in err and "missing.toml" in err and "Traceback" not in err


def test_report_on_a_folder_that_is_not_finished_exits_2(tmp_path, capsys):
    assert main(["report", str(tmp_path / "nowhere")]) == EXIT_INPUT
    assert "not a folder" in capsys.readouterr().err
    (tmp_path / "half").mkdir()
    (tmp_path / "half" / "schedule.csv").write_text("zone\nZ1\n")
    assert main(["report", str(tmp_path / "half")]) == EXIT_INPUT
    err = capsys.readouterr().err
    assert "summary.json: -: missing" in err and "Traceback" not in err
    (tmp_path / "half" / "summary.json").write_text("{not json")
    assert main(["report", str(tmp_path / "half")]) == EXIT_INPUT
    assert "not readable JSON" in capsys.readouterr().err
    (tmp_path / "half" / "summary.json").write_text("{}")
    assert main(["report", str(tmp_path / "half")]) == EXIT_INPUT
    assert "schedule.csv: columns: not a schedule table" in capsys.readouterr().err
