"""The design comparison in words (airtaper.report.design): payback and periods as people read them."""

from __future__ import annotations

from airtaper.optimize.design import payback_text, simple_payback_years
from airtaper.report.design import _payback_words, _periods_text


def _comparison(extra: float, saving: float, **more) -> dict:
    return {"payback_years": simple_payback_years(extra, saving), "payback": payback_text(extra, saving), **more}


def test_a_payback_in_years_reads_as_years():
    assert _payback_words(_comparison(10_000.0, 2_500.0), "simple payback") == "simple payback 4.0 years"


def test_no_payback_says_why_instead_of_never():
    dearer = _payback_words(_comparison(-5_000.0, -800.0), "payback")
    assert dearer.startswith("no payback: the design is cheaper to build but dearer to run") and "never" not in dearer
    nothing = _payback_words(_comparison(5_000.0, 0.0), "payback")
    assert nothing == "no payback: the design costs more to build and saves nothing a year"
    assert _payback_words({"payback_years": None}, "simple payback") == "no payback"  # a summary from before


def test_no_extra_capital_and_no_extra_cost_needs_no_payback():
    assert _payback_words(_comparison(0.0, 0.0), "payback").startswith("payback none needed")


def test_periods_name_each_day_when_the_days_differ():
    assert _periods_text({"periods": 24, "periods_by_day": {"dry": 24, "wet": 24}}) == "24 periods a day"
    assert _periods_text({"periods": 12, "periods_by_day": {"dry": 12, "storm": 24}}) == \
        "periods a day: dry 12, storm 24"
    assert _periods_text({"periods": 12}) == "12 periods a day"
