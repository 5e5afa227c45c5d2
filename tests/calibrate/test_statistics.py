"""The reduced-Hessian covariance against ordinary least squares on a problem where both are exact.

A linear model written as a constrained NLP (states s_i = theta_1 x_i + theta_2 x_i^2 as equality
constraints, residuals s_i - y_i): its reduced Hessian is X'X exactly, so the covariance must be
the OLS covariance s^2 (X'X)^-1 computed with numpy.linalg (a general-purpose reference), and the
interval the textbook t interval (Bard 1974, Nonlinear Parameter Estimation, ch. 7). A nonlinear
variant (exp) checks the reduced Hessian against the Gauss-Newton matrix near a small-residual fit.
"""

from __future__ import annotations

import numpy as np
import pyomo.environ as pyo
import pytest
from scipy import stats

from airtaper.calibrate.statistics import fit_statistics
from airtaper.solve import solve_nlp

pytestmark = pytest.mark.solver


def _model(x, y, nonlinear=False):
    m = pyo.ConcreteModel()
    m.I = pyo.RangeSet(len(x))
    m.th = pyo.Var([1, 2], initialize=0.5)
    m.s = pyo.Var(m.I, initialize=0.0)
    if nonlinear:
        m.eq = pyo.Constraint(m.I, rule=lambda m, i: m.s[i] == m.th[1] * pyo.exp(-m.th[2] * x[i - 1]))
    else:
        m.eq = pyo.Constraint(m.I, rule=lambda m, i: m.s[i] == m.th[1] * x[i - 1] + m.th[2] * x[i - 1] ** 2)
    m.r = pyo.Expression(m.I, rule=lambda m, i: m.s[i] - y[i - 1])
    m.obj = pyo.Objective(expr=0.5 * sum(m.r[i] ** 2 for i in m.I))
    return m


def test_linear_model_gives_the_ols_covariance():
    rng = np.random.default_rng(3)
    x = np.linspace(0.1, 3.0, 40)
    y = 1.7 * x - 0.4 * x ** 2 + 0.05 * rng.standard_normal(x.size)
    m = _model(x, y)
    assert solve_nlp(m, {"tol": 1e-10}).ok
    res = np.array([pyo.value(m.r[i]) for i in m.I])
    st = fit_statistics(m, ["a", "b"], [m.th[1], m.th[2]], [m.r[i].expr for i in m.I], res)
    X = np.column_stack((x, x ** 2))
    beta, rss, *_ = np.linalg.lstsq(X, y, rcond=None)
    s2 = float(rss[0]) / (x.size - 2)
    cov = s2 * np.linalg.inv(X.T @ X)
    assert np.allclose(st.values, beta, rtol=1e-6)
    assert np.allclose(st.reduced_hessian, X.T @ X, rtol=1e-8)
    assert np.allclose(st.gauss_newton, X.T @ X, rtol=1e-8)
    assert np.allclose(st.covariance, cov, rtol=1e-6)
    tq = stats.t.ppf(0.975, x.size - 2)
    assert np.allclose(st.ci_high - st.values, tq * np.sqrt(np.diag(cov)), rtol=1e-6)
    assert st.correlation[0, 1] == pytest.approx(cov[0, 1] / np.sqrt(cov[0, 0] * cov[1, 1]), rel=1e-6)


def test_nonlinear_model_reduced_hessian_near_gauss_newton():
    rng = np.random.default_rng(4)
    x = np.linspace(0.0, 4.0, 60)
    y = 2.0 * np.exp(-0.7 * x) + 0.01 * rng.standard_normal(x.size)
    m = _model(x, y, nonlinear=True)
    assert solve_nlp(m, {"tol": 1e-10}).ok
    res = np.array([pyo.value(m.r[i]) for i in m.I])
    st = fit_statistics(m, ["A", "k"], [m.th[1], m.th[2]], [m.r[i].expr for i in m.I], res)
    assert np.allclose(st.reduced_hessian, st.gauss_newton, rtol=0.05)
    assert st.ci_low[1] < 0.7 < st.ci_high[1] and st.ci_low[0] < 2.0 < st.ci_high[0]


def test_a_combination_the_data_cannot_see_is_named():
    # x and x^2 over 1 .. 1 + 1e-5 are the same column to 1e-5: only their sum is seen
    x = 1.0 + np.linspace(0.0, 1e-5, 20)
    y = 0.3 * x + 0.2 * x ** 2
    m = _model(x, y)
    solve_nlp(m, {"tol": 1e-12})
    res = np.array([pyo.value(m.r[i]) for i in m.I])
    st = fit_statistics(m, ["a", "b"], [m.th[1], m.th[2]], [m.r[i].expr for i in m.I], res)
    assert len(st.weak_directions) == 1 and "a" in st.weak_directions[0] and "b" in st.weak_directions[0]
    assert any("not identifiable" in msg for msg in st.messages)
