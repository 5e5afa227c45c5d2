"""`airtaper calibrate`: outputs, the override file accepted by `optimize`, one-line errors with exit 2."""

from __future__ import annotations

import json
import re
import shutil
import tomllib
from pathlib import Path

import pandas as pd
import pytest

from airtaper.cli.main import main
from airtaper.errors import EXIT_INFEASIBLE, EXIT_INPUT, EXIT_OK
from airtaper.layout.overrides import load_layout_with_overrides

ROOT = Path(__file__).resolve().parents[2]
LAYOUTS = ROOT / "layouts"


def _demo(folder: Path, n_periods: int = 24, steps: int = 4) -> Path:
    text = (LAYOUTS / "demo.toml").read_text()
    if n_periods != 24:
        text = text.replace("n_periods = 24\nsteps_per_period = 4", f"n_periods = {n_periods}\nsteps_per_period = {steps}")
        text = re.sub(r"\ntemperature_C = \[[^\]]*\]", "\ntemperature_C = 18.0", text, count=1)
    path = folder / f"demo{n_periods}.toml"
    path.write_text(text)
    shutil.copy(LAYOUTS / "demo_influent.csv", folder / "demo_influent.csv")
    return path


def _first_day(folder: Path) -> Path:
    """The first day of the synthetic example record (layouts/demo_plant_data.csv)."""
    lines = (LAYOUTS / "demo_plant_data.csv").read_text().splitlines()
    keep = [ln for ln in lines if ln.startswith("#") or ln.startswith("time_h") or float(ln.split(",")[0]) < 24.0]
    path = folder / "day1.csv"
    path.write_text("\n".join(keep) + "\n")
    return path


def test_bad_data_is_one_line_and_exit_2(tmp_path, capsys):
    lay = _demo(tmp_path)
    bad = tmp_path / "bad.csv"
    text = _first_day(tmp_path).read_text().replace("\n0.5,", "\n0.2,", 1)
    bad.write_text(text)
    assert main(["calibrate", str(lay), "--data", str(bad), "--out", str(tmp_path / "out")]) == EXIT_INPUT
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith(f"error: {bad}: row ") and "column time_h: times must increase" in err[0]
    assert "Traceback" not in "".join(err)
    assert not (tmp_path / "out").exists()


def test_outputs_may_not_overwrite_the_data(tmp_path, capsys):
    lay = _demo(tmp_path)
    data = tmp_path / "fit.csv"
    shutil.copy(_first_day(tmp_path), data)
    assert main(["calibrate", str(lay), "--data", str(data), "--out", str(tmp_path)]) == EXIT_INPUT
    assert "--out: the output folder holds an input of this run" in capsys.readouterr().err


def test_bad_options_are_reported(tmp_path, capsys):
    lay = _demo(tmp_path)
    data = _first_day(tmp_path)
    assert main(["calibrate", str(lay), "--data", str(data), "--out", str(tmp_path / "o"), "--do-sd", "-1"]) == EXIT_INPUT
    assert "error: <command line>: --do-sd: must be a finite number (got -1.0, expected >= 1e-09)" in capsys.readouterr().err


