"""`airtaper sweep` on a Dask LocalCluster: the same rows as one-by-one runs, a bad scenario is one failed row,
a worker killed mid-run and an interrupted command both end with every row once."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

import pandas as pd
import pytest

from airtaper.cli.main import main
from airtaper.errors import EXIT_INPUT, EXIT_OK
from airtaper.layout.overrides import overrides_to_toml

ROOT = Path(__file__).resolve().parents[2]
THREE = ROOT / "layouts" / "three_tank.toml"

# Small scenarios: four 6-hour periods of two steps each (a few seconds per solve).
COMMON = {"horizon.n_periods": 4, "horizon.steps_per_period": 2}
GRID = """
[common]
"horizon.n_periods" = 4
"horizon.steps_per_period" = 2

[grid]
"plant.water_temperature_C" = [12.0, 18.0]
"zones.T1.alpha" = [0.45, 0.6]

[[scenarios]]
id = "typo"
set = { "zones.T9.alpha" = 0.5 }
"""
GOOD = {"g001": (12.0, 0.45), "g002": (12.0, 0.6), "g003": (18.0, 0.45), "g004": (18.0, 0.6)}


def _grid(tmp_path, text=GRID) -> Path:
    p = tmp_path / "grid.toml"
    p.write_text(text)
    return p


def _table(out: Path) -> pd.DataFrame:
    csv = pd.read_csv(out / "results.csv")
    pq = pd.read_parquet(out / "results.parquet")
    assert list(pq["scenario"]) == list(csv["scenario"])
    return pq


@pytest.mark.solver
@pytest.mark.slow
def test_sweep_rows_equal_one_by_one_runs_and_a_bad_override_is_one_failed_row(tmp_path, capsys):
    out = tmp_path / "sweep"
    code = main(["sweep", str(THREE), "--grid", str(_grid(tmp_path)), "--out", str(out), "--workers", "2",
                 "--quiet"])
    err = capsys.readouterr().err
    assert code == EXIT_OK
    table = _table(out)
    assert list(table["scenario"]) == [*GOOD, "typo"]  # grid order, every scenario once

    bad = table.set_index("scenario").loc["typo"]
    assert bad["status"] == "bad input" and bad["exit_code"] == EXIT_INPUT
    line = (f"error: {tmp_path / 'grid.toml'}: scenario typo: zones.T9.alpha: no table with id 'T9' in zones "
            "(got 'T9', expected one of T1, T2, T3)")
    assert bad["message"] == line and line in err.splitlines()

    # The same scenarios one by one, each through `airtaper optimize --overrides` with a file written here.
    for sid, (temp, alpha) in GOOD.items():
        f = tmp_path / f"{sid}.toml"
        f.write_text(overrides_to_toml({**COMMON, "plant.water_temperature_C": temp, "zones.T1.alpha": alpha}))
        one = tmp_path / f"one-{sid}"
        assert main(["optimize", str(THREE), "--overrides", str(f), "--out", str(one), "--quiet",
                     "--no-report"]) == EXIT_OK
        s = json.loads((one / "summary.json").read_text())
        row = table.set_index("scenario").loc[sid]
        assert row["plant.water_temperature_C"] == temp and row["zones.T1.alpha"] == alpha
        assert row["status"] == s["status"] == "optimal" and row["exit_code"] == 0
        assert row["energy_kWh_per_day"] == pytest.approx(s["energy_kWh_per_day"], rel=1e-6)
        assert row["baseline_energy_kWh_per_day"] == pytest.approx(s["baseline"]["energy_kWh_per_day"], rel=1e-6)
        assert row["saving_percent"] == pytest.approx(s["saving_percent"], rel=1e-6)
        assert row["nh4_mean_mg_L"] == pytest.approx(s["effluent"]["nh4_mean_mg_L"], rel=1e-6, abs=1e-9)
        assert row["nh4_mean_margin_mg_L"] == pytest.approx(s["limits"]["nh4_mean_mg_L"]
                                                           - s["effluent"]["nh4_mean_mg_L"], rel=1e-6, abs=1e-9)
        assert row["min_do_margin_mg_L"] == pytest.approx(s["min_do_margin_mg_L"], abs=1e-6)
        assert bool(row["compliant"]) and row["run_s"] > row["ipopt_s"] > 0
        assert row["run_cpu_s"] > row["ipopt_cpu_s"] > 0  # process CPU: the ratio machine load does not blur
        # the scenario's own folder is a complete optimize output folder
        assert (out / row["folder"] / "schedule.csv").is_file()
    # warmer water: lower saturation, more air; higher alpha: less air (both directions of the physics)
    e = table.set_index("scenario")["energy_kWh_per_day"]
    assert e["g003"] > e["g001"] and e["g002"] < e["g001"]
    assert (out / "report.html").is_file() and (out / "sweep_energy.png").is_file()
    facts = json.loads((out / "sweep.json").read_text())
    assert facts["run_now"] == 4 and facts["workers"] == 2 and len(facts["peak_memory_per_worker_MB"]) == 2


@pytest.fixture(scope="module")
def cluster():
    from dask.distributed import Client, LocalCluster

    c = LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0")
    client = Client(c)
    yield c, client
    client.close()
    c.close()


def _row_mtimes(out: Path) -> dict:
    return {p.stem: p.stat().st_mtime_ns for p in (out / "rows").glob("*.json")}


@pytest.mark.solver
@pytest.mark.slow
def test_a_worker_killed_mid_run_and_a_resumed_sweep_end_with_every_row_once(tmp_path, cluster, capsys):
    c, client = cluster
    grid = _grid(tmp_path, GRID.replace("[0.45, 0.6]", "[0.45, 0.55, 0.6]"))  # six scenarios, and the typo
    out = tmp_path / "sweep"
    killed = []

    def kill_a_busy_worker():
        deadline = time.time() + 300
        while time.time() < deadline and not list((out / "rows").glob("g*.json")):
            time.sleep(0.2)
        busy = [w for w, tasks in client.processing().items() if tasks]
        if busy:
            pid = client.run(os.getpid, workers=[busy[0]])[busy[0]]
            os.kill(pid, signal.SIGKILL)
            killed.append(pid)

    t = threading.Thread(target=kill_a_busy_worker)
    t.start()
    code = main(["sweep", str(THREE), "--grid", str(grid), "--out", str(out), "--scheduler", c.scheduler_address,
                 "--quiet"])
    t.join()
    capsys.readouterr()
    assert killed, "no worker was busy when the first row arrived"
    assert code == EXIT_OK
    table = _table(out)
    ids = [f"g{i:03d}" for i in range(1, 7)]
    assert list(table["scenario"]) == [*ids, "typo"]
    assert (table.set_index("scenario").loc[ids, "status"] == "optimal").all()

    # Resume: one scenario's row lost (as if the sweep stopped before it ended), the others kept untouched.
    before = _row_mtimes(out)
    (out / "rows" / "g005.json").unlink()
    code = main(["sweep", str(THREE), "--grid", str(grid), "--out", str(out), "--scheduler", c.scheduler_address,
                 "--quiet"])
    assert code == EXIT_OK
    assert json.loads((out / "sweep.json").read_text())["run_now"] == 1
    after = _row_mtimes(out)
    assert {k: v for k, v in after.items() if k != "g005"} == {k: v for k, v in before.items() if k != "g005"}
    again = _table(out)
    assert list(again["scenario"]) == list(table["scenario"])
    pd.testing.assert_series_equal(again["energy_kWh_per_day"], table["energy_kWh_per_day"], rtol=1e-6)


@pytest.mark.solver
@pytest.mark.slow
def test_an_interrupted_sweep_command_resumes_and_never_loses_a_finished_row(tmp_path, cluster):
    c, _ = cluster
    grid = _grid(tmp_path)
    out = tmp_path / "sweep"
    cmd = [sys.executable, "-m", "airtaper.cli.main", "sweep", str(THREE), "--grid", str(grid), "--out", str(out),
           "--scheduler", c.scheduler_address, "--quiet"]
    env = dict(os.environ, PYTHONPATH=str(ROOT / "src") + os.pathsep + os.environ.get("PYTHONPATH", ""))
    proc = subprocess.Popen(cmd, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    deadline = time.time() + 300
    while time.time() < deadline and not list((out / "rows").glob("g*.json")) and proc.poll() is None:
        time.sleep(0.2)
    proc.send_signal(signal.SIGTERM)
    _, err = proc.communicate(timeout=120)
    assert proc.returncode in (0, 143), err.decode()
    first = _row_mtimes(out)
    assert any(k.startswith("g") for k in first)
    code = main(["sweep", str(THREE), "--grid", str(grid), "--out", str(out), "--scheduler", c.scheduler_address,
                 "--quiet"])
    assert code == EXIT_OK
    table = _table(out)
    assert list(table["scenario"]) == [*GOOD, "typo"]
    after = _row_mtimes(out)
    assert {k: after[k] for k in first} == first  # a finished row is never rewritten
    assert not [p for p in (out / "runs").iterdir() if p.name.startswith(".")]  # no half-written folder left


def test_sweep_refuses_a_folder_it_did_not_write_and_a_bad_grid(tmp_path, capsys):
    other = tmp_path / "other"
    other.mkdir()
    (other / "notes.txt").write_text("mine")
    grid = _grid(tmp_path)
    assert main(["sweep", str(THREE), "--grid", str(grid), "--out", str(other)]) == EXIT_INPUT
    assert capsys.readouterr().err.strip() == (f"error: {other}: --out: the folder holds files that no airtaper "
                                               "sweep wrote (kept) (expected a new folder, or an earlier sweep's "
                                               "folder to resume)")
    bad = _grid(tmp_path, "[grid]\nx = 1\n")
    assert main(["sweep", str(THREE), "--grid", str(bad), "--out", str(tmp_path / "s")]) == EXIT_INPUT
    assert capsys.readouterr().err.strip() == (f"error: {bad}: grid.x: must be a list of the values to sweep "
                                               "(got 1, expected [value, value, ...])")
    assert main(["sweep", str(THREE), "--grid", str(grid), "--out", str(tmp_path / "s"), "--workers", "0"]) \
        == EXIT_INPUT
    assert "--workers: must be a finite number (got 0, expected >= 1)" in capsys.readouterr().err
    assert not (tmp_path / "s").exists()
