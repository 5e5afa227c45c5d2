"""Ipopt through the CasADi bridge: published optima, analytic duals, failure paths.

Published optima are from Hock, W. and Schittkowski, K. (1981), "Test Examples for
Nonlinear Programming Codes", Springer, Berlin, vol. 187 of its series in economics
and mathematical systems (values recalled from memory, each with its problem number).
"""

import math

import numpy as np
import pyomo.environ as pe
import pytest
from scipy import optimize

from airtaper.errors import SolverError
from airtaper.solve import SolveStatus, clear_cache, solve_nlp

pytestmark = pytest.mark.solver


def hs071():
    m = pe.ConcreteModel()
    m.x = pe.Var([1, 2, 3, 4], bounds=(1, 5), initialize={1: 1, 2: 5, 3: 5, 4: 1})
    x = m.x
    m.ineq = pe.Constraint(expr=x[1] * x[2] * x[3] * x[4] >= 25)
    m.eq = pe.Constraint(expr=sum(x[i] ** 2 for i in x) == 40)
    m.o = pe.Objective(expr=x[1] * x[4] * (x[1] + x[2] + x[3]) + x[3])
    return m


def test_hs071_optimum_and_solution():
    m = hs071()
    r = solve_nlp(m)
    assert r.status is SolveStatus.OPTIMAL and r.ok
    # Hock & Schittkowski (1981) problem 71: f* = 17.0140173 at
    # x* = (1, 4.7429994, 3.8211503, 1.3794082) (from memory)
    assert r.objective == pytest.approx(17.0140173, abs=1e-6)
    np.testing.assert_allclose([pe.value(m.x[i]) for i in m.x],
                               [1.0, 4.7429994, 3.8211503, 1.3794082], atol=1e-5)
    assert 0 < r.iterations < 50
    t = r.timings
    assert t.total_s >= t.conversion_s + t.derivatives_s + t.ipopt_s - 1e-9
    assert min(t.conversion_s, t.derivatives_s, t.ipopt_s, t.ipopt_cpu_s) > 0


def test_hs071_duals_are_objective_sensitivities():
    # Reference: the definition dual = d f*/d b, checked by re-solving with the limit
    # moved by +-delta (central difference).
    m = hs071()
    r = solve_nlp(m, {"tol": 1e-10})
    delta = 1e-4
    for con, lo_attr in ((m.ineq, "lower"), (m.eq, None)):
        base = 25.0 if con is m.ineq else 40.0
        values = []
        for b in (base + delta, base - delta):
            mm = hs071()
            c = mm.ineq if con is m.ineq else mm.eq
            c.set_value(c.body >= b if lo_attr else c.body == b)
            values.append(solve_nlp(mm, {"tol": 1e-10}).objective)
        fd = (values[0] - values[1]) / (2 * delta)
        assert r.dual(con) == pytest.approx(fd, rel=1e-4, abs=1e-6)
    assert r.dual(m.ineq) > 0  # a >= limit on a minimisation costs when raised
    # x1 sits on its lower bound 1: raising it costs, its dual is d f*/d lb > 0
    assert r.bound_dual(m.x[1]).lower > 0.5
    assert r.bound_dual(m.x[2]).lower == pytest.approx(0.0, abs=1e-6)


def test_hs006_equality_constrained():
    # Hock & Schittkowski (1981) problem 6: f* = 0 at (1, 1), start (-1.2, 1)
    m = pe.ConcreteModel()
    m.x1 = pe.Var(initialize=-1.2)
    m.x2 = pe.Var(initialize=1.0)
    m.c = pe.Constraint(expr=10 * (m.x2 - m.x1**2) == 0)
    m.o = pe.Objective(expr=(1 - m.x1) ** 2)
    r = solve_nlp(m)
    assert r.ok and r.objective == pytest.approx(0.0, abs=1e-8)
    assert (pe.value(m.x1), pe.value(m.x2)) == pytest.approx((1.0, 1.0), abs=1e-4)


