"""`airtaper simulate`: outputs, schedule input and bad input handling."""

import json
from pathlib import Path

import pandas as pd

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
