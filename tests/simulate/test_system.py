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


def _states(bsm1_layered, bsm1_ideal, seed):
    """(name, system, inputs of period 4, a state near the initial guess) of every setup."""
    rng = np.random.default_rng(seed)
    for name, lay, sp_ in _setups(bsm1_layered, bsm1_ideal):
        plant = PlantData(lay)
        system = System(plant)
        air, sp = resolve_aeration(lay, None, sp_)
        inp = plant.inputs(3, air[3], sp)
        yield name, system, inp, initial_guess(system, inp) * rng.uniform(0.7, 1.3, system.n)


def test_grouped_jacobian_equals_dense_differences(bsm1_layered, bsm1_ideal):
    for name, system, inp, y in _states(bsm1_layered, bsm1_ideal, 1):
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


# --- the layered clarifier checked physically ----------------------------------------------
def _profile(lay):
    from airtaper.simulate.steady import solve_steady

    plant = PlantData(lay)
    system = System(plant)
    _, sp = resolve_aeration(lay)
    inp = plant.inputs(None, airflow_Sm3_h=None, do_setpoint_mg_L=sp)
    y = solve_steady(system, inp).y
    return system, inp, y, system.clarifier_profile(y, inp)


def test_bsm1_clarifier_inventory_blanket_and_solids_balance(bsm1_layered):
    system, inp, y, c = _profile(bsm1_layered)
    _, info = system.rhs(y, inp, detail=True)
    x = c["tss_g_m3"]
    # inventory: layer volume x concentration (A = 1500 m2, 0.4 m layers: Alex et al. 2008)
    np.testing.assert_allclose(c["solids_kg"], x * 1500.0 * 0.4 / 1000.0, rtol=1e-12)
    assert c["solids_total_kg"] == pytest.approx(c["solids_kg"].sum(), rel=1e-12)
    # the underflow is the bottom layer; at steady state the clarifier passes every gram of
    # solids it receives: Q_f X_f = Q_e X_e + Q_u X_u (solids mass balance)
    assert c["underflow_tss_g_m3"] == pytest.approx(x[-1], rel=1e-12)
    qf = inp.q_forward[-1]
    qe, qu = float(info["q_effluent_m3_d"]), float(info["q_underflow_m3_d"])
    assert qf * c["feed_tss_g_m3"] == pytest.approx(qe * x[0] + qu * x[-1], rel=1e-8)
    # BSM1's settler at its design load is not overloaded: only the bottom layer is above the
    # threshold concentration (3000 g/m3), the loading below its limiting flux
    assert c["blanket_layer"] == 10 and c["blanket_height_m"] == pytest.approx(0.4)
    assert not c["overloaded"] and c["message"] == ""
    assert 0.3 < c["flux_ratio"] < 1.0


def test_small_clarifier_is_reported_overloaded_in_plain_words():
    # The demo plant with a layered clarifier of 250 m2 (an invented undersized one): the steady
    # state exists, with the blanket above the feed layer and solids over the weir, and says so.
    demo = load_layout("layouts/demo.toml")
    from airtaper.layout.bsm1 import BSM1_SETTLING

    clar = dataclasses.replace(demo.clarifier, kind="layered", area_m2=250.0, height_m=4.0, layers=10,
                               feed_layer=5, settling=BSM1_SETTLING)
    system, inp, y, c = _profile(dataclasses.replace(demo, clarifier=clar))
    assert c["overloaded"]
    assert c["blanket_layer"] <= 5
    assert c["message"].startswith("clarifier overloaded at the mean load")
    assert "(" not in c["message"].split(":")[0] and "Profile" not in c["message"]
    assert c["tss_g_m3"][0] > 50.0


