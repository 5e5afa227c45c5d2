"""The linear/nonlinear split derivatives against CasADi's own Jacobian and Hessian.

Reference: CasADi's ``jacobian`` and ``hessian`` of the whole expression graph (a
general-purpose AD library, the bridge's previous derivative path, kept as
``method="casadi"``), compared at random points; the all-operator model's values and
first derivatives are themselves checked against Pyomo in test_pyomo_to_casadi.py.
"""

import sys
from pathlib import Path

import numpy as np
import pyomo.environ as pe
import pytest
from pyomo.core.expr import numeric_expr as ne

from airtaper.solve import derivatives as dv
from airtaper.solve import nlp
from airtaper.solve import pyomo_to_casadi as p2c

sys.path.insert(0, str(Path(__file__).resolve().parents[2] / "benchmarks"))
sys.path.insert(0, str(Path(__file__).resolve().parent))
from test_pyomo_to_casadi import _all_operators_model  # noqa: E402


def _dense(values, rows, cols, shape):
    out = np.zeros(shape)
    np.add.at(out, (rows, cols), values)
    return out


def _both(m):
    tape = p2c.convert(m)
    split = dv.build_split_sx(tape)
    levels = nlp.build_sx(tape)  # the graph as walked, built independently
    return tape, nlp.build_functions(split, tape), nlp.build_functions(levels, method="casadi")


def _compare(m, seed, *, n_points=4, spread=0.2, rtol=1e-11):
    tape, new, ref = _both(m)
    n, mm = new.n, new.m
    assert (new.hess_rows >= new.hess_cols).all()  # lower triangle for Ipopt
    x0 = np.array([v.value for v in tape.variables], dtype=float)
    p0 = np.array([q.value for q in tape.parameters], dtype=float)
    rng = np.random.default_rng(seed)
    for _ in range(n_points):
        x = x0 * rng.uniform(1 - spread, 1 + spread, n)
        lam = rng.normal(size=mm)
        sigma = float(rng.uniform(0.1, 2.0))
        for name in ("f", "g", "grad_f"):  # values of the split form
            a, b = (np.array(getattr(fns, name)(x, p0)).ravel() for fns in (new, ref))
            np.testing.assert_allclose(a, b, rtol=rtol, atol=rtol * max(1.0, np.abs(b).max()))
        for fn_new, fn_ref, rows, cols, rref, cref, shape, args in (
            (new.jac_g, ref.jac_g, new.jac_rows, new.jac_cols, ref.jac_rows, ref.jac_cols,
             (mm, n), (x, p0)),
            (new.hess_l, ref.hess_l, new.hess_rows, new.hess_cols, ref.hess_rows,
             ref.hess_cols, (n, n), (x, p0, lam, sigma)),
        ):
            a = _dense(np.array(fn_new(*args).nonzeros()), rows, cols, shape)
            b = _dense(np.array(fn_ref(*args).nonzeros()), rref, cref, shape)
            scale = max(1.0, float(np.abs(b).max()))
            np.testing.assert_allclose(a, b, rtol=rtol, atol=rtol * scale)
            # every structural nonzero of the reference is in the new pattern
            have = set(zip(rows.tolist(), cols.tolist()))
            assert set(zip(rref.tolist(), cref.tolist())) <= have
    return tape, new


def test_all_operators_match_casadi():
    m = _all_operators_model()
    m.extra = pe.Constraint(expr=pe.log(1 + m.x[1] * m.x[2]) * m.x[3] <= 50)
    _compare(m, seed=0, spread=0.1)


def test_max_min_and_piecewise_operations_match_casadi():
    m = pe.ConcreteModel()
    m.x = pe.Var([1, 2, 3], initialize={1: 0.8, 2: 1.9, 3: 1.1})
    x = m.x
    m.c1 = pe.Constraint(expr=pe.Expr_if(IF=x[1] * x[2] >= 1.0, THEN=x[1] ** 2 * x[3],
                                         ELSE=x[2] / x[3]) <= 10)
    m.c2 = pe.Constraint(expr=abs(x[1] - x[3]) * x[2] + x[1] ** x[2] <= 10)
    m.c3 = pe.Constraint(expr=pe.floor(x[1]) * x[2] + pe.sqrt(x[1] * x[2] * x[3]) <= 10)
    m.c4 = pe.Constraint(expr=ne.MaxExpression((x[1] * x[2], x[3] ** 2))
                         - ne.MinExpression((x[1] / x[2], x[3])) * x[1] <= 10)
    m.o = pe.Objective(expr=pe.exp(x[1] * x[2]) / (1 + x[3] ** 2) - pe.atan(x[1] / x[3]),
                       sense=pe.maximize)
    _compare(m, seed=1, spread=0.05)


