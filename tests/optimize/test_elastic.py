"""Wording and grouping of the elastic findings (no solver)."""

from __future__ import annotations

from airtaper.optimize.elastic import _amount, _runs, _sentence
from airtaper.optimize.problem import LIMIT_GROUPS

GROUPS = {g.name: g for g in LIMIT_GROUPS}


def test_consecutive_periods_form_one_run():
    assert _runs([5, 3, 4, 9, 11, 10, 1]) == [(1, 1), (3, 5), (9, 11)]
    assert _runs([]) == []


def test_sentences_name_the_zone_and_the_amount():
    assert _sentence(GROUPS["diffuser_max"], "Z1", _amount("fraction", 0.14), None) == \
        "zone Z1 needs 14 % more air than its diffusers pass"
    assert "DO minimum of 2 mg/L: short by up to 0.35 mg/L" in _sentence(GROUPS["do_min"], "Z2", _amount("mg/L", 0.35), 2.0)
    assert _amount("kPa", 3.26) == "3.3 kPa"
    assert "blowers" in _sentence(GROUPS["blower_max"], None, "5 %", None)


def test_every_limit_group_has_a_sentence():
    for g in LIMIT_GROUPS:
        text = _sentence(g, "Z9", "1 %", 1.0)
        assert not text.startswith(g.text + ":"), g.name
