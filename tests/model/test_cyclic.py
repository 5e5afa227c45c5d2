"""The cyclic (periodic) day: conservation, structure, and agreement with the independent simulator."""

import numpy as np
import pytest

from airtaper.model import build_cyclic_model, check_square, initialise_cyclic, solve_square
from airtaper.model import results
from airtaper.model.initial_point import march_cyclic

#: An invented diurnal schedule: the demo's tapered airflows swung +-50 % around the day.
_BASE = {"Z2": 2750.0, "Z3": 1860.0, "Z4": 1410.0, "Z5": 1000.0, "Z6": 800.0}
_SHAPE = 1.0 + 0.5 * np.sin((np.arange(24) - 6) / 24 * 2 * np.pi)
SCHEDULE = {z: (v * _SHAPE).tolist() for z, v in _BASE.items()}


@pytest.fixture(scope="module", params=["euler", "radau2"])
def marched(demo_layout, request):
    # a coarse grid (one step per period) keeps the solver-free checks quick
    m = build_cyclic_model(demo_layout, airflow=SCHEDULE, scheme=request.param, steps_per_period=1)
    initialise_cyclic(m)
    march_cyclic(m)
    return m


@pytest.fixture(scope="module")
def solved(demo_layout):
    from airtaper.solve.ipopt import solve_nlp

    m = build_cyclic_model(demo_layout, airflow=SCHEDULE)
    initialise_cyclic(m)
    march_cyclic(m)
    run = solve_square(m, solve_nlp, initialise=False)
    assert run.result.ok
    return m


@pytest.fixture(scope="module")
def simulated(demo_layout):
    from airtaper.simulate.run import periodic

    return periodic(demo_layout, schedule=SCHEDULE)


def _daily_closure(m, plant_balance):
    """Quadrature of the plant's net COD and N inflow over the day, relative to the daily inflow."""
    cod = n = cod_in = n_in = 0.0
    for t in m.STEPS:
        w = m.point_weight[t]
        c, nn, ci, ni = plant_balance(m, t)
        cod, n, cod_in, n_in = cod + w * c, n + w * nn, cod_in + w * ci, n_in + w * ni
    return abs(cod) / cod_in, abs(n) / n_in


@pytest.mark.solver
def test_cyclic_day_conserves_cod_and_nitrogen(solved, plant_balance):
    # over a periodic day the inventory returns to its start: what enters leaves, is
    # breathed (O2) or escapes as N2 (Henze et al. 1987 COD/N continuity)
    cod, n = _daily_closure(solved, plant_balance)
    assert cod < 1e-6 and n < 1e-6


def test_every_step_of_the_march_conserves_cod_and_nitrogen(marched, plant_balance):
    # without the periodic solve: the inventory change of each step equals the
    # quadrature of its net inflow (Henze et al. 1987 continuity), to rounding
    from airtaper.process.stoichiometry import cod_composition, n_composition

    m = marched
    par = m.train_data.params[0]
    wc, wn = cod_composition(par), n_composition(par)
    comps = list(m.COMPONENTS)

    def inventory(t, w):
        return sum(m.zone_volume_m3[z] * sum(w[k] * m.conc[t, z, c].value for k, c in enumerate(comps))
                   for z in m.ZONES)

    a = m.collocation_matrix[-1]
    for t in [t for t in m.STEPS if m.stage_of_point[t] == m.points_per_step - 1][1:8]:
        start = m.step_start[t]
        net = [plant_balance(m, j) for j in m.step_points[t]]
        for w, k in ((wc, 0), (wn, 1)):
            change = inventory(t, w) - inventory(start, w)
            quad = m.dt_d * sum(aj * row[k] for aj, row in zip(a, net))
            assert abs(change - quad) < 1e-8 * abs(net[0][k + 2]) * m.dt_d


def test_cyclic_model_is_square_and_structurally_nonsingular(marched):
    rep = check_square(marched)
    assert rep.nonsingular


@pytest.mark.solver
def test_cyclic_do_agrees_with_the_simulator_at_every_step(solved, simulated):
    # independent implementation (airtaper.simulate, BDF integration of the same plant):
    # each zone's DO within 0.05 mg/L at every step end
    ts = simulated.timeseries
    ends = [t for t in solved.STEPS if solved.stage_of_point[t] == solved.points_per_step - 1]
    worst = 0.0
    for z in solved.ZONES:
        ref = ts[ts.zone == z].set_index("time_h")["SO"]
        ref.index = np.round(ref.index.to_numpy(), 6)
        for t in ends:
            hour = round(solved.point_hour[t] % 24.0, 6)
            worst = max(worst, abs(solved.conc[t, z, "SO"].value - float(ref.loc[hour])))
    assert worst < 0.05


