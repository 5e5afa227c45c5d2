"""`airtaper design` and `airtaper compare`: outputs in DIR, console summary, one-line input errors, exit codes."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pytest

from airtaper.cli.main import main
from airtaper.errors import EXIT_INFEASIBLE, EXIT_INPUT, EXIT_OK

ROOT = Path(__file__).resolve().parents[2]
THREE = ROOT / "layouts" / "three_tank.toml"

DESIGN_TABLES = """
[tariff]
currency = "EUR"
price_per_kWh = [[0.0, 0.08], [8.0, 0.2], [20.0, 0.08]]

[capital]
cost_per_diffuser = 60.0
cost_per_zone = 5000.0

[[load_days]]
id = "average"
days_per_year = 300.0

[[load_days]]
id = "peak"
days_per_year = 65.0
flow_factor = 1.2
load_factor = 1.4
"""


def _layout(tmp_path, extra: str = DESIGN_TABLES, name: str = "three_design.toml") -> Path:
    """The three-tank layout on six 4-hour periods of two steps, rows of 75 diffusers, with ``extra`` tables."""
    text = THREE.read_text()
    for n in (420, 340, 260):
        text = text.replace(f"count = {n}, submergence_m = 4.2 }}", f"count = {n}, submergence_m = 4.2, "
                                                                      "count_step = 75 }")
    path = tmp_path / name
    path.write_text(text + "\n[horizon]\nn_periods = 6\nsteps_per_period = 2\n" + extra)
    return path


@pytest.mark.solver
@pytest.mark.slow
def test_design_writes_its_outputs_and_verifies_every_day(tmp_path, capsys, monkeypatch):
    out = tmp_path / "out"
    layout = _layout(tmp_path)
    assert main(["design", str(layout), "--out", str(out), "--quiet"]) == EXIT_OK
    for name in ("design.csv", "load_days.csv", "schedule.csv", "candidates.csv", "binding.csv", "summary.json",
                 "taper.png", "train.png", "report.html"):
        assert (out / name).is_file(), name
    zones = pd.read_csv(out / "design.csv")
    assert list(zones["zone"]) == ["T1", "T2", "T3"]
    assert all(zones["count_design"] % 75 == 0)
    assert all((zones["count_lowest"] <= zones["count_design"]) & (zones["count_design"] <= zones["count_highest"]))
    days = pd.read_csv(out / "load_days.csv")
    assert list(days["load_day"]) == ["average", "peak"] and all(days["verified"])
    summary = json.loads((out / "summary.json").read_text())
    assert summary["status"] == "optimal" and summary["verified"] is True
    assert summary["design"]["counts"] == dict(zip(zones["zone"], zones["count_design"].astype(int)))
    assert summary["inputs"][0]["sha256"]
    html = (out / "report.html").read_text()
    assert "Caution." in html and "payback" in html
    text = capsys.readouterr().out
    assert "designed grid" in text and "payback" in text and "caution" in text
    binding = pd.read_csv(out / "binding.csv")
    assert set(binding["zone"]) <= set(zones["zone"]) and set(binding["case"]) <= {"transfer", "turndown", "mixing"}
    assert "What holds each zone" in html

    # `airtaper report DIR` rebuilds the same page from the folder, without solving, also once the layout is gone
    import airtaper.optimize.design as design

    monkeypatch.setattr(design, "run_design", lambda *a, **k: pytest.fail("report must not solve"))
    first, train = (out / "report.html").read_bytes(), (out / "train.png").read_bytes()
    (out / "report.html").unlink()
    assert main(["report", str(out)]) == EXIT_OK
    assert (out / "report.html").read_bytes() == first
    layout.rename(tmp_path / "moved.toml")
    (out / "report.html").unlink()
    assert main(["report", str(out)]) == EXIT_OK
    assert (out / "report.html").read_bytes() == first and (out / "train.png").read_bytes() == train
    assert main(["report", str(out), "--layout", str(tmp_path / "missing.toml")]) == EXIT_INPUT


def test_design_without_capital_is_one_line_exit_2(tmp_path, capsys):
    lay = _layout(tmp_path, extra="")
    code = main(["design", str(lay), "--out", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert code == EXIT_INPUT
    assert err.strip().splitlines() == [
        f"error: {lay}: capital: a design weighs capital against energy: the layout gives no costs (expected a "
        "[capital] table with cost_per_diffuser)"]
    assert not (tmp_path / "out").exists()


def test_design_day_zone_do_limit_out_of_range_is_one_line_exit_2(tmp_path, capsys):
    lay = _layout(tmp_path, DESIGN_TABLES + "\n[load_days.zones.T3]\ndo_max_mg_L = -1.0\n")
    code = main(["design", str(lay), "--out", str(tmp_path / "out")])
    assert code == EXIT_INPUT
    assert capsys.readouterr().err.strip().splitlines() == [
        f"error: {lay}: load_days.peak.zones.T3.do_max_mg_L: must be positive (got -1.0, expected > 0)"]
    assert not (tmp_path / "out").exists()


def test_design_of_a_day_no_grid_can_meet_ends_exit_3_naming_it(tmp_path, capsys):
    night = '\n[[load_days]]\nid = "night"\nbasis = "minimum_day"\ndays_per_year = 1.0\n' \
            "\n[load_days.zones.T3]\ndo_max_mg_L = 0.6\n"
    out = tmp_path / "out"
    code = main(["design", str(_layout(tmp_path, DESIGN_TABLES + night)), "--out", str(out), "--quiet"])
    assert code == EXIT_INFEASIBLE
    text = capsys.readouterr().out
    assert "no grid in the design ranges can meet load day(s) night: zone T3 cannot hold its DO maximum" in text
    summary = json.loads((out / "summary.json").read_text())
    assert summary["status"] == "infeasible" and summary["prescreen"]["days"]["night"]["feasible"] is False
    assert summary["solver"]["day_solves"] == 0


def test_design_own_periods_of_an_unknown_day_exit_2(tmp_path, capsys):
    code = main(["design", str(_layout(tmp_path)), "--out", str(tmp_path / "out"), "--own-periods", "peak,storm"])
    assert code == EXIT_INPUT
    assert capsys.readouterr().err.strip().splitlines() == [
        "error: <command line>: --own-periods: no such load day (got 'storm', expected one of average, peak)"]


def test_design_periods_that_do_not_nest_exit_2(tmp_path, capsys):
    code = main(["design", str(_layout(tmp_path)), "--out", str(tmp_path / "out"), "--periods", "5"])
    assert code == EXIT_INPUT
    assert capsys.readouterr().err.strip().splitlines() == [
        "error: <command line>: --periods: must divide or be a multiple of the layout's periods (got 5, expected a "
        "divisor or multiple of 6, at most 288)"]


@pytest.mark.solver
@pytest.mark.slow
def test_compare_of_a_layout_with_itself_shows_zero_differences(tmp_path, capsys):
    a = _layout(tmp_path, extra=DESIGN_TABLES.split("[capital]")[0], name="a.toml")  # the tariff only
    out = tmp_path / "cmp"
    assert main(["compare", str(a), str(a), "--out", str(out), "--quiet"]) == EXIT_OK
    table = pd.read_csv(out / "compare.csv")
    assert len(table) == 2
    diffs = [c for c in table.columns if c.endswith("_vs_first")]
    assert len(diffs) >= 8
    assert (table[diffs].fillna(0.0).to_numpy() == 0.0).all()
    assert table.loc[1, "cost_vs_first_percent"] == 0.0
    assert table.loc[0, "energy_kWh_per_year"] > 0
    # no load days: the base profile stands for the whole year
    assert table.loc[0, "days_per_year"] == 365.0
    for name in ("load_days.csv", "summary.json", "train_1.png", "train_2.png", "report.html"):
        assert (out / name).is_file(), name
    assert "Caution." in (out / "report.html").read_text()
    first = (out / "report.html").read_bytes()
    (out / "report.html").unlink()
    assert main(["report", str(out)]) == EXIT_OK  # rebuilt from the folder: the same page
    assert (out / "report.html").read_bytes() == first


def test_compare_lists_every_bad_layout_at_once(tmp_path, capsys):
    good = _layout(tmp_path, extra="", name="good.toml")
    bad = tmp_path / "bad.toml"
    bad.write_text(good.read_text().replace("volume_m3 = 500.0", "volume_m3 = -500.0", 1))
    code = main(["compare", str(good), str(bad), str(tmp_path / "missing.toml"), "--out", str(tmp_path / "o")])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == EXIT_INPUT
    assert err[0] == f"error: {bad}: zones.T1.volume_m3: must be positive (got -500.0, expected > 0)"
    assert err[1].startswith(f"error: {tmp_path / 'missing.toml'}: (file): ")
    assert len(err) == 2
