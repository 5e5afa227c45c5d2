"""Wording and grouping of the elastic findings; the elastic solve on a zone short of diffusers."""

from __future__ import annotations

import pytest

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


def test_every_span_is_listed_with_its_own_size():
    from airtaper.optimize.elastic import _merge_touching, _wrap_midnight

    spans = [{"start_h": 0.0, "end_h": 2.0, "amount": 0.1}, {"start_h": 2.0, "end_h": 3.0, "amount": 0.3},
             {"start_h": 10.0, "end_h": 12.0, "amount": 0.2}, {"start_h": 22.0, "end_h": 24.0, "amount": 0.05}]
    out = _wrap_midnight(_merge_touching(spans))
    assert out == [{"start_h": 22.0, "end_h": 3.0, "amount": 0.3}, {"start_h": 10.0, "end_h": 12.0, "amount": 0.2}]


@pytest.mark.solver
@pytest.mark.slow
def test_elastic_solve_does_not_over_aerate_other_zones(demo):
    """A zone short of diffusers: the elastic optimum names it, sized at normal DO elsewhere (no zone
    is pushed above its normal DO to carry oxygen back through the recycles)."""
    from dataclasses import replace

    import pyomo.environ as pyo

    from airtaper.errors import EXIT_INFEASIBLE
    from airtaper.optimize.elastic import normal_do_mg_L
    from airtaper.optimize.horizon import with_periods
    from airtaper.optimize.diurnal import StudyOptions, run_optimization

    lay = with_periods(demo, 6, steps_per_period=2)
    lay = replace(lay, zones=tuple(replace(z, grid=replace(z.grid, count=200)) if z.id == "Z2" else z
                                   for z in lay.zones))
    res = run_optimization(lay, StudyOptions(marginal=False, prescreen=False))
    s = res.summary
    assert res.exit_code == EXIT_INFEASIBLE and s["saving_percent"] is None
    found = s["infeasibility"]
    assert found and all(f["zone"] == "Z2" for f in found)  # no blower or pressure finding, no other zone
    assert all(f["spans"] for f in found)
    m = res.study.m
    normal = normal_do_mg_L(lay)
    for z in m.opt.ZONES:
        if z == "Z2":
            continue
        lo = lay.zone_airflow_range_Sm3_h(lay.zone(z))[0]
        for t in m.STEPS:
            p = m.period_of_step[t]
            if pyo.value(m.airflow_Sm3_h[z, p]) > lo * 1.01:  # air above the zone's minimum is a choice
                assert pyo.value(m.conc[t, z, "SO"]) <= normal[z] + 0.05, (z, t)