def test_hs014_mixed_constraints():
    # Hock & Schittkowski (1981) problem 14: f* = 9 - 2.875*sqrt(7) (from memory)
    m = pe.ConcreteModel()
    m.x1 = pe.Var(initialize=2.0)
    m.x2 = pe.Var(initialize=2.0)
    m.eq = pe.Constraint(expr=m.x1 - 2 * m.x2 + 1 == 0)
    m.ineq = pe.Constraint(expr=-(m.x1**2) / 4 - m.x2**2 + 1 >= 0)
    m.o = pe.Objective(expr=(m.x1 - 2) ** 2 + (m.x2 - 1) ** 2)
    r = solve_nlp(m)
    assert r.ok and r.objective == pytest.approx(9 - 2.875 * math.sqrt(7), abs=1e-7)
    assert pe.value(m.x1) == pytest.approx(0.5 * (math.sqrt(7) - 1), abs=1e-6)


def test_hs035_bounds_and_linear_inequality():
    # Hock & Schittkowski (1981) problem 35: f* = 1/9 at (4/3, 7/9, 4/9)
    m = pe.ConcreteModel()
    m.x = pe.Var([1, 2, 3], bounds=(0, None), initialize=0.5)
    x = m.x
    m.c = pe.Constraint(expr=x[1] + x[2] + 2 * x[3] <= 3)
    m.o = pe.Objective(expr=9 - 8 * x[1] - 6 * x[2] - 4 * x[3] + 2 * x[1] ** 2
                       + 2 * x[2] ** 2 + x[3] ** 2 + 2 * x[1] * x[2] + 2 * x[1] * x[3])
    r = solve_nlp(m)
    assert r.ok and r.objective == pytest.approx(1 / 9, abs=1e-7)
    np.testing.assert_allclose([pe.value(x[i]) for i in x], [4 / 3, 7 / 9, 4 / 9], atol=1e-6)


def test_hs040_as_a_maximisation():
    # Hock & Schittkowski (1981) problem 40 (min -x1 x2 x3 x4, f* = -0.25), posed here
    # as max x1 x2 x3 x4 = 0.25 at (2^-1/3, 2^-1/2, 2^-11/12, 2^-1/4)
    m = pe.ConcreteModel()
    m.x = pe.Var([1, 2, 3, 4], initialize=0.8)
    x = m.x
    m.c1 = pe.Constraint(expr=x[1] ** 3 + x[2] ** 2 == 1)
    m.c2 = pe.Constraint(expr=x[1] ** 2 * x[4] - x[3] == 0)
    m.c3 = pe.Constraint(expr=x[4] ** 2 - x[2] == 0)
    m.o = pe.Objective(expr=x[1] * x[2] * x[3] * x[4], sense=pe.maximize)
    r = solve_nlp(m)
    assert r.ok and r.objective == pytest.approx(0.25, abs=1e-8)
    np.testing.assert_allclose([pe.value(x[i]) for i in x],
                               [2 ** (-1 / 3), 2 ** (-1 / 2), 2 ** (-11 / 12), 2 ** (-1 / 4)],
                               atol=1e-6)


def test_rosenbrock_unconstrained():
    # Rosenbrock (1960) function, minimum 0 at (1, 1) from (-1.2, 1); scipy.optimize.rosen
    # as the reference evaluator of the function at the returned point
    m = pe.ConcreteModel()
    m.x = pe.Var([0, 1], initialize={0: -1.2, 1: 1.0})
    m.o = pe.Objective(expr=100 * (m.x[1] - m.x[0] ** 2) ** 2 + (1 - m.x[0]) ** 2)
    r = solve_nlp(m)
    assert r.ok and r.n_constraints == 0
    xs = np.array([pe.value(m.x[0]), pe.value(m.x[1])])
    np.testing.assert_allclose(xs, [1.0, 1.0], atol=1e-6)
    assert optimize.rosen(xs) == pytest.approx(r.objective, abs=1e-12)


