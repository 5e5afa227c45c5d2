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
