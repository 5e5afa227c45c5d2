"""`airtaper simulate`: outputs, schedule input and bad input handling."""

import json
from pathlib import Path

import pandas as pd
import pytest

from airtaper.cli.main import main


def test_simulate_writes_outputs(tmp_path, capsys):
    out = tmp_path / "sim"
    assert main(["simulate", "layouts/three_tank.toml", "--out", str(out), "--do-setpoint", "1.5"]) == 0
    ts = pd.read_csv(out / "timeseries.csv")
    for col in ("time_h", "zone", "SI", "SALK", "airflow_Sm3_h", "otr_kg_h"):
        assert col in ts.columns
    summary = json.loads((out / "summary.json").read_text())
    assert summary["periodic"] is True
    assert summary["blower_kWh_per_day"] > 0
    assert "SNH" in summary["effluent_mg_L"]
    assert "periodic" in capsys.readouterr().out


def test_simulate_bills_the_blowers_one_by_one_like_the_optimiser_s_baseline(tmp_path, capsys):
    """`simulate`'s energy is the per-blower dispatch of the simulated day, the rule the optimiser bills its
    uniform-DO baseline by: the same day gives the same kWh both ways (like with like)."""
    from airtaper.layout import load_layout
    from airtaper.optimize.baseline import run_baseline
    from airtaper.optimize.staging import bill_day_by_dispatch

    lay = load_layout("layouts/three_tank.toml")
    out = tmp_path / "sim"
    assert main(["simulate", "layouts/three_tank.toml", "--out", str(out), "--do-setpoint", "1.5"]) == 0
    summary = json.loads((out / "summary.json").read_text())
    d = summary["dispatch"]
    assert set(d["blowers"]) == {b.id for b in lay.blowers}
    assert summary["blower_kWh_per_day"] == d["energy_kWh_per_day"]
    assert sum(v["running_h"] for v in d["blowers"].values()) >= 24.0  # some machine runs every hour
    assert "dispatched one by one" in capsys.readouterr().out
    base = run_baseline(lay, 1.5)
    one_machine = base.day.energy_kWh_per_day
    bd = bill_day_by_dispatch(lay, base.day, lay.operation.objective)
    assert base.day.energy_kWh_per_day == pytest.approx(bd.total_power_kW.sum() * lay.horizon.period_h)
    assert summary["blower_kWh_per_day"] == pytest.approx(base.day.energy_kWh_per_day, rel=1e-3)
    assert base.day.energy_kWh_per_day != pytest.approx(one_machine, rel=1e-3)  # not the set as one machine


def test_simulate_with_schedule_and_bad_schedule(tmp_path, capsys):
    from airtaper.layout import load_layout
    lay = load_layout("layouts/three_tank.toml")
    rows = []
    for k in range(lay.horizon.n_periods):
        for z in lay.zones:
            if z.kind == "aerated":
                lo, hi = lay.zone_airflow_range_Sm3_h(z)
                rows.append({"period_start_h": k * lay.horizon.period_h, "zone": z.id,
                             "airflow_Sm3_h": 0.5 * (lo + hi)})
    sched = tmp_path / "schedule.csv"
    pd.DataFrame(rows).to_csv(sched, index=False)
    assert main(["simulate", "layouts/three_tank.toml", "--out", str(tmp_path / "a"), "--schedule", str(sched)]) == 0
    bad = tmp_path / "bad.csv"
    pd.DataFrame([{"period_start_h": 0.3, "zone": "nope", "airflow_Sm3_h": -1}]).to_csv(bad, index=False)
    capsys.readouterr()
    assert main(["simulate", "layouts/three_tank.toml", "--out", str(tmp_path / "b"), "--schedule", str(bad)]) == 2
    err = capsys.readouterr().err
    assert "no zone with this id" in err and "Traceback" not in err


def test_simulate_refuses_to_overwrite_an_input(tmp_path, capsys):
    # a schedule file named like an output, in the output folder, is never overwritten
    sched = tmp_path / "timeseries.csv"
    sched.write_text("period_start_h,zone,airflow_Sm3_h\n")
    assert main(["simulate", "layouts/three_tank.toml", "--out", str(tmp_path), "--schedule", str(sched)]) == 2
    assert "would overwrite an input" in capsys.readouterr().err
    assert sched.read_text() == "period_start_h,zone,airflow_Sm3_h\n"


def test_simulate_never_overwrites_the_influent_csv(tmp_path, capsys, monkeypatch):
    # the layout's influent CSV counts as an input, found in the layout's folder
    root = Path(__file__).resolve().parents[2]
    csv_text = (root / "layouts" / "demo_influent.csv").read_text()
    (tmp_path / "timeseries.csv").write_text(csv_text)
    text = (root / "layouts" / "demo.toml").read_text().replace('csv = "demo_influent.csv"', 'csv = "timeseries.csv"')
    (tmp_path / "demo.toml").write_text(text)
    monkeypatch.chdir(root)
    assert main(["simulate", str(tmp_path / "demo.toml"), "--out", str(tmp_path)]) == 2
    assert "would overwrite an input" in capsys.readouterr().err
    assert (tmp_path / "timeseries.csv").read_text() == csv_text