@pytest.mark.solver
@pytest.mark.slow
def test_calibrate_then_optimize_with_the_overrides(tmp_path, capsys):
    lay = _demo(tmp_path)
    data = _first_day(tmp_path)
    out = tmp_path / "cal"
    code = main(["calibrate", str(lay), "--data", str(data), "--out", str(out), "--mu-a", "--quiet"])
    assert code == EXIT_OK, capsys.readouterr()
    for name in ("overrides.toml", "parameters.csv", "fit.csv", "summary.json", "fit.png", "residuals.png",
                 "report.html"):
        assert (out / name).is_file(), name
    summary = json.loads((out / "summary.json").read_text())
    assert summary["status"] == "fitted" and summary["fitted"] == [f"alpha_F.Z{i}" for i in range(2, 7)] + ["mu_A"]
    html = (out / "report.html").read_text()
    assert "licensed engineers decide" in html and "data:image/png;base64," in html
    text = capsys.readouterr().out
    assert "alpha_F.Z2" in text and "95 %" in text and "caution" in text
    params = pd.read_csv(out / "parameters.csv").set_index("parameter")
    ov = tomllib.loads((out / "overrides.toml").read_text())
    # the override file holds alpha = alpha x F / F (the layout's F = 0.8) and mu_A, and loads with the layout
    layout = load_layout_with_overrides(lay, out / "overrides.toml")
    for z in ("Z2", "Z3", "Z4", "Z5", "Z6"):
        assert ov["zones"][z]["alpha"] * 0.8 == pytest.approx(params.loc[f"alpha_F.{z}", "fitted"], rel=1e-5)
        assert layout.zone(z).alpha == ov["zones"][z]["alpha"]
    assert dict(layout.kinetics.overrides)["mu_A"] == ov["kinetics"]["overrides"]["mu_A"]
    # round trip through optimize: a short-horizon copy of the layout (twelve 2-hour periods), with and without
    # the fitted values; both are verified by the independent simulator (exit 0)
    (tmp_path / "short").mkdir()
    short = _demo(tmp_path / "short", 12, 2)
    plain_out, fitted_out = tmp_path / "opt_plain", tmp_path / "opt_fitted"
    assert main(["optimize", str(short), "--out", str(plain_out), "--quiet", "--no-figure"]) == EXIT_OK
    code = main(["optimize", str(short), "--out", str(fitted_out), "--quiet", "--no-figure",
                 "--overrides", str(out / "overrides.toml")])
    plain = json.loads((plain_out / "summary.json").read_text())
    fitted = json.loads((fitted_out / "summary.json").read_text())
    assert code == EXIT_OK, fitted["messages"]
    for s in (plain, fitted):
        assert s["status"] == "optimal" and s["verified"] is True, s["messages"]
        assert s["verification"]["do_min_margin_mg_L"] >= -0.01  # the DO minimum held in continuous time (issue 12)
    # the fitted plant (alpha x F 0.30 in Z2 against the layout's 0.36, mu_A 0.65 against 0.80) needs more air:
    # measured 3,132.9 against 2,443.9 kWh/d; far more than the solver's tolerances could explain
    assert fitted["energy_kWh_per_day"] > 1.1 * plain["energy_kWh_per_day"]
    # On six 4-hour periods the fitted plant cannot hold Z6's 1.0-2.5 mg/L band at one airflow per 4 hours (with
    # Z6's maximum removed it converges): the refined study's capped first solve does not converge and the
    # elastic solve says so (exit 3, optimize/backoff.py REFINED_MAX_ITER), naming Z6's DO range.
    (tmp_path / "coarse").mkdir()
    coarse = _demo(tmp_path / "coarse", 6, 2)
    assert main(["optimize", str(coarse), "--out", str(tmp_path / "opt6"), "--quiet", "--no-figure",
                 "--overrides", str(out / "overrides.toml")]) == EXIT_INFEASIBLE
    six = json.loads((tmp_path / "opt6" / "summary.json").read_text())
    assert six["status"] == "infeasible" and six["saving_percent"] is None
    assert any(f["zone"] == "Z6" and f["limit"] in ("do_min", "do_max") for f in six["infeasibility"]), six["messages"]


def test_optimize_reports_a_bad_override_against_the_override_file(tmp_path, capsys):
    lay = _demo(tmp_path)
    ov = tmp_path / "ov.toml"
    ov.write_text("[zones.Z2]\nalpha = 3.0\n")
    assert main(["optimize", str(lay), "--out", str(tmp_path / "o"), "--overrides", str(ov)]) == EXIT_INPUT
    err = capsys.readouterr().err.strip().splitlines()
    assert err == [f"error: {ov}: zones.Z2.alpha: out of range (got 3.0, expected > 0 and <= 1.2)"]