@pytest.mark.parametrize("sense", [pe.minimize, pe.maximize])
def test_duals_of_an_analytic_problem(sense):
    # Analytic reference: min (x-3)^2 + (y+3)^2 + (z-1)^2 with x <= b1 (binding),
    # y >= lb (bound, binding), z + w == b2, w fixed 0 -> f* = (b1-3)^2 + (lb+3)^2 + 0,
    # so d f*/d b1 = 2 (b1-3), d f*/d lb = 2 (lb+3), d f*/d b2 = 0 (z free at 1 -> b2=1).
    # The maximisation of -f has the same point and duals of the opposite sign.
    s = 1 if sense == pe.minimize else -1
    b1, lb = 1.0, 0.5
    m = pe.ConcreteModel()
    m.x = pe.Var(initialize=0.0)
    m.y = pe.Var(bounds=(lb, None), initialize=2.0)
    m.z = pe.Var(initialize=0.0)
    m.w = pe.Var(initialize=0.0)
    m.w.fix()
    m.cx = pe.Constraint(expr=m.x <= b1)
    m.cz = pe.Constraint(expr=m.z + m.w == 1.0)
    m.range = pe.Constraint(expr=pe.inequality(-10, m.x + m.z, 10))  # not binding
    m.o = pe.Objective(expr=s * ((m.x - 3) ** 2 + (m.y + 3) ** 2 + (m.z - 1) ** 2),
                       sense=sense)
    m.dual = pe.Suffix(direction=pe.Suffix.IMPORT)
    r = solve_nlp(m, {"tol": 1e-10})
    assert r.ok
    # (Ipopt relaxes bounds by about 1e-8, so the optimum is met to about 1e-7)
    assert r.objective == pytest.approx(s * ((b1 - 3) ** 2 + (lb + 3) ** 2), abs=1e-6)
    assert r.dual(m.cx) == pytest.approx(s * 2 * (b1 - 3), abs=1e-6)
    assert r.bound_dual(m.y).lower == pytest.approx(s * 2 * (lb + 3), abs=1e-6)
    assert r.bound_dual(m.y).upper == pytest.approx(0.0, abs=1e-8)
    assert r.dual(m.cz) == pytest.approx(0.0, abs=1e-6)
    assert r.dual(m.range) == pytest.approx(0.0, abs=1e-6)
    assert m.dual[m.cx] == pytest.approx(r.dual(m.cx))  # loaded into the Suffix
    if s == 1:
        assert r.dual(m.cx) < 0  # relaxing a <= limit lowers the minimum


@pytest.mark.parametrize("seed", [0, 1, 2, 3])
def test_random_convex_problems_against_scipy(seed):
    # Reference: scipy.optimize.minimize (SLSQP), a general-purpose NLP library
    rng = np.random.default_rng(seed)
    n, k = 6, 4
    a = rng.normal(size=(n, n))
    q = a @ a.T + n * np.eye(n)
    c = rng.normal(size=n)
    A = rng.normal(size=(k, n))
    b = rng.uniform(0.5, 1.5, size=k)
    w = rng.uniform(0.1, 0.5, size=n)
    lo = -rng.uniform(0.5, 2.0, size=n)

    def f(x):
        return 0.5 * x @ q @ x + c @ x + np.sum(w * np.exp(x))

    ref = optimize.minimize(
        f, np.zeros(n), jac=lambda x: q @ x + c + w * np.exp(x), method="SLSQP",
        bounds=[(lo[i], None) for i in range(n)],
        constraints=[{"type": "ineq", "fun": lambda x: b - A @ x, "jac": lambda x: -A}],
        options={"ftol": 1e-12, "maxiter": 500},
    )
    assert ref.success
    m = pe.ConcreteModel()
    m.I = pe.RangeSet(0, n - 1)
    m.x = pe.Var(m.I, bounds=lambda m, i: (lo[i], None), initialize=0.0)
    m.c = pe.Constraint(range(k), rule=lambda m, j: sum(A[j, i] * m.x[i] for i in m.I) <= b[j])
    m.o = pe.Objective(expr=0.5 * sum(q[i, j] * m.x[i] * m.x[j] for i in m.I for j in m.I)
                       + sum(c[i] * m.x[i] + w[i] * pe.exp(m.x[i]) for i in m.I))
    r = solve_nlp(m, {"tol": 1e-10})
    assert r.ok
    assert r.objective == pytest.approx(ref.fun, rel=1e-7, abs=1e-8)
    np.testing.assert_allclose([pe.value(m.x[i]) for i in m.I], ref.x, atol=1e-4)