# --- the schedule: every (period, zone) pair once, in Sm3/h ----------------------------------------
def _three_schedule(tmp_path, factor: float = 1.0, drop: int = 0, name: str = "schedule.csv"):
    from airtaper.layout import load_layout
    lay = load_layout("layouts/three_tank.toml")
    rows = []
    for k in range(lay.horizon.n_periods):
        for z in lay.zones:
            lo, hi = lay.zone_airflow_range_Sm3_h(z)
            rows.append({"period_start_h": k * lay.horizon.period_h, "zone": z.id,
                         "airflow_Sm3_h": round(factor * 0.5 * (lo + hi), 3)})
    path = tmp_path / name
    pd.DataFrame(rows[:len(rows) - drop] if drop else rows).to_csv(path, index=False)
    return path


def test_schedule_missing_pairs_is_an_error_naming_them(tmp_path, capsys):
    sched = _three_schedule(tmp_path, drop=2)
    out = tmp_path / "out"
    assert main(["simulate", "layouts/three_tank.toml", "--out", str(out), "--schedule", str(sched)]) == 2
    assert capsys.readouterr().err.splitlines() == [
        f"error: {sched}: rows: no airflow for 2 (period, zone) pair(s): 23 h T2; 23 h T3 (expected one row per "
        "period for every zone with diffusers)"]
    assert not out.exists() and sorted(p.name for p in tmp_path.iterdir()) == ["schedule.csv"]


def test_schedule_in_cubic_metres_per_minute_is_refused(tmp_path, capsys):
    sched = _three_schedule(tmp_path, factor=1 / 60)
    assert main(["simulate", "layouts/three_tank.toml", "--out", str(tmp_path / "o"), "--schedule", str(sched)]) == 2
    assert capsys.readouterr().err.splitlines() == [
        f"error: {sched}: column airflow_Sm3_h: every airflow is below its zone's minimum: was the schedule typed in "
        "Sm3/min? (got '14.08-22.75', expected Sm3/h (x 60: 845-1365 Sm3/h))"]


def test_schedule_pair_listed_twice_and_words_in_numbers(tmp_path, capsys):
    sched = _three_schedule(tmp_path)
    text = sched.read_text().splitlines()
    text.append(text[1])
    text.append("abc,T1,5")
    sched.write_text("\n".join(text) + "\n")
    assert main(["simulate", "layouts/three_tank.toml", "--out", str(tmp_path / "o"), "--schedule", str(sched)]) == 2
    assert capsys.readouterr().err.splitlines() == [
        f"error: {sched}: row 74: period 0 h, zone T1 listed twice (got 'also row 2', expected one row per period "
        "and zone)",
        f"error: {sched}: row 75, column period_start_h: not the start of a period (got 'abc', expected a multiple "
        "of 1 h below 24)"]


def test_schedule_given_as_a_device_is_refused(tmp_path, capsys):
    assert main(["simulate", "layouts/three_tank.toml", "--out", str(tmp_path / "o"), "--schedule", "/dev/zero"]) == 2
    assert capsys.readouterr().err.splitlines() == [
        "error: /dev/zero: (file): cannot read the schedule: not a regular file (got 'a character device', expected a "
        "regular file)"]


# --- the output folder: checked first, one set, provenance ------------------------------------------
def test_summary_names_inputs_and_version_and_a_rerun_needs_overwrite(tmp_path, capsys):
    import hashlib

    from airtaper import __version__

    out = tmp_path / "sim"
    sched = _three_schedule(tmp_path)
    args = ["simulate", "layouts/three_tank.toml", "--out", str(out), "--schedule", str(sched), "--max-days", "1"]
    assert main(args) == 0
    summary = json.loads((out / "summary.json").read_text())
    assert summary["airtaper_version"] == __version__
    assert summary["inputs"] == [
        {"path": "layouts/three_tank.toml",
         "sha256": hashlib.sha256(Path("layouts/three_tank.toml").read_bytes()).hexdigest()},
        {"path": str(sched), "sha256": hashlib.sha256(sched.read_bytes()).hexdigest()}]
    before = {p.name: p.read_bytes() for p in out.iterdir()}
    capsys.readouterr()
    assert main(args) == 2  # the earlier run is kept
    assert "--overwrite" in capsys.readouterr().err
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before
    assert main(args + ["--overwrite"]) == 0
    after = {p.name: p.read_bytes() for p in out.iterdir()}
    assert sorted(after) == sorted(before) and after["timeseries.csv"] == before["timeseries.csv"]
    rerun = json.loads(after["summary.json"])
    assert {k: v for k, v in rerun.items() if k != "seconds"} == {k: v for k, v in summary.items() if k != "seconds"}


