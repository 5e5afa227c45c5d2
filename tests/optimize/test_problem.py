"""The problem attached to the cyclic model: kLa re-statement, limits present, objective at the start (no solver)."""

from __future__ import annotations

import itertools

import numpy as np
import pyomo.environ as pyo
import pytest

from airtaper.model.train import build_cyclic_model
from airtaper.plant import resolve_plant
from airtaper.optimize.dispatch import evaluate
from airtaper.optimize.problem import LIMIT_GROUPS, attach_problem, max_power_line_kW, settings_for
from airtaper.optimize.staging import apply_dispatch, model_air_state
from airtaper.physics.blower import blower_power_kW


@pytest.fixture
def attached(three_tank_6):
    m = build_cyclic_model(three_tank_6, airflow={"T1": 900.0, "T2": 600.0, "T3": 450.0})
    before = {k: pyo.value(v) for k, v in m.kla_per_d.items()}
    problem = attach_problem(m, settings_for(three_tank_6, 1000.0))
    return m, before, problem


def python_attributes(block) -> set[str]:
    """Names set on a Pyomo block that are not its components (Pyomo's own attributes start with "_")."""
    components = {c.local_name for c in block.component_objects(descend_into=False)}
    return {k for k in vars(block) if not k.startswith("_") and k != "doc"} - components


def test_the_block_holds_pyomo_components_only(attached):
    """What the optimiser keeps beside the block lives on the Problem, not on m.opt."""
    m, _, problem = attached
    assert python_attributes(m.opt) == set()
    assert problem.block is m.opt and problem.m is m
    assert problem.reference == 1000.0 and problem.objective == "energy"
    assert problem.machines and problem.staged  # the three-tank layout has blowers in service
    assert set(problem.effluent_weights) == set(m.PERIODS) and problem.swing_states is None
    # the helper finds a Python object put on a block
    m.opt.leftover = {"a": 1}
    try:
        assert python_attributes(m.opt) == {"leftover"}
    finally:
        del m.opt.leftover


def test_kla_on_the_count_parameter_equals_the_models_own(attached):
    m, before, _ = attached
    for k, v in m.kla_per_d.items():
        assert pyo.value(v) == pytest.approx(before[k], rel=1e-12)


def test_more_diffusers_raise_kla_at_the_same_airflow(attached):
    """SOTE falls with airflow per diffuser and rises with density (the fitted curve's exponents)."""
    m, before, _ = attached
    m.diffuser_count["T1"] = 500.0
    assert pyo.value(m.kla_per_d["T1", 1]) > before["T1", 1]
    assert pyo.value(m.kla_per_d["T2", 1]) == pytest.approx(before["T2", 1], rel=1e-12)


def test_every_limit_has_its_slack_fixed_at_zero(attached, three_tank_6):
    m, _, _ = attached
    b = m.opt
    for g in LIMIT_GROUPS:
        assert b.component(g.name) is not None or g.name in ("blower_max", "blower_min", "pressure_max")
        assert all(v.fixed and v.value == 0.0 for v in b.component(g.slack).values())
    assert not b.tn_mean.active  # the three-tank layout sets no TN limit
    assert b.nh4_mean.active and pyo.value(b.nh4_mean_limit) == three_tank_6.limits.nh4_mean_mg_L


def test_staged_power_lines_match_the_dispatch_and_the_pinned_formula(attached, three_tank_6):
    """With a set of machines fixed, the power epigraph's largest line is the least-power split of the set,
    each machine at the pinned isentropic formula with its own efficiency; the relaxed envelope is below
    every set's power."""
    m, _, problem = attached
    b = m.opt
    side = resolve_plant(three_tank_6).air
    sched = {z: [m.airflow_Sm3_h[z, p].value for p in m.PERIODS] for z in b.ZONES}
    figs = side.schedule_figures(sched)
    for p in m.PERIODS:
        b.header_gauge_kPa[p].set_value(float(figs["header_gauge_kPa"][p - 1]))
    state = model_air_state(problem)
    q, d, w = state["demand_Sm3_h"], state["discharge_gauge_kPa"], state["kw_per_equivalent"]
    n = len(q)
    machines = problem.machines
    subsets = [np.array(bits, dtype=bool) for bits in itertools.product((False, True), repeat=len(machines))
               if any(bits)]
    envelope = [max_power_line_kW(b, p) for p in m.PERIODS]
    for on in subsets:
        lo = sum(mm.airflow_min_Sm3_h for mm, r in zip(machines, on) if r)
        hi = sum(mm.airflow_max_Sm3_h for mm, r in zip(machines, on) if r)
        if not all(lo <= x <= hi for x in q):
            continue
        dp = evaluate(machines, np.repeat(on[:, None], n, axis=1), q, d, w, three_tank_6.horizon.period_h)
        apply_dispatch(m, dp)
        for i, p in enumerate(m.PERIODS):
            assert max_power_line_kW(b, p) == pytest.approx(dp.power_kW[:, i].sum(), rel=1e-10)
            assert envelope[i] <= dp.power_kW[:, i].sum() * (1 + 1e-12)
            for j, mm in enumerate(machines):  # each machine: the pinned formula at its efficiency
                if on[j]:
                    qj = dp.airflow_Sm3_h[j, i]
                    t_in = three_tank_6.inlet_air.temperature_C[i]
                    assert dp.power_kW[j, i] == pytest.approx(blower_power_kW(
                        qj, t_in, side.inlet_pressure_kPa, side.site_pressure_kPa + d[i],
                        mm.curve.efficiency(qj)), rel=1e-10)
        assert pyo.value(b.energy_kWh_per_day) == pytest.approx(
            dp.power_kW.sum() * three_tank_6.horizon.period_h, rel=1e-10)