def test_infeasible_problem_returns_status_not_exception():
    m = pe.ConcreteModel()
    m.x = pe.Var(initialize=0.0)
    m.y = pe.Var(initialize=0.0)
    m.disc = pe.Constraint(expr=m.x**2 + m.y**2 <= 1)
    m.far = pe.Constraint(expr=m.x + m.y >= 3)
    m.o = pe.Objective(expr=m.x)
    r = solve_nlp(m)
    assert r.status is SolveStatus.INFEASIBLE and not r.ok
    assert "infeasib" in r.message


def test_iteration_limit_and_time_limit():
    r = solve_nlp(hs071(), {"max_iter": 2})
    assert r.status is SolveStatus.ITERATION_LIMIT and r.iterations == 2
    r = solve_nlp(hs071(), {"time_limit": 1e-9})
    assert r.status is SolveStatus.TIME_LIMIT


def test_callback_reports_progress_and_can_stop():
    seen = []

    def cb(info):
        seen.append(info)
        return info.iteration < 3

    m = hs071()
    m.o.sense = pe.maximize  # the objective is reported in the model's own sense
    m.o.set_value(-m.o.expr)
    r = solve_nlp(m, callback=cb)
    assert r.status is SolveStatus.USER_STOP and r.iterations == 3
    assert [i.iteration for i in seen] == [0, 1, 2, 3]
    # f = 16 at the start (1, 5, 5, 1); Ipopt first pushes the point off the bounds,
    # so iteration 0 reports about -16 (negative: the model's maximisation sense)
    assert seen[0].objective == pytest.approx(-16.0, rel=0.02)
    assert all(i.primal_infeasibility >= 0 and i.dual_infeasibility >= 0 for i in seen)


def test_nan_at_start_names_the_constraint():
    m = pe.ConcreteModel()
    m.x = pe.Var(initialize=0.0)
    m.ok_con = pe.Constraint(expr=m.x <= 10)
    m.logc = pe.Constraint(expr=pe.log(m.x - 1) >= 0)
    m.o = pe.Objective(expr=(m.x - 3) ** 2)
    r = solve_nlp(m)
    assert r.status is SolveStatus.EVALUATION_ERROR
    assert "constraint logc" in r.message and "ok_con" not in r.message


def test_bad_option_raises_solver_error():
    with pytest.raises(SolverError, match="no_such_option"):
        solve_nlp(hs071(), {"no_such_option": 1})


def test_param_change_reuses_structure_and_warm_start():
    m = hs071()
    m.b = pe.Param(mutable=True, initialize=25.0)
    m.ineq.set_value(m.x[1] * m.x[2] * m.x[3] * m.x[4] >= m.b)
    clear_cache(m)
    r1 = solve_nlp(m)
    assert r1.ok and not r1.reused_structure and r1.timings.derivatives_s > 0
    m.b = 26.0
    r2 = solve_nlp(m, warm_start=True)
    assert r2.ok and r2.reused_structure and r2.timings.derivatives_s == 0.0
    # same answer as a cold solve of a fresh model with the new limit
    fresh = hs071()
    fresh.ineq.set_value(fresh.x[1] * fresh.x[2] * fresh.x[3] * fresh.x[4] >= 26.0)
    r_cold = solve_nlp(fresh)
    assert r2.objective == pytest.approx(r_cold.objective, abs=1e-7)
    # warm start from an explicit result converges from the optimum in few iterations
    r3 = solve_nlp(m, warm_start=r2)
    assert r3.ok and r3.iterations <= 3


