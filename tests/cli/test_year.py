"""`airtaper year`: twelve identical months equal twelve months of one optimised day; errors in one line."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pytest

from airtaper.cli.main import main
from airtaper.errors import EXIT_INPUT, EXIT_OK

ROOT = Path(__file__).resolve().parents[2]
THREE = ROOT / "layouts" / "three_tank.toml"
MONTHS = ["Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec"]


def _layout(tmp_path) -> Path:
    """The three-tank plant on four 6-hour periods, with a tariff that has a demand charge."""
    p = tmp_path / "three.toml"
    p.write_text(THREE.read_text() + """
[horizon]
n_periods = 4
steps_per_period = 2

[tariff]
currency = "EUR"
price_per_kWh = [0.09, 0.12, 0.2, 0.12]
demand_charge_per_kW = 9.0
demand_period_days = 30.0
""")
    return p


@pytest.mark.solver
@pytest.mark.slow
def test_twelve_identical_months_are_twelve_months_of_one_day(tmp_path, capsys):
    lay = _layout(tmp_path)
    months = tmp_path / "months.csv"
    # each month the layout's own day: its water temperature (14 C) and unscaled flow and load
    months.write_text("month,water_temperature_C,flow_factor,load_factor\n"
                      + "".join(f"{m},14.0,1.0,1.0\n" for m in MONTHS))
    out = tmp_path / "year"
    assert main(["year", str(lay), "--months", str(months), "--out", str(out), "--workers", "2", "--quiet"]) \
        == EXIT_OK
    one = tmp_path / "one"
    assert main(["optimize", str(lay), "--out", str(one), "--quiet", "--no-report"]) == EXIT_OK
    capsys.readouterr()
    day = json.loads((one / "summary.json").read_text())
    year = json.loads((out / "year.json").read_text())
    assert year["run_now"] == 1  # equal months share one optimisation
    dp = day["dispatch"]
    tot = year["year"]
    assert tot["days"] == 365
    assert tot["energy_kWh"] == pytest.approx(365 * day["energy_kWh_per_day"], rel=1e-6)
    assert tot["energy_cost"] == pytest.approx(365 * (dp["energy_cost"] + dp["start_costs"]), rel=1e-6)
    assert tot["demand_charge"] == pytest.approx(12 * 9.0 * dp["peak_kW"], rel=1e-6)  # billed monthly on the peak
    assert tot["cost"] == pytest.approx(tot["energy_cost"] + tot["demand_charge"], rel=1e-12)
    assert tot["peak_kW"] == pytest.approx(dp["peak_kW"], rel=1e-6)
    assert tot["compliant_days"] == 365 and day["status"] == "optimal"
    table = pd.read_csv(out / "months.csv")
    assert list(table["month"]) == MONTHS and set(table["day"]) == {"jan"}
    assert [p["energy_kWh"] for p in year["periods"]] == pytest.approx(  # months.csv rounds to 6 digits
        [d * day["energy_kWh_per_day"] for d in (31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31)], rel=1e-6)
    assert (out / "year_months.png").is_file() and (out / "report.html").is_file()


def test_year_with_a_bad_months_table_or_day_is_bad_input(tmp_path, capsys):
    lay = _layout(tmp_path)
    months = tmp_path / "months.csv"
    months.write_text("month,water_temperature_C,flow_factor,load_factor\n"
                      + "".join(f"{m},14.0,1.0,1.0\n" for m in MONTHS[:11]))
    assert main(["year", str(lay), "--months", str(months), "--out", str(tmp_path / "y")]) == EXIT_INPUT
    assert capsys.readouterr().err.strip() == (f"error: {months}: column month: missing months (got 'Dec', "
                                               "expected all twelve months)")
    assert not (tmp_path / "y").exists()
    assert main(["optimize", str(lay), "--day", "winter", "--out", str(tmp_path / "o")]) == EXIT_INPUT
    assert capsys.readouterr().err.strip() == (f"error: {lay}: --day: no load day with that id (got 'winter', "
                                               "expected a layout with [[load_days]])")


@pytest.mark.solver
@pytest.mark.slow
def test_load_days_are_optimised_one_by_one_and_weighted_by_their_days(tmp_path, capsys):
    lay = tmp_path / "days.toml"
    lay.write_text(_layout(tmp_path).read_text() + """
[[load_days]]
id = "usual"
days_per_year = 300.0

[[load_days]]
id = "cold-heavy"
days_per_year = 65.0
water_temperature_C = 10.0
flow_factor = 1.1
load_factor = 1.2
""")
    out = tmp_path / "year"
    assert main(["year", str(lay), "--out", str(out), "--workers", "2", "--quiet"]) == EXIT_OK
    days = {}
    for d in ("usual", "cold-heavy"):
        one = tmp_path / f"one-{d}"
        assert main(["optimize", str(lay), "--day", d, "--out", str(one), "--quiet", "--no-report"]) == EXIT_OK
        days[d] = json.loads((one / "summary.json").read_text())
    capsys.readouterr()
    # a heavier, colder day needs more air than the usual one
    assert days["cold-heavy"]["energy_kWh_per_day"] > days["usual"]["energy_kWh_per_day"]
    tot = json.loads((out / "year.json").read_text())["year"]
    assert tot["energy_kWh"] == pytest.approx(300 * days["usual"]["energy_kWh_per_day"]
                                              + 65 * days["cold-heavy"]["energy_kWh_per_day"], rel=1e-6)
    top = max(d["dispatch"]["peak_kW"] for d in days.values())
    assert tot["demand_charge"] == pytest.approx(12 * 9.0 * top, rel=1e-6)  # every month at the top peak
    assert tot["compliant_days"] == 365
    table = pd.read_csv(out / "results.csv")
    assert list(table["scenario"]) == ["usual", "cold-heavy"]
    assert table["load_factor"].tolist() == [1.0, 1.2]
