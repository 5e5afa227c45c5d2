"""Conversion of Pyomo expressions into CasADi functions (values and derivatives).

Reference for values and first derivatives: Pyomo's own evaluator (``pyomo.environ.value``)
and its symbolic differentiation (``pyomo.core.expr.calculus.derivatives``), a
general-purpose reference library independent of the bridge.
"""

import math

import numpy as np
import pyomo.environ as pe
import pytest
from pyomo.core.expr.calculus.derivatives import Modes, differentiate
from pyomo.core.expr.calculus.diff_with_pyomo import DifferentiationException

from airtaper.errors import ModelError
from airtaper.solve import nlp
from airtaper.solve import pyomo_to_casadi as p2c


def _all_operators_model():
    m = pe.ConcreteModel()
    m.x = pe.Var([1, 2, 3], initialize={1: 0.7, 2: 1.3, 3: 2.1}, bounds=(0.1, 5))
    m.p = pe.Param(mutable=True, initialize=1.7)
    m.q = pe.Param(initialize=0.3)  # immutable: becomes a number
    m.fx = pe.Var(initialize=0.9)
    m.fx.fix()
    m.e = pe.Expression(expr=m.x[1] * m.x[2] / (m.p + m.x[3]))
    x1, x2, x3 = m.x[1], m.x[2], m.x[3]
    bodies = {
        "sum_lin": 2 * x1 + 3 * x2 - x3 + 4,
        "monomial_param": m.p * x1 + m.q * x2,
        "product": x1 * x2 * x3,
        "division": x1 / x2 + m.p / x3,
        "pow_const": x1**2 + x2**3.5 + x3**-1 + x1**0.5,
        "pow_var": x1**x2 + 2**x3 + x1 ** (m.p),
        "negation": -(x1 * x2) - x3,
        "exp_log": pe.exp(x1) + pe.log(x2) + pe.log10(x3),
        "sqrt": pe.sqrt(x1 * x3),
        "trig": pe.sin(x1) + pe.cos(x2) + pe.tan(0.3 * x3),
        "inverse_trig": pe.asin(x1 / 5) + pe.acos(x2 / 5) + pe.atan(x3),
        "hyperbolic": pe.sinh(x1) + pe.cosh(x2) + pe.tanh(x3),
        "inverse_hyperbolic": pe.asinh(x1) + pe.acosh(x2 + 1) + pe.atanh(x3 / 6),
        "abs": abs(x1 - x2),
        "named": m.e + 2 * m.e,
        "fixed_var": m.fx * x1 + m.fx**2,
        "expr_if": pe.Expr_if(IF=x1 <= x2, THEN=x1, ELSE=x2) + x3,
        "monod": x1 / (0.5 + x1) * x2 / (0.2 + x2) * x3,
    }
    m.c = pe.Constraint(list(bodies), rule=lambda m, k: bodies[k] <= 100)
    m.o = pe.Objective(expr=m.e + x1**2)
    return m


def _central_differences(expr, variables, step=1e-6):
    out = []
    for v in variables:
        x0 = v.value
        v.set_value(x0 + step)
        up = pe.value(expr)
        v.set_value(x0 - step)
        down = pe.value(expr)
        v.set_value(x0)
        out.append((up - down) / (2 * step))
    return out


def _evaluator(m):
    s, _ = nlp.get_structure(m, use_cache=False)
    s.evaluator.set_parameters(s.parameter_values())
    return s


def test_values_and_gradients_match_pyomo_at_random_points():
    m = _all_operators_model()
    s = _evaluator(m)
    tape = s.tape
    rng = np.random.default_rng(7)
    for _ in range(5):
        x = rng.uniform(0.3, 2.5, size=len(tape.variables))
        for v, val in zip(tape.variables, x):
            v.set_value(float(val))
        g = s.evaluator.constraints(x).copy()
        expected = [pe.value(c.body) for c in tape.constraints]
        np.testing.assert_allclose(g, expected, rtol=1e-12, atol=1e-12)
        assert s.evaluator.objective(x) == pytest.approx(pe.value(m.o), rel=1e-12)
        # Jacobian entries against Pyomo's symbolic differentiation
        jac = np.zeros((len(tape.constraints), len(tape.variables)))
        jac[s.functions.jac_rows, s.functions.jac_cols] = s.evaluator.jacobian(x)
        for i, c in enumerate(tape.constraints):
            try:
                derivs = differentiate(c.body, wrt_list=tape.variables,
                                       mode=Modes.reverse_numeric)
                tol = 1e-9
            except DifferentiationException:  # Pyomo lacks some intrinsics (asinh, ...)
                derivs = _central_differences(c.body, tape.variables)
                tol = 1e-6
            np.testing.assert_allclose(jac[i], derivs, rtol=tol, atol=tol, err_msg=c.name)
        grad = differentiate(m.o.expr, wrt_list=tape.variables, mode=Modes.reverse_numeric)
        np.testing.assert_allclose(s.evaluator.gradient(x), grad, rtol=1e-10, atol=1e-12)


