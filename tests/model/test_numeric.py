"""The compiled residual function agrees with Pyomo's own evaluation; the complex-step Jacobian with differences."""

import numpy as np
import pyomo.environ as pyo

from airtaper.model.numeric import compile_system


def test_residuals_match_pyomo_on_the_bsm1_model(bsm1_steady):
    system = compile_system(bsm1_steady)
    x = system.values() * 1.01 + 0.01  # away from the solution, so the residuals are not all ~0
    system.store(x)
    try:
        ref = np.array([pyo.value(c.body) - pyo.value(c.upper) for c in system.constraints])
        got = system.residual(x)
        assert np.allclose(got, ref, rtol=1e-12, atol=1e-9)
    finally:
        system.store((x - 0.01) / 1.01)


def test_complex_step_jacobian_matches_central_differences():
    m = pyo.ConcreteModel()
    m.x = pyo.Var([0, 1, 2], initialize={0: 1.2, 1: 0.7, 2: 3.0})
    m.c1 = pyo.Constraint(expr=m.x[0] * pyo.exp(-m.x[1]) + pyo.sqrt(m.x[2] ** 2 + 1) == 2.0)
    m.c2 = pyo.Constraint(expr=m.x[0] / (1 + m.x[2]) - m.x[1] ** 2 == 0.0)
    m.c3 = pyo.Constraint(expr=m.x[0] + m.x[1] + m.x[2] == 5.0)
    s = compile_system(m)
    x = s.values()
    jac = s.jacobian(x)
    h = 1e-6
    fd = np.column_stack([(s.residual(x + h * e) - s.residual(x - h * e)) / (2 * h) for e in np.eye(3)])
    assert np.allclose(jac, fd, rtol=1e-7, atol=1e-8)
