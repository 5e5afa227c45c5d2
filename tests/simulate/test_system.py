"""The simulator's right-hand side: vectorisation, sparsity pattern and Jacobian."""

import dataclasses

import numpy as np
import pytest

from airtaper.layout import load_layout
from airtaper.layout.types import Wasting
from airtaper.simulate.plant import PlantData
from airtaper.simulate.run import resolve_aeration
from airtaper.simulate.steady import initial_guess
from airtaper.simulate.system import System


def _setups(bsm1_layered, bsm1_ideal):
    demo = load_layout("layouts/demo.toml")
    srt_layered = dataclasses.replace(bsm1_layered, wasting=Wasting(flow_m3_d=None, srt_d=9.0))
    srt_ideal = dataclasses.replace(bsm1_ideal, wasting=Wasting(flow_m3_d=None, srt_d=9.0))
    return [("bsm1", bsm1_layered, None), ("bsm1-srt", srt_layered, 2.0), ("bsm1-ideal-srt", srt_ideal, None),
            ("demo", demo, 2.0)]


def _dense_fd(system, y, inp):
    f0 = system.rhs(y, inp)
    J = np.empty((system.n, system.n))
    for j in range(system.n):
        h = 1.5e-8 * max(abs(y[j]), 1.0)
        yy = y.copy()
        yy[j] += h
        J[:, j] = (system.rhs(yy, inp) - f0) / (yy[j] - y[j])
    return J


def test_grouped_jacobian_equals_dense_differences(bsm1_layered, bsm1_ideal):
    rng = np.random.default_rng(1)
    for name, lay, sp_ in _setups(bsm1_layered, bsm1_ideal):
        plant = PlantData(lay)
        system = System(plant)
        air, sp = resolve_aeration(lay, None, sp_)
        inp = plant.inputs(3, air[3], sp)
        y = initial_guess(system, inp) * rng.uniform(0.7, 1.3, system.n)
        J = system.jacobian(y, inp).toarray()
        D = _dense_fd(system, y, inp)
        scale = np.maximum(np.abs(D), 1e-3 * np.abs(D).max(axis=1, keepdims=True) + 1e-9)
        assert np.max(np.abs(J - D) / scale) < 1e-4, name
        if system.layered:  # the grouping saves evaluations: 195 states, a third or fewer groups
            assert system.colors().max() + 1 < system.n / 3, name


def test_rhs_is_vectorised_over_columns(bsm1_layered):
    plant = PlantData(bsm1_layered)
    system = System(plant)
    inp = plant.inputs(0)
    rng = np.random.default_rng(2)
    Y = initial_guess(system, inp)[:, None] * rng.uniform(0.5, 1.5, (system.n, 4))
    F = system.rhs(Y, inp)
    for j in range(4):
        np.testing.assert_allclose(F[:, j], system.rhs(Y[:, j], inp), rtol=1e-13, atol=1e-9)


def test_balance_is_an_identity_of_the_rhs(bsm1_layered):
    # conservation of the equations themselves: d(inventory)/dt equals the net external flows
    # at any state, not only at steady state (ASM1 COD and N balances, Henze et al. 1987)
    plant = PlantData(bsm1_layered)
    system = System(plant)
    inp = plant.inputs(0)
    w_cod, w_n = system.inventory_weights(inp)
    rng = np.random.default_rng(3)
    for _ in range(3):
        y = initial_guess(system, inp) * rng.uniform(0.5, 1.5, system.n)
        f = system.rhs(y, inp)
        b = system.balance(y, inp)
        assert (w_cod @ f) == pytest.approx(b["cod_net"], rel=1e-9, abs=1e-6 * b["cod_in"])
        assert (w_n @ f) == pytest.approx(b["n_net"], rel=1e-9, abs=1e-6 * b["n_in"])