def test_user_scaling_from_suffix():
    # A badly scaled copy of HS071 (variables in units 1000x smaller) solves to the same
    # optimum with scaling factors from a scaling_factor Suffix.
    m = pe.ConcreteModel()
    m.u = pe.Var([1, 2, 3, 4], bounds=(1e-3, 5e-3), initialize={1: 1e-3, 2: 5e-3, 3: 5e-3,
                                                             4: 1e-3})
    x = {i: 1000 * m.u[i] for i in m.u}
    m.ineq = pe.Constraint(expr=x[1] * x[2] * x[3] * x[4] * 1e6 >= 25e6)
    m.eq = pe.Constraint(expr=sum(x[i] ** 2 for i in x) == 40)
    m.o = pe.Objective(expr=x[1] * x[4] * (x[1] + x[2] + x[3]) + x[3])
    m.scaling_factor = pe.Suffix(direction=pe.Suffix.EXPORT)
    m.scaling_factor[m.u] = 1000.0
    m.scaling_factor[m.ineq] = 1e-6
    first_dual_inf = {}

    def run(flag):
        seen = []
        r = solve_nlp(m, {"bound_relax_factor": 0}, scaling=flag,
                      callback=lambda i: seen.append(i.dual_infeasibility))
        first_dual_inf[flag] = seen[0]
        return r

    r = run(True)
    assert r.ok and r.objective == pytest.approx(17.0140173, abs=1e-6)
    assert run(False).ok
    # the factors reach Ipopt: its (scaled) dual infeasibility at the start shrinks
    assert first_dual_inf[True] < first_dual_inf[False] / 10


def test_scaling_factors_of_inner_blocks_override_outer_ones():
    from airtaper.solve.ipopt import _scaling_factors

    m = pe.ConcreteModel()
    m.b = pe.Block()
    m.b.y = pe.Var([1, 2])
    m.scaling_factor = pe.Suffix(direction=pe.Suffix.EXPORT)
    m.scaling_factor[m.b.y] = 2.0
    m.b.scaling_factor = pe.Suffix(direction=pe.Suffix.EXPORT)
    m.b.scaling_factor[m.b.y[2]] = 5.0
    f = _scaling_factors(m)
    assert f[id(m.b.y[1])] == 2.0 and f[id(m.b.y[2])] == 5.0


def test_feasibility_problem_and_all_fixed_model():
    m = pe.ConcreteModel()
    m.x = pe.Var(initialize=0.5)
    m.c = pe.Constraint(expr=m.x**3 == 8)
    r = solve_nlp(m)
    assert r.ok and r.objective is None and pe.value(m.x) == pytest.approx(2.0)
    m.x.fix(2.0)
    assert solve_nlp(m).status is SolveStatus.OPTIMAL
    m.x.fix(3.0)
    r = solve_nlp(m)
    assert r.status is SolveStatus.INFEASIBLE and "c violated" in r.message


def _hs071_fixed_x4(value):
    m = hs071()
    m.x[4].fix(value)
    return m


def test_fix_and_unfix_reuse_the_structure_with_fresh_answers():
    m = hs071()
    clear_cache(m)
    r_free = solve_nlp(m)
    assert r_free.ok and not r_free.reused_structure
    m.x[4].fix(1.5)
    start = {i: pe.value(m.x[i]) for i in m.x}
    r_fixed = solve_nlp(m)
    assert r_fixed.ok and r_fixed.reused_structure and r_fixed.timings.derivatives_s == 0.0
    assert r_fixed.n_variables == 3 and pe.value(m.x[4]) == 1.5
    mr = _hs071_fixed_x4(1.5)
    for i, v in start.items():
        mr.x[i].set_value(v)
    ref = solve_nlp(mr, use_cache=False)  # a fresh build of that state, same start
    assert r_fixed.objective == pytest.approx(ref.objective, abs=1e-8)
    assert r_fixed.iterations == ref.iterations
    assert r_fixed.dual(m.ineq) == pytest.approx(ref.dual(mr.ineq), abs=1e-7)
    assert r_fixed.dual(m.eq) == pytest.approx(ref.dual(mr.eq), abs=1e-7)
    assert r_fixed.bound_dual(m.x[4]) == ref.bound_dual(mr.x[4])
    m.x[4].unfix()
    r_again = solve_nlp(m, warm_start=True)  # multipliers of the fixed solve, x4 gets 0
    assert r_again.ok and r_again.reused_structure and r_again.n_variables == 4
    # Hock & Schittkowski (1981) problem 71 optimum again (from memory)
    assert r_again.objective == pytest.approx(17.0140173, abs=1e-6)