def test_hessian_matches_finite_differences_of_the_gradient():
    # reference: central differences of the (already verified) Lagrangian gradient
    m = _all_operators_model()
    s = _evaluator(m)
    ev, fns = s.evaluator, s.functions
    n, mm = fns.n, fns.m
    rng = np.random.default_rng(3)
    x = rng.uniform(0.5, 2.0, n)
    lam = rng.normal(size=mm)
    sigma = 0.7

    def grad_lagrangian(z):
        jac = np.zeros((mm, n))
        jac[fns.jac_rows, fns.jac_cols] = ev.jacobian(z)
        return sigma * ev.gradient(z) + jac.T @ lam

    h = np.zeros((n, n))
    h[fns.hess_rows, fns.hess_cols] = ev.hessian(x, lam, sigma)
    assert (fns.hess_rows >= fns.hess_cols).all()  # lower triangle for Ipopt
    full = h + np.tril(h, -1).T
    step = 1e-6
    fd = np.column_stack([
        (grad_lagrangian(x + step * e) - grad_lagrangian(x - step * e)) / (2 * step)
        for e in np.eye(n)
    ])
    np.testing.assert_allclose(full, fd, rtol=1e-5, atol=1e-5)


def test_leaves_become_variables_parameters_and_constants():
    m = _all_operators_model()
    tape = p2c.convert(m)  # every variable is a column, fixed or not
    assert {v.name for v in tape.variables} == {"x[1]", "x[2]", "x[3]", "fx"}
    assert {q.name for q in tape.parameters} == {"p"}
    assert [e.name for e, _ in tape.named] == ["e"]  # converted once, used three times
    old = p2c.convert(m, fixed_as_parameters=True)
    assert {v.name for v in old.variables} == {"x[1]", "x[2]", "x[3]"}
    assert {q.name for q in old.parameters} == {"p", "fx"}
    # the structure's view of the current fixed state: fx is a constant of the solve
    s, _ = nlp.get_structure(m, use_cache=False)
    assert {v.name for v in s.tape.variables} == {"x[1]", "x[2]", "x[3]"}
    assert [q.name for q in s.tape.parameters][-1] == "fx"
    assert s.functions.n == 3 and s.full_functions.n == 4


def test_maximisation_is_negated_internally():
    m = pe.ConcreteModel()
    m.x = pe.Var(initialize=2.0)
    m.o = pe.Objective(expr=m.x**2, sense=pe.maximize)
    s = _evaluator(m)
    assert s.tape.sense == -1
    assert s.evaluator.objective(np.array([2.0])) == pytest.approx(-4.0)


def test_unsupported_external_function_names_the_constraint():
    m = pe.ConcreteModel()
    m.x = pe.Var(initialize=1.0)
    m.f = pe.ExternalFunction(lambda a: a**2)
    m.good = pe.Constraint(expr=m.x >= 0)
    m.bad = pe.Constraint(expr=m.f(m.x) <= 4)
    with pytest.raises(ModelError, match="constraint bad"):
        p2c.convert(m)


def test_two_objectives_integer_variables_and_missing_values_are_refused():
    m = pe.ConcreteModel()
    m.x = pe.Var(initialize=1.0)
    m.o1 = pe.Objective(expr=m.x)
    m.o2 = pe.Objective(expr=-m.x)
    with pytest.raises(ModelError, match="more than one active objective"):
        p2c.convert(m)
    m.o2.deactivate()
    m.n = pe.Var(domain=pe.Integers, initialize=1)
    m.c = pe.Constraint(expr=m.n + m.x >= 1)
    with pytest.raises(ModelError, match="variable n is integer"):
        p2c.convert(m)
    m.n.fix(2)
    p2c.convert(m)  # a fixed integer is a constant: fine
    m.p = pe.Param(mutable=True, initialize=None, within=pe.Any)
    m.c2 = pe.Constraint(expr=m.p * m.x <= 3)
    with pytest.raises(ModelError, match="constraint c2.*parameter p has no value"):
        p2c.convert(m)


def test_structure_cache_reuse_and_invalidation():
    m = _all_operators_model()
    nlp.clear_cache(m)
    s1, reused = nlp.get_structure(m)
    assert not reused
    s2, reused = nlp.get_structure(m)
    assert reused and s2 is s1
    m.p = 2.5  # a value change keeps the structure
    s3, reused = nlp.get_structure(m)
    assert reused
    assert s3.parameter_values()[[q.name for q in s3.tape.parameters].index("p")] == 2.5
    m.x[1].fix(1.0)  # fixing a variable keeps it too: only the view changes
    s4, reused = nlp.get_structure(m)
    assert reused and s4 is s1
    assert "x[1]" not in {v.name for v in s4.tape.variables}
    assert "x[1]" in {q.name for q in s4.tape.parameters}
    m.x[1].unfix()
    s5, reused = nlp.get_structure(m)
    assert reused and "x[1]" in {v.name for v in s5.tape.variables}
    m.e.set_value(m.x[2] ** 2)  # a new named-expression body changes it
    _, reused = nlp.get_structure(m)
    assert not reused
    m.c["abs"].deactivate()  # so does the set of active constraints
    s6, reused = nlp.get_structure(m)
    assert not reused and len(s6.tape.constraints) == len(m.c) - 1


def test_numpy_coefficients_and_constant_folding():
    m = pe.ConcreteModel()
    m.x = pe.Var(initialize=1.5)
    m.c = pe.Constraint(expr=np.float64(2.0) * m.x + math.exp(1.0) * pe.exp(pe.log(m.x)) <= 9)
    s = _evaluator(m)
    assert s.evaluator.constraints(np.array([1.5]))[0] == pytest.approx(3.0 + math.e * 1.5)
