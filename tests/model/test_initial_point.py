"""The model initialiser: a start that converges on layered plants, from any start, with plain messages."""

import dataclasses

import numpy as np
import pyomo.environ as pyo
import pytest

from airtaper import simulate
from airtaper.errors import ModelError
from airtaper.layout.bsm1 import BSM1_SETTLING
from airtaper.model import build_steady_model, initialise_steady

from .conftest import DEMO_AIRFLOW


def _layered(layout, area_m2=1200.0):
    clar = dataclasses.replace(layout.clarifier, kind="layered", area_m2=area_m2, height_m=4.0, layers=10,
                               feed_layer=5, settling=BSM1_SETTLING)
    return dataclasses.replace(layout, clarifier=clar)


@pytest.fixture(scope="module")
def demo_layered(demo_layout):
    return _layered(demo_layout)


def test_demo_with_a_layered_clarifier_initialises_to_the_simulators_steady_state(demo_layered):
    # It used to end in 'singular Jacobian' or an oscillating blanket. The independent simulator
    # (hard min of the settling fluxes, its own equations) is the reference: the smoothing of the
    # model's clarifier moves the steady state far below 1e-3.
    m = build_steady_model(demo_layered, airflow=DEMO_AIRFLOW)
    report = initialise_steady(m)
    assert report.converged and report.residual_max < 1e-10
    ref = simulate.steady_state(demo_layered, airflow_Sm3_h=DEMO_AIRFLOW)
    for i, z in enumerate(m.ZONES):
        for c in ("XBH", "XBA", "XI", "SNH", "SNO"):
            got, want = m.conc[1, z, c].value, float(ref.zones[c].iloc[i])
            assert got == pytest.approx(want, rel=1e-3, abs=1e-2), (z, c)
    for layer in m.LAYERS:
        got, want = m.settler_tss[1, layer].value, float(ref.layers["tss_mg_L"].iloc[layer - 1])
        assert got == pytest.approx(want, rel=2e-3, abs=0.1), layer


@pytest.mark.slow
def test_bsm1_model_initialises_to_the_same_state_from_perturbed_starts(bsm1_layered, bsm1_steady):
    # every concentration scaled by a random factor in [0.5, 2] (fixed seed): the same root to 1e-6
    ref = {k: v.value for k, v in bsm1_steady.conc.items()}
    rng = np.random.default_rng(3)
    for _ in range(3):
        m = build_steady_model(bsm1_layered)
        initialise_steady(m)
        for v in list(m.conc.values()) + list(m.settler_conc.values()):
            if not v.fixed:
                v.set_value(v.value * rng.uniform(0.5, 2.0))
        initialise_steady(m, sequential=False)
        worst = max(abs(v.value - ref[k]) / max(abs(ref[k]), 1e-3) for k, v in m.conc.items())
        assert worst < 1e-6


def test_failure_message_is_plain_words(demo_layered):
    m = build_steady_model(demo_layered, airflow=DEMO_AIRFLOW)
    with pytest.raises(ModelError) as err:
        initialise_steady(m, max_ptc_steps=3)
    text = str(err.value)
    assert text.startswith("the train model's steady state was not found")
    assert "InitReport" not in text and "(" in text and "pseudo time" in text
    assert pyo.value(m.conc[1, "Z2", "XBH"]) > 0.0


def test_settler_velocities_solve_their_own_definitions(bsm1_layered):
    # The numpy evaluation (initial_point.settler_velocities) against the model's constraint
    # w_l X_l = J_l (model/clarifier.py) and Pyomo's own per-interface solve of it, on layer profiles
    # that cross every branch: thin layers above the feed (threshold rule), a blanket below it (the
    # flux cap), layers near the flux peak; perturbed solids (fixed seed) so no profile is special.
    from pyomo.util.calc_var_value import calculate_variable_from_constraint

    from airtaper.model.initial_point import sequential_pass, set_settler_velocities

    m = build_steady_model(bsm1_layered)
    sequential_pass(m)
    rng = np.random.default_rng(11)
    t = m.STEPS.first()
    base = np.array([m.settler_tss[t, layer].value for layer in m.LAYERS])
    profiles = [base, np.geomspace(5.0, 12000.0, len(base)), np.full(len(base), 356.1)]
    profiles += [base * rng.uniform(0.5, 2.0, len(base)) for _ in range(4)]
    for tss in profiles:
        for layer, x in zip(m.LAYERS, tss):
            m.settler_tss[t, layer].set_value(float(x))
        set_settler_velocities(m, t)
        got = np.array([m.settler_velocity[t, layer].value for layer in m.INTERFACES])
        for layer in m.INTERFACES:
            con = m.settler_flux_definition[t, layer]
            flux = m.settler_tss[t, layer].value * got[layer - 1]
            assert abs(pyo.value(con.body) - pyo.value(con.upper)) <= 1e-9 * max(abs(flux), 1.0), layer
        for layer in m.INTERFACES:
            m.settler_velocity[t, layer].set_value(0.0)
            calculate_variable_from_constraint(m.settler_velocity[t, layer], m.settler_flux_definition[t, layer])
        want = np.array([m.settler_velocity[t, layer].value for layer in m.INTERFACES])
        np.testing.assert_allclose(got, want, rtol=1e-10, atol=1e-12)