@pytest.mark.parametrize("sense", [pe.minimize, pe.maximize])
def test_dual_of_a_fixed_variable_is_the_sensitivity_to_its_value(sense):
    # Reference: the definition d f*/d value, by central differences of fresh solves
    # with the fixed value moved by +-delta.
    s = 1 if sense == pe.minimize else -1

    def build(value):
        m = _hs071_fixed_x4(value)
        m.o.set_value(s * m.o.expr)
        m.o.sense = sense
        return m

    m = build(1.5)
    r = solve_nlp(m, {"tol": 1e-10}, use_cache=False)
    assert r.ok
    delta = 1e-4
    up, down = (solve_nlp(build(1.5 + d), {"tol": 1e-10}, use_cache=False).objective
                for d in (delta, -delta))
    fd = (up - down) / (2 * delta)
    bd = r.bound_dual(m.x[4])
    assert bd.lower + bd.upper == pytest.approx(fd, rel=1e-4, abs=1e-6)
    assert abs(fd) > 0.1  # the fixed value matters here
    assert min(abs(bd.lower), abs(bd.upper)) == 0.0  # one side only
    assert s * bd.lower >= 0 and s * bd.upper <= 0  # the signs of free-variable duals


def test_fixed_state_changes_keep_derivatives_consistent():
    # same values and derivatives through the view as a fresh build with the variable
    # as a parameter (the older treatment), at a random point
    from airtaper.solve import nlp

    m = hs071()
    clear_cache(m)
    nlp.get_structure(m)
    m.x[2].fix(4.2)
    s, reused = nlp.get_structure(m)
    assert reused
    ref_tape_model = hs071()
    ref_tape_model.x[2].fix(4.2)
    ref, _ = nlp.get_structure(ref_tape_model, use_cache=False)
    for st in (s, ref):
        st.evaluator.set_parameters(st.parameter_values())
    x = np.array([1.3, 3.1, 2.2])
    lam = np.array([0.7, -1.1])
    for name, args in (("objective", (x,)), ("gradient", (x,)), ("constraints", (x,)),
                       ("jacobian", (x,)), ("hessian", (x, lam, 0.9))):
        a = np.atleast_1d(getattr(s.evaluator, name)(*args)).copy()
        b = np.atleast_1d(getattr(ref.evaluator, name)(*args)).copy()
        if name == "jacobian":
            a = _dense(a, s.functions.jac_rows, s.functions.jac_cols, (2, 3))
            b = _dense(b, ref.functions.jac_rows, ref.functions.jac_cols, (2, 3))
        elif name == "hessian":
            a = _dense(a, s.functions.hess_rows, s.functions.hess_cols, (3, 3))
            b = _dense(b, ref.functions.hess_rows, ref.functions.hess_cols, (3, 3))
        np.testing.assert_allclose(a, b, rtol=1e-13, atol=1e-13, err_msg=name)


def _dense(vals, rows, cols, shape):
    out = np.zeros(shape)
    np.add.at(out, (rows, cols), vals)
    return out


def test_unfixing_an_integer_or_fixing_without_value_is_refused_on_reuse():
    from airtaper.errors import ModelError

    m = hs071()
    m.n = pe.Var(domain=pe.Integers, initialize=1)
    m.n.fix(1)
    m.cn = pe.Constraint(expr=m.x[1] + m.n <= 10)
    clear_cache(m)
    assert solve_nlp(m).ok
    m.n.unfix()
    with pytest.raises(ModelError, match="variable n is integer"):
        solve_nlp(m)
    m.n.fix(1)
    m.x[3].fix(None)
    m.x[3].set_value(None)
    with pytest.raises(ModelError, match="fixed variable x\\[3\\] has no value"):
        solve_nlp(m)
