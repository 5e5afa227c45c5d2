"""The problem attached to the cyclic model: kLa re-statement, limits present, objective at the start (no solver)."""

from __future__ import annotations

import pyomo.environ as pyo
import pytest

from airtaper.model.train import build_cyclic_model
from airtaper.optimize.airside import AirSide
from airtaper.optimize.problem import LIMIT_GROUPS, attach_problem, settings_for


@pytest.fixture
def attached(three_tank_6):
    m = build_cyclic_model(three_tank_6, airflow={"T1": 900.0, "T2": 600.0, "T3": 450.0})
    before = {k: pyo.value(v) for k, v in m.kla_per_d.items()}
    attach_problem(m, three_tank_6, settings_for(three_tank_6, 1000.0))
    return m, before


def test_kla_on_the_count_parameter_equals_the_models_own(attached):
    m, before = attached
    for k, v in m.kla_per_d.items():
        assert pyo.value(v) == pytest.approx(before[k], rel=1e-12)


def test_more_diffusers_raise_kla_at_the_same_airflow(attached):
    """SOTE falls with airflow per diffuser and rises with density (the fitted curve's exponents)."""
    m, before = attached
    m.opt.diffuser_count["T1"] = 500.0
    assert pyo.value(m.kla_per_d["T1", 1]) > before["T1", 1]
    assert pyo.value(m.kla_per_d["T2", 1]) == pytest.approx(before["T2", 1], rel=1e-12)


def test_every_limit_has_its_slack_fixed_at_zero(attached, three_tank_6):
    m, _ = attached
    b = m.opt
    for g in LIMIT_GROUPS:
        assert b.component(g.name) is not None or g.name in ("blower_max", "blower_min", "pressure_max")
        assert all(v.fixed and v.value == 0.0 for v in b.component(g.slack).values())
    assert not b.tn_mean.active  # the three-tank layout sets no TN limit
    assert b.nh4_mean.active and pyo.value(b.nh4_mean_limit) == three_tank_6.limits.nh4_mean_mg_L


def test_energy_expression_matches_the_air_side_at_the_start(attached, three_tank_6):
    m, _ = attached
    b = m.opt
    side = AirSide(three_tank_6)
    sched = {z: [m.airflow_Sm3_h[z, p].value for p in m.PERIODS] for z in b.ZONES}
    figs = side.schedule_figures(sched)
    for p in m.PERIODS:
        b.header_kPa[p].set_value(float(figs["header_kPa"][p - 1]))
    assert pyo.value(b.energy_kWh_per_day) == pytest.approx(figs["energy_kWh_per_day"], rel=1e-10)
    assert pyo.value(b.objective) == pytest.approx(figs["energy_kWh_per_day"] / 1000.0 + 0.0, rel=1e-10)
