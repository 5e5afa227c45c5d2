"""Helpers shared by the physics tests: evaluate a function on Pyomo Vars and on numpy."""

import numpy as np
import pyomo.environ as pyo
import pytest


def evaluate_with_pyomo(function, *values, **fixed):
    """Build a ConcreteModel with one Var per positional value, call ``function`` on the Vars
    and return ``pyo.value`` of the resulting expression (plus the expression itself)."""
    model = pyo.ConcreteModel()
    variables = []
    for i, v in enumerate(values):
        var = pyo.Var(initialize=float(v))
        model.add_component(f"x{i}", var)
        variables.append(var)
    expression = function(*variables, **fixed)
    return pyo.value(expression), expression


def assert_pyomo_matches_numpy(function, points, rtol=1e-10, **fixed):
    """For each row of ``points`` the Pyomo expression value equals the numpy value (rtol);
    also checks that the vectorised numpy call over all rows gives the same numbers."""
    points = np.asarray(points, dtype=float)
    vectorised = np.asarray(function(*points.T, **fixed), dtype=float)
    for row, vec in zip(points, np.broadcast_to(vectorised, (len(points),)), strict=True):
        pyomo_value, expression = evaluate_with_pyomo(function, *row, **fixed)
        assert type(expression).__module__.startswith("pyomo."), "no Pyomo expression was built"
        scalar = float(function(*row, **fixed))
        assert pyomo_value == pytest.approx(scalar, rel=rtol, abs=1e-300)
        assert vec == pytest.approx(scalar, rel=rtol, abs=1e-300)


@pytest.fixture
def rng():
    return np.random.default_rng(20240611)


@pytest.fixture
def pyomo_check():
    """The :func:`assert_pyomo_matches_numpy` helper."""
    return assert_pyomo_matches_numpy