def test_deep_nonlinear_chains_and_shared_expressions():
    # rates of rates (named expressions used in several constraints), quotients of
    # products: several nonlinear depths, as in the Monod terms of the train model
    m = pe.ConcreteModel()
    m.I = pe.RangeSet(0, 9)
    m.s = pe.Var(m.I, initialize=lambda m, i: 1.0 + 0.1 * i, bounds=(0.01, None))
    m.k = pe.Param(mutable=True, initialize=0.7)
    m.r = pe.Expression(m.I, rule=lambda m, i: m.s[i] / (m.k + m.s[i]) * m.s[(i + 1) % 10])
    m.q = pe.Expression(m.I, rule=lambda m, i: m.r[i] * m.r[(i + 3) % 10] / (1 + m.r[i]))
    m.bal = pe.Constraint(m.I, rule=lambda m, i: 2 * m.s[i] - m.s[(i - 1) % 10]
                          + 0.3 * m.q[i] - 0.1 * m.r[(i + 5) % 10] == 1)
    m.o = pe.Objective(expr=sum(m.q[i] ** 1.5 for i in m.I) + sum(m.s[i] for i in m.I))
    tape, fns = _compare(m, seed=2)
    assert len(dv.flatten(tape).offsets) - 1 >= 3  # really several nonlinear depths


def test_synthetic_train_model_matches_casadi():
    synthetic_asm1 = pytest.importorskip("synthetic_asm1")
    _compare(synthetic_asm1.build(2, 4, 1), seed=3, n_points=2, spread=0.1, rtol=1e-10)


@pytest.mark.parametrize("seed", range(6))
def test_random_expression_trees_match_casadi(seed):
    rng = np.random.default_rng(100 + seed)
    m = pe.ConcreteModel()
    m.x = pe.Var(range(5), initialize=lambda m, i: float(rng.uniform(0.5, 1.5)))
    m.p = pe.Param(mutable=True, initialize=1.3)

    def tree(depth):
        if depth == 0 or rng.uniform() < 0.2:
            choice = rng.integers(0, 3)
            if choice == 0:
                return m.x[int(rng.integers(0, 5))]
            if choice == 1:
                return m.p
            return float(rng.uniform(0.5, 2.0))
        kind = int(rng.integers(0, 8))
        a = tree(depth - 1)
        b = tree(depth - 1)
        if kind == 0:
            return a + 2.0 * b
        if kind == 1:
            return a * b
        if kind == 2:
            return a / (1.5 + b * b)
        if kind == 3:
            return (1.0 + a * a) ** 0.75
        if kind == 4:
            return pe.exp(0.3 * a) - b
        if kind == 5:
            return pe.log(2.0 + a * a) * b
        if kind == 6:
            return pe.sin(a) * pe.tanh(b)
        return 3.0 * a - b

    m.c = pe.Constraint(range(6), rule=lambda m, j: 0.1 * m.x[j % 5] + tree(4) <= 100)
    m.o = pe.Objective(expr=m.x[0] + tree(4))
    _compare(m, seed=seed, spread=0.1, rtol=1e-9)


def test_linear_model_has_constant_jacobian_and_empty_hessian():
    m = pe.ConcreteModel()
    m.x = pe.Var(range(4), initialize=1.0)
    m.c = pe.Constraint(range(3), rule=lambda m, j: sum((i + j + 1) * m.x[i] for i in m.x) == j)
    m.o = pe.Objective(expr=m.x[0] + 2 * m.x[3])
    tape, fns = _compare(m, seed=4)
    assert len(fns.hess_rows) == 0
    assert len(dv.flatten(tape).w_nodes) == 0