def test_rhs_with_balance_carries_the_net_inflows_of_balance(bsm1_layered, bsm1_ideal):
    """The day's integrand (state derivative, net COD and N inflows) is the right-hand side and
    :meth:`System.balance` of the same state, to the last bit."""
    for name, system, inp, y in _states(bsm1_layered, bsm1_ideal, 3):
        z = np.concatenate((y, [5.0, 7.0]))  # the accumulators do not enter their own rates
        out = system.rhs_with_balance(z, inp)
        b = system.balance(y, inp)
        np.testing.assert_array_equal(out[:system.n], system.rhs(y, inp), err_msg=name)
        assert (out[system.n], out[system.n + 1]) == (b["cod_net"], b["n_net"]), name


def test_derived_inputs_follow_a_replaced_waste_flow(bsm1_ideal):
    """What the right-hand side caches of an ``Inputs`` is not carried into a copy with another waste flow
    (the periodic day replaces the waste flow day by day)."""
    plant = PlantData(bsm1_ideal)
    system = System(plant)
    inp = plant.inputs(0)
    y = initial_guess(system, inp)
    q0 = float(system.rhs(y, inp, detail=True)[1]["q_waste_m3_d"])
    other = dataclasses.replace(inp, q_waste=0.5 * q0)
    assert float(system.rhs(y, other, detail=True)[1]["q_waste_m3_d"]) == 0.5 * q0
    assert float(system.rhs(y, inp, detail=True)[1]["q_waste_m3_d"]) == q0


@pytest.mark.parametrize("controlled", [None, {"Z2": 2.0, "Z3": 1.8, "Z4": 1.5}, {"Z2": 2.0, "Z4": 1.5}],
                         ids=["default", "adjacent", "apart"])
def test_one_state_gives_its_column_of_many(bsm1_layered, bsm1_ideal, controlled):
    """The right-hand side of one state (the integrator's call) is its column of a call with many (the grouped
    Jacobian's), DO-controlled zones adjacent (a slice) or apart (an index), on every setup."""
    setups = list(_states(bsm1_layered, bsm1_ideal, 5))
    if controlled is not None:
        demo = load_layout("layouts/demo.toml")
        plant = PlantData(demo)
        system = System(plant)
        air, sp = resolve_aeration(demo, None, controlled)
        inp = plant.inputs(3, air[3], sp)
        setups = [("demo", system, inp, initial_guess(system, inp))]
    rng = np.random.default_rng(6)
    for name, system, inp, y in setups:
        Y = y[:, None] * rng.uniform(0.6, 1.4, (system.n, 3))
        F, info = system.rhs(Y, inp, detail=True)
        for j in range(3):
            f, one = system.rhs(Y[:, j], inp, detail=True)
            np.testing.assert_allclose(f, F[:, j], rtol=1e-13, atol=1e-9, err_msg=name)
            np.testing.assert_allclose(one["kla_per_d"], info["kla_per_d"][:, j], rtol=1e-13, err_msg=name)


def test_ideal_separator_passes_solubles_and_splits_particulates(bsm1_ideal):
    """An ideal separator's effluent carries the feed's solubles unchanged and its particulates at
    effluent TSS / feed TSS of the feed's; the underflow closes the separator's balance, component by component."""
    from airtaper.process.stoichiometry import PARTICULATES, IDX

    part = np.array([IDX[k] for k in PARTICULATES])
    sol = np.setdiff1d(np.arange(13), part)
    for name, system, inp, y in _states(bsm1_ideal, bsm1_ideal, 7):
        if system.layered:
            continue
        _, info = system.rhs(y, inp, detail=True)
        cf = system.blocks(y)[system.nz - 1]
        ce, cu = info["c_effluent"], info["c_underflow"]
        ratio = min(system.effluent_tss, float(system.tss(cf))) / float(system.tss(cf))
        np.testing.assert_array_equal(ce[sol], cf[sol], err_msg=name)
        np.testing.assert_array_equal(cu[sol], cf[sol], err_msg=name)
        np.testing.assert_allclose(ce[part], cf[part] * ratio, rtol=1e-15, err_msg=name)
        qe, qu = float(info["q_effluent_m3_d"]), float(info["q_underflow_m3_d"])
        np.testing.assert_allclose(qe * ce + qu * cu, (qe + qu) * cf, rtol=1e-12, err_msg=name)
