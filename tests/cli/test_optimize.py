"""`airtaper optimize`: outputs in DIR, console summary, exit codes 0/2/3, no traceback."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pytest

from airtaper.cli.main import main
from airtaper.errors import EXIT_INFEASIBLE, EXIT_INPUT, EXIT_OK

ROOT = Path(__file__).resolve().parents[2]
THREE = ROOT / "layouts" / "three_tank.toml"


def _short_layout(tmp_path, extra: str = "", replace: tuple[str, str] | None = None) -> Path:
    """The three-tank layout on six 4-hour periods of two steps (fast), optionally edited."""
    text = THREE.read_text()
    if replace:
        assert replace[0] in text
        text = text.replace(*replace)
    path = tmp_path / "three_short.toml"
    path.write_text(text + "\n[horizon]\nn_periods = 6\nsteps_per_period = 2\n" + extra)
    return path


@pytest.mark.solver
def test_optimize_writes_every_output_and_a_summary(tmp_path, capsys):
    out = tmp_path / "out"
    assert main(["optimize", str(_short_layout(tmp_path)), "--out", str(out), "--quiet"]) == EXIT_OK
    for name in ("schedule.csv", "header.csv", "blowers.csv", "timeseries.csv", "summary.json", "schedule.png",
                 "report.html"):
        assert (out / name).is_file(), name
    blowers = pd.read_csv(out / "blowers.csv")
    assert list(blowers.columns) == ["period_start_h", "period_end_h", "blower", "running", "airflow_Sm3_h",
                                     "power_kW", "efficiency", "discharge_gauge_kPa", "starts"]
    assert len(blowers) == 6 * 2 and set(blowers["blower"]) == {"PD1", "PD2"}
    summary = json.loads((out / "summary.json").read_text())
    assert summary["status"] == "optimal" and summary["verification"]["verified"] is True
    assert summary["energy_kWh_per_day"] < summary["baseline"]["energy_kWh_per_day"]
    sched = pd.read_csv(out / "schedule.csv")
    assert len(sched) == 6 * 3 and set(sched["zone"]) == {"T1", "T2", "T3"}
    text = capsys.readouterr().out
    assert "saving" in text and "verified          yes" in text
    assert "blowers           " in text and "staging           " in text


@pytest.mark.solver
def test_impossible_limits_exit_3_with_the_reason(tmp_path, capsys):
    # a DO minimum above what T3's diffusers can reach even at their maximum airflow
    lay = _short_layout(tmp_path, replace=('id = "T3"\nkind = "aerated"', 'id = "T3"\nkind = "aerated"\ndo_min_mg_L = 9.5'))
    out = tmp_path / "out"
    assert main(["optimize", str(lay), "--out", str(out), "--quiet", "--no-figure"]) == EXIT_INFEASIBLE
    summary = json.loads((out / "summary.json").read_text())
    assert summary["status"] == "infeasible"
    assert any(f["zone"] == "T3" for f in summary["infeasibility"])
    assert "T3" in capsys.readouterr().out


def test_bad_input_exits_2_without_traceback(tmp_path, capsys):
    assert main(["optimize", str(tmp_path / "missing.toml"), "--out", str(tmp_path / "o")]) == EXIT_INPUT
    err = capsys.readouterr().err
    assert "Traceback" not in err and "error:" in err
    assert main(["optimize", str(THREE), "--out", str(tmp_path / "o"), "--smoothing-weight", "-1"]) == EXIT_INPUT
    assert "--smoothing-weight" in capsys.readouterr().err
    assert main(["optimize", str(THREE), "--out", str(tmp_path / "o"), "--solve-budget", "0"]) == EXIT_INPUT
    err = capsys.readouterr().err
    assert "--solve-budget: must be a finite number (got 0.0, expected >= 1)" in err and len(err.splitlines()) == 1
    assert not (tmp_path / "o").exists()


def test_the_solve_budget_option_reaches_the_study(tmp_path, monkeypatch):
    """``--solve-budget`` sets the CPU seconds of the run's Ipopt solves (optimize/attempts.SolveBudget)."""
    import airtaper.optimize.diurnal as diurnal

    seen = {}

    def fake(plant, options=None, progress=None, baseline=None):
        seen["budget"] = options.solve_budget_s
        raise KeyboardInterrupt  # stop before any work; the output folder is left untouched

    monkeypatch.setattr(diurnal, "run_optimization", fake)
    code = main(["optimize", str(THREE), "--out", str(tmp_path / "o"), "--quiet", "--solve-budget", "900"])
    assert code != EXIT_OK and seen["budget"] == 900.0


