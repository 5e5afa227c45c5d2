"""Wording and grouping of the elastic findings, their check against a known schedule; the elastic solve on a zone
short of diffusers."""

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


def _known_day(plant, nh4_mean=0.8, z6_low=1.2, z6_high=2.2, period_means=None):
    """A stand-in re-simulated day of the demo (24 hourly periods): every zone's DO at 1.5 mg/L, Z6's lowest and
    highest DO ``z6_low``/``z6_high`` in every period, the effluent figures given."""
    import pandas as pd
    from types import SimpleNamespace

    rows = []
    for z in plant.zone_ids:
        for p in range(plant.n_periods):
            lo, hi = (z6_low, z6_high) if z == "Z6" else (1.5, 1.5)
            rows.append({"period": p, "zone": z, "do_min_mg_L": lo, "do_max_mg_L": hi})
    means = period_means if period_means is not None else [2.0] * plant.n_periods
    return SimpleNamespace(do_extremes=pd.DataFrame(rows),
                           figures={"nh4_mean_mg_L": nh4_mean, "tn_mean_mg_L": 10.0, "nh4_period_mean_mg_L": means})


def _finding(limit, amount, unit="mg/L", zone=None, spans=((0.0, 24.0),)):
    return {"limit": limit, "zone": zone, "amount": amount, "unit": unit, "message": f"{limit} finding",
            "spans": [{"start_h": a, "end_h": b, "amount": amount, "unit": unit} for a, b in spans]}


def test_a_finding_a_verified_schedule_contradicts_is_dropped(demo):
    """The demo's limits (layouts/demo.toml): NH4-N daily mean 1.0, largest period mean 3.0 mg/L; Z6's DO
    1.0-2.5 mg/L. A verified schedule whose NH4-N mean is 0.8 mg/L contradicts "the NH4-N mean stays 0.34 mg/L
    above"; one whose Z6 DO is 1.2-2.2 mg/L contradicts "Z6 short by 0.31 mg/L"; equipment findings are
    contradicted by any converged solve of the same limits. A finding the schedule does not contradict stays."""
    from airtaper.optimize.elastic import KnownSchedule, check_findings
    from airtaper.plant import resolve_plant

    plant = resolve_plant(demo)
    known = KnownSchedule("the coarse schedule", _known_day(plant), verified=True)
    nh4 = _finding("nh4_mean", 0.34)
    short = _finding("do_min", 0.31, zone="Z6", spans=((10.0, 12.0),))
    turndown = _finding("blower_min", 0.14, unit="fraction", spans=((0.0, 8.0),))
    kept, dropped = check_findings(plant, [nh4, short, turndown], known)
    assert kept == [] and [f["limit"] for f in dropped] == ["nh4_mean", "do_min", "blower_min"]
    assert all(f["contradicted_by"] == "the coarse schedule" for f in dropped)
    # the known schedule breaks the very limit (NH4-N mean 1.4 mg/L, 40 % above, beyond the 2 % tolerance):
    # nothing contradicts the finding
    kept, dropped = check_findings(plant, [nh4], KnownSchedule("x", _known_day(plant, nh4_mean=1.4), True))
    assert kept == [nh4] and dropped == []
    # Z6 short in the known schedule too, but only from 08:00 to 12:00 (periods 9-12): outside those hours
    # the finding stands, inside it is contradicted
    day = _known_day(plant)
    day.do_extremes.loc[(day.do_extremes.zone == "Z6") & day.do_extremes.period.between(8, 11), "do_min_mg_L"] = 0.6
    known = KnownSchedule("x", day, True)
    assert check_findings(plant, [short], known)[0] == [short]
    early = _finding("do_min", 0.31, zone="Z6", spans=((2.0, 3.0),))
    assert check_findings(plant, [early], known)[1][0]["limit"] == "do_min"
    # a span through midnight (22:00-02:00) is read as periods 23, 24, 1 and 2
    night = _finding("nh4_max", 0.5, spans=((22.0, 2.0),))
    means = [2.0] * 24
    means[0] = 3.4  # 01:00 breaks the largest period mean in the known schedule: no contradiction
    assert check_findings(plant, [night], KnownSchedule("x", _known_day(plant, period_means=means), True))[0] == [night]
    means[0], means[12] = 2.0, 3.4  # the breach moved to 13:00, outside the span: contradicted
    assert check_findings(plant, [night], KnownSchedule("x", _known_day(plant, period_means=means), True))[1]


def test_a_finding_an_unverified_schedule_meets_is_kept_with_the_trade_named(demo):
    """Blower B3 out on the demo: the coarse schedule met the blowers' turndown at night while Z6's DO left its
    maximum; the finding that the blowers need more turndown is a trade between limits, and says so."""
    from airtaper.optimize.elastic import KnownSchedule, check_findings, trade_message
    from airtaper.plant import resolve_plant

    plant = resolve_plant(demo)
    broken = ["zone Z6: DO leaves its range (1.0..2.5 mg/L) by 1.197 mg/L"]
    known = KnownSchedule("the schedule solved on 4-hour model steps", _known_day(plant, z6_high=3.7), False, broken)
    turndown = _finding("blower_min", 0.14, unit="fraction", spans=((0.0, 8.0),))
    over = _finding("do_max", 0.21, zone="Z6", spans=((8.0, 9.0),))
    kept, dropped = check_findings(plant, [turndown, over], known)
    assert dropped == [] and kept[1] == over  # Z6 over its maximum in the known schedule too: as it was
    assert kept[0] == dict(turndown, trade_with=broken)
    assert trade_message(kept, known) == (
        "a trade between limits, not each a limit that cannot be met: the schedule solved on 4-hour model steps "
        "meets the blower turndown in those findings' hours, breaking zone Z6: DO leaves its range (1.0..2.5 mg/L) "
        "by 1.197 mg/L")
    assert trade_message([over], known) is None
    # a known schedule that did not meet the equipment limits contradicts no equipment finding
    known.meets_equipment = False
    assert check_findings(plant, [turndown], known)[0] == [turndown]
    assert check_findings(plant, [turndown], None) == ([turndown], [])