def test_out_naming_a_file_is_refused_before_the_simulation(tmp_path, capsys, monkeypatch):
    import airtaper.simulate as simulate_pkg

    def no_run(*args, **kwargs):
        raise AssertionError("the simulation ran before the output folder was checked")

    monkeypatch.setattr(simulate_pkg, "periodic", no_run)
    target = tmp_path / "results.csv"
    target.write_text("keep\n")
    assert main(["simulate", "layouts/three_tank.toml", "--out", str(target)]) == 2
    assert capsys.readouterr().err.splitlines() == [
        f"error: {target}: --out: names an existing file, not a folder (expected a folder path (new, or an earlier "
        "run))"]
    assert target.read_text() == "keep\n"


@pytest.mark.parametrize("exc,code", [(KeyboardInterrupt, 130), (RuntimeError, 1)])
def test_interrupted_run_leaves_the_earlier_set(tmp_path, capsys, monkeypatch, exc, code):
    import airtaper.cli.simulate as sim_cli

    out = tmp_path / "sim"
    args = ["simulate", "layouts/three_tank.toml", "--out", str(out), "--max-days", "1"]
    assert main(args) == 0
    before = {p.name: p.read_bytes() for p in out.iterdir()}
    real = sim_cli.write_csv_atomic
    written = []

    def second_file_fails(path, frame, **kw):
        written.append(path)
        if len(written) == 2:
            raise exc("stopped midway")
        return real(path, frame, **kw)

    monkeypatch.setattr(sim_cli, "write_csv_atomic", second_file_fails)
    monkeypatch.delenv("AIRTAPER_DEBUG", raising=False)
    assert main(args + ["--overwrite", "--do-setpoint", "1.0"]) == code
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before  # the old set, whole
    assert sorted(p.name for p in tmp_path.iterdir()) == ["sim"]  # no staging folder left


@pytest.mark.parametrize("option,value,expected", [
    ("--max-days", "0", "--max-days: out of range (got 0, expected 1 to 365 days)"),
    ("--max-days", "100000000000000000000", "--max-days: out of range (got 1e+20, expected 1 to 365 days)"),
    ("--tol", "nan", "--tol: out of range (got nan, expected 0 < tol < 1)"),
    ("--do-setpoint", "inf", "--do-setpoint: out of range (got inf, expected 0 < setpoint < 20 mg/L)"),
])
def test_command_line_numbers_are_checked_before_anything(tmp_path, capsys, option, value, expected):
    assert main(["simulate", "layouts/three_tank.toml", "--out", str(tmp_path / "o"), option, value]) == 2
    assert capsys.readouterr().err == f"error: <command line>: {expected}\n"
    assert not (tmp_path / "o").exists()


@pytest.mark.slow
@pytest.mark.parametrize("sig", ["SIGTERM", "SIGINT"])
def test_a_signal_during_a_run_leaves_the_old_set_or_the_new_one(tmp_path, sig):
    import signal
    import subprocess
    import sys
    import time

    out = tmp_path / "sim"
    base = [sys.executable, "-m", "airtaper", "simulate", "layouts/three_tank.toml", "--out", str(out)]
    subprocess.run(base + ["--max-days", "1"], check=True, capture_output=True, timeout=300)
    old = {p.name: p.read_bytes() for p in out.iterdir()}
    proc = subprocess.Popen(base + ["--overwrite", "--do-setpoint", "0.7", "--max-days", "30"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    deadline = time.monotonic() + 240
    while not any(p.name.startswith(".sim.airtaper-staging-") for p in tmp_path.iterdir()):  # the run is under way
        assert proc.poll() is None and time.monotonic() < deadline, proc.stderr.read()
        time.sleep(0.05)
    proc.send_signal(getattr(signal, sig))
    _, err = proc.communicate(timeout=300)
    now = {p.name: p.read_bytes() for p in out.iterdir()}
    assert sorted(p.name for p in tmp_path.iterdir()) == ["sim"]  # no staging folder left
    if proc.returncode == 0:  # the run finished before the signal: the whole new set
        assert sorted(now) == sorted(old) and now != old
    else:
        assert proc.returncode == 128 + getattr(signal, sig), err
        assert now == old  # the earlier run, whole
        assert b"Traceback" not in err


def test_a_setpoint_the_grid_cannot_hold_is_said_with_zone_and_hours(tmp_path, capsys):
    """The demo with a quarter of Z2's diffusers under --do-setpoint 2: Z2 runs at full air below 2 mg/L."""
    demo = Path("layouts/demo.toml")
    (tmp_path / "short.toml").write_text(demo.read_text().replace("count = 800", "count = 200"))
    (tmp_path / "demo_influent.csv").write_bytes((demo.parent / "demo_influent.csv").read_bytes())
    out = tmp_path / "sim"
    assert main(["simulate", str(tmp_path / "short.toml"), "--out", str(out), "--do-setpoint", "2"]) == 0
    err = capsys.readouterr().err
    assert "WARNING: zone Z2 cannot hold its DO setpoint of 2 mg/L" in err and "at full air" in err
    summary = json.loads((out / "summary.json").read_text())
    held = summary["setpoint_not_held"]
    assert held and all(h["zone"] == "Z2" and h["do_min_mg_L"] < 1.95 for h in held)
    assert all(0.0 <= h["start_h"] < 24.0 and 0.0 < h["end_h"] <= 24.0 for h in held)
