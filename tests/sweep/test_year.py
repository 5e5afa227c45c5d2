"""The year's arithmetic: months read from a table, days weighted, demand charges billed monthly."""

from __future__ import annotations

import pytest

from airtaper.errors import InputError
from airtaper.sweep.year import MONTH_DAYS, read_months, year_load_days, year_months

HEADER = "month,water_temperature_C,flow_factor,load_factor\n"


def _months(tmp_path, body: str, header: str = HEADER):
    p = tmp_path / "months.csv"
    p.write_text(header + body)
    return p


def _twelve(temp=lambda i: 10.0 + i) -> str:
    return "".join(f"{m},{temp(i)},1.0,1.0\n" for i, m in enumerate(
        ["Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec"]))


def test_a_common_year_has_365_days():
    # Gregorian calendar, common year (no source needed beyond the calendar itself: common practice (no source))
    assert sum(MONTH_DAYS) == 365 and MONTH_DAYS[1] == 28


def test_months_are_read_in_calendar_order_by_name_or_number(tmp_path):
    body = "".join(f"{i},{5.0 + i},1.1,1.2\n" for i in range(12, 0, -1))
    months = read_months(_months(tmp_path, body))
    assert [m.name for m in months][:3] == ["Jan", "Feb", "Mar"]
    assert months[0].values == {"water_temperature_C": 6.0, "flow_factor": 1.1, "load_factor": 1.2}
    assert [m.days for m in months] == list(MONTH_DAYS)


@pytest.mark.parametrize("body, header, line", [
    (_twelve().replace("Mar,12.0", "Mar,x"), HEADER,
     "error: {p}: row 4, column water_temperature_C: must be a number in range (got 'x', expected >= 0 and <= 45)"),
    (_twelve().replace("Dec", "Nov"), HEADER,
     "error: {p}: row 13, column month: month given twice (got 'Nov', expected each month once)"),
    (_twelve().replace("Dec,21.0,1.0,1.0\n", ""), HEADER,
     "error: {p}: column month: missing months (got 'Dec', expected all twelve months)"),
    (_twelve(), "month,water_temperature_C,flow_factor\n",
     "error: {p}: column load_factor: missing column (expected a column of that name)"),
    (_twelve().replace("Jan", "Jnu"), HEADER,
     "error: {p}: row 2, column month: not a month (got 'Jnu', expected Jan .. Dec, or 1 .. 12)"),
])
def test_bad_months_tables_are_one_line_errors(tmp_path, body, header, line):
    p = _months(tmp_path, body, header)
    with pytest.raises(InputError) as exc:
        read_months(p)
    assert str(exc.value.problems[0]) == line.format(p=p)


def _row(e, cost, demand_per_day, peak, ok=True):
    return {"energy_kWh_per_day": e, "cost_per_day": cost, "demand_charge_per_day": demand_per_day,
            "peak_kW": peak, "compliant": ok, "status": "optimal" if ok else "infeasible"}


def test_months_bill_energy_by_days_and_demand_once_per_month_on_its_own_peak(tmp_path):
    months = read_months(_months(tmp_path, _twelve(lambda i: 10.0 if i < 6 else 20.0)))
    rows = {"cold": _row(1000.0, 130.0, 10.0, 50.0), "warm": _row(1200.0, 150.0, 12.0, 60.0, ok=False)}
    per, tot = year_months(months, ["cold"] * 6 + ["warm"] * 6, rows, demand_charge_per_kW=9.0)
    cold_days, warm_days = sum(MONTH_DAYS[:6]), sum(MONTH_DAYS[6:])  # 181 and 184
    assert tot["energy_kWh"] == pytest.approx(1000.0 * cold_days + 1200.0 * warm_days)
    # energy part = the day's cost less its share of the demand charge; demand = rate x the month's peak
    assert tot["energy_cost"] == pytest.approx(120.0 * cold_days + 138.0 * warm_days)
    assert tot["demand_charge"] == pytest.approx(6 * 9.0 * 50.0 + 6 * 9.0 * 60.0)
    assert tot["cost"] == pytest.approx(tot["energy_cost"] + tot["demand_charge"])
    assert tot["compliant_days"] == cold_days and tot["days"] == 365 and tot["peak_kW"] == 60.0
    assert per[0]["energy_kWh"] == 31 * 1000.0 and per[1]["cost"] == pytest.approx(28 * 120.0 + 450.0)


def test_load_days_are_weighted_and_every_month_billed_at_the_top_peak():
    rows = {"avg": _row(1000.0, 130.0, 10.0, 50.0), "peak": _row(1500.0, 200.0, 15.0, 80.0),
            "rare": _row(1400.0, 190.0, 14.0, 95.0)}
    per, tot = year_load_days({"avg": 364.5, "peak": 1.0, "rare": 0.5}, rows, demand_charge_per_kW=9.0)
    assert tot["energy_kWh"] == pytest.approx(364.5 * 1000.0 + 1500.0 + 0.5 * 1400.0)
    assert tot["peak_kW"] == 80.0  # a day standing for less than a day of the year sets no month's peak
    assert tot["demand_charge"] == pytest.approx(12 * 9.0 * 80.0)
    assert tot["cost"] == pytest.approx(364.5 * 120.0 + 185.0 + 0.5 * 176.0 + 12 * 9.0 * 80.0)


def test_a_day_without_a_result_leaves_the_totals_unknown():
    rows = {"a": _row(1000.0, 130.0, 10.0, 50.0), "b": {"status": "bad input", "energy_kWh_per_day": None}}
    _, tot = year_load_days({"a": 300.0, "b": 65.0}, rows, demand_charge_per_kW=None)
    assert tot["energy_kWh"] is None and tot["compliant_days"] == 300.0