@pytest.mark.solver
def test_cyclic_effluent_ammonia_agrees_with_the_simulator(solved, simulated):
    # independent implementation: flow-weighted daily mean effluent NH4-N within 2 %
    eff = simulated.effluent
    q = eff["q_effluent_m3_d"].to_numpy()
    ref = float((eff["SNH"].to_numpy() * q).sum() / q.sum())
    got = results.summary(solved)["effluent_nh4_mean_mg_L"]
    assert got == pytest.approx(ref, rel=0.02)


@pytest.mark.solver
def test_constant_load_cyclic_day_is_the_steady_state(bsm1_layered, bsm1_steady):
    from airtaper.solve.ipopt import solve_nlp

    m = build_cyclic_model(bsm1_layered, scheme="euler", steps_per_period=1)
    initialise_cyclic(m, steady=bsm1_steady)
    for v in m.conc.values():  # start away from the answer
        v.set_value(v.value * 1.05)
    run = solve_square(m, solve_nlp, initialise=False)
    assert run.result.ok
    zc = results.zone_concentrations(m).drop(columns=["time_h", "period"])
    ref = results.zone_concentrations(bsm1_steady).drop(columns=["time_h", "period"]).xs(1, level="step")
    for t in (1, 7, 24):
        assert np.allclose(zc.xs(t, level="step").to_numpy(), ref.to_numpy(), rtol=1e-6, atol=1e-8)


def test_schemes_and_time_grid(demo_layout):
    m = build_cyclic_model(demo_layout, scheme="radau3", steps_per_period=1)
    assert len(m.STEPS) == 24 * 3
    assert sum(m.point_weight.values()) == pytest.approx(1.0)
    assert m.point_hour[len(m.STEPS)] == pytest.approx(24.0)
    e = build_cyclic_model(demo_layout, scheme="euler")
    assert len(e.STEPS) == 24 * demo_layout.horizon.steps_per_period


def test_radau_collocation_integrates_polynomials_exactly():
    # Radau IIA with K points integrates polynomials of degree 2K - 2 exactly (Hairer & Wanner 1996)
    from airtaper.model.train import radau_collocation

    for k in (2, 3):
        c, a = radau_collocation(k)
        b = a[-1]
        for deg in range(2 * k - 1):
            assert b @ c**deg == pytest.approx(1.0 / (deg + 1), rel=1e-12)
        # stage order K: each row integrates degree K - 1 exactly up to its node
        for deg in range(k):
            assert np.allclose(a @ c**deg, c ** (deg + 1) / (deg + 1), rtol=1e-12)


def test_a_march_step_reaches_the_same_state_from_perturbed_starts(marched):
    # The damped Newton of one march step (model.initial_point._march_step), started from the marched
    # state with every unknown scaled by a random factor in [0.5, 2] (fixed seed), lands on the same
    # state: the step's equations have one nearby root and the damping does not stop short of it.
    from airtaper.model.initial_point import _march_step, _StepTemplate

    m = marched
    rng = np.random.default_rng(5)
    firsts = [t for t in m.STEPS if m.stage_of_point[t] == 0]
    free = [v for v in m.waste_m3_d.values() if not v.fixed]
    for v in free:  # held during the march, as march_cyclic holds it
        v.fix()
    try:
        for t in firsts[1:: max(1, len(firsts) // 4)]:
            tpl = _StepTemplate(m, t)
            x_ref = np.array([v.value for v in tpl.variables(m, t)], dtype=float)
            cur = tpl.current
            for _ in range(3):
                x = x_ref.copy()
                x[cur] = x_ref[cur] * rng.uniform(0.5, 2.0, cur.size)
                x, _iterations = _march_step(tpl, x, 1e-10, t)
                rel = np.abs(x[cur] - x_ref[cur]) / np.maximum(np.abs(x_ref[cur]), 1e-3)
                assert rel.max() < 1e-6, (t, rel.max())
    finally:
        for v in free:
            v.unfix()
