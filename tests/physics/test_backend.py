"""Type dispatch of the elementary functions (float, numpy, Pyomo)."""

import math

import numpy as np
import pyomo.environ as pyo
import pytest

from airtaper.physics import backend as be


@pytest.fixture
def model():
    m = pyo.ConcreteModel()
    m.x = pyo.Var(initialize=1.7)
    m.p = pyo.Param(initialize=2.0, mutable=True)
    return m


def test_detects_pyomo(model):
    assert be.is_pyomo(model.x) and be.is_pyomo(model.p) and be.is_pyomo(model.x + 1)
    assert not be.is_pyomo(1.0) and not be.is_pyomo(np.float64(1.0)) and not be.is_pyomo(np.ones(3))
    assert be.any_pyomo(1.0, model.x) and not be.any_pyomo(1.0, 2)
    assert be.is_numeric(np.ones(2)) and be.is_numeric(3) and not be.is_numeric(model.x) and not be.is_numeric(True)


@pytest.mark.parametrize(("name", "reference"), [("exp", math.exp), ("log", math.log), ("sqrt", math.sqrt)])
def test_functions_on_all_types(model, name, reference):
    function = getattr(be, name)
    assert function(1.7) == pytest.approx(reference(1.7), rel=1e-15)
    np.testing.assert_allclose(function(np.array([1.7, 2.5])), [reference(1.7), reference(2.5)], rtol=1e-15)
    expression = function(model.x)
    assert be.is_pyomo(expression)
    assert pyo.value(expression) == pytest.approx(reference(1.7), rel=1e-15)
    assert be.value(expression) == pytest.approx(reference(1.7), rel=1e-15)


def test_power(model):
    assert be.power(2.0, 0.5) == pytest.approx(math.sqrt(2.0))
    with pytest.warns(RuntimeWarning):
        assert math.isnan(be.power(-2.0, 0.5))  # not a Python complex
    assert pyo.value(be.power(model.x, 0.3)) == pytest.approx(1.7**0.3, rel=1e-15)
    assert pyo.value(be.power(model.p, model.x)) == pytest.approx(2.0**1.7, rel=1e-15)