def test_output_folder_holding_the_layout_is_refused(tmp_path, capsys):
    lay = _short_layout(tmp_path)
    # a layout file that carries an output's name, in the output folder: refused, not overwritten
    clash = tmp_path / "clash"
    clash.mkdir()
    copy = clash / "summary.json"
    copy.write_text(lay.read_text())
    assert main(["optimize", str(copy), "--out", str(clash)]) == EXIT_INPUT
    assert "overwrite" in capsys.readouterr().err
    assert copy.read_text() == lay.read_text()


@pytest.mark.solver
def test_unverified_result_warns_loudly_and_exits_4(tmp_path, capsys, monkeypatch):
    """Plumbing of the verification verdict: with the DO tolerance made impossible (-1 mg/L), the
    re-simulated day (whose DO sits on its minimum) counts as breaking it."""
    import airtaper.optimize.verify as verify

    monkeypatch.setattr(verify, "DO_TOLERANCE_mg_L", -1.0)
    out = tmp_path / "out"
    assert main(["optimize", str(_short_layout(tmp_path)), "--out", str(out), "--quiet", "--no-figure"]) == 4
    summary = json.loads((out / "summary.json").read_text())
    assert summary["status"] == "unverified" and summary["verification"]["verified"] is False
    assert any(m.startswith("WARNING") for m in summary["messages"])
    assert "WARNING" in capsys.readouterr().err


def test_influent_csv_named_like_an_output_is_never_overwritten(tmp_path, capsys, monkeypatch):
    # The influent CSV is read from the layout's folder, wherever the command runs; an output
    # folder that would overwrite it is refused there too (the guard once looked in the
    # working folder instead).
    plant = tmp_path / "plant"
    plant.mkdir()
    csv_text = (ROOT / "layouts" / "demo_influent.csv").read_text()
    (plant / "schedule.csv").write_text(csv_text)
    text = (ROOT / "layouts" / "demo.toml").read_text().replace('csv = "demo_influent.csv"', 'csv = "schedule.csv"')
    (plant / "demo.toml").write_text(text)
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)
    assert main(["optimize", str(plant / "demo.toml"), "--out", str(plant)]) == EXIT_INPUT
    err = capsys.readouterr().err
    assert "would overwrite an input" in err and "Traceback" not in err
    assert (plant / "schedule.csv").read_text() == csv_text


@pytest.mark.parametrize("case", ["existing file", "earlier run without --overwrite", "under a file"])
def test_output_folder_problems_are_found_before_the_solve(tmp_path, capsys, monkeypatch, case):
    import airtaper.optimize.diurnal as diurnal

    def no_solve(*args, **kwargs):
        raise AssertionError("the solve started before the output folder was checked")

    monkeypatch.setattr(diurnal, "run_optimization", no_solve)
    lay = _short_layout(tmp_path)
    if case == "existing file":
        out = tmp_path / "report.html"
        out.write_text("keep\n")
        expected = f"error: {out}: --out: names an existing file, not a folder"
    elif case == "earlier run without --overwrite":
        out = tmp_path / "earlier"
        out.mkdir()
        (out / "summary.json").write_text("{}\n")
        expected = f"error: {out}: --out: the folder holds an earlier run or other files (kept)"
    else:
        (tmp_path / "blocker").write_text("")
        out = tmp_path / "blocker" / "out"
        expected = f"error: {out}: --out: cannot write in {tmp_path / 'blocker'}"
    assert main(["optimize", str(lay), "--out", str(out), "--quiet"]) == EXIT_INPUT
    err = capsys.readouterr().err.splitlines()
    assert len(err) == 1 and err[0].startswith(expected), err  # at once: the solve never started
