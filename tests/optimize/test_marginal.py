"""Marginal costs of the limits from the duals (airtaper.optimize.marginal).

The checks are against analytic derivatives of small problems (calculus, no outside source needed) and
against finite differences of re-solves of a plant with a swing zone.
"""

from __future__ import annotations

import pyomo.environ as pyo
import pytest

from airtaper.optimize.marginal import limit_derivative
from airtaper.solve.ipopt import solve_nlp

pytestmark = pytest.mark.solver


def _problem(form: str, q: float, held: float = 1.0):
    """min (x - 3)^2 with x held above q (times a fixed 'held' variable, as a swing zone's minimum is written):
    f* = (q h - 3)^2 for q h > 3, so d f*/d q = 2 (q h - 3) h."""
    m = pyo.ConcreteModel()
    m.x = pyo.Var(initialize=0.0)
    m.q = pyo.Param(mutable=True, initialize=q)
    m.h = pyo.Var(initialize=held)
    m.h.fix()
    m.obj = pyo.Objective(expr=(m.x - 3.0) ** 2)
    if form == "bound":  # Pyomo keeps q as the lower bound
        m.c = pyo.Constraint(expr=m.x >= m.q)
    elif form == "body":  # a fixed variable on the right: Pyomo writes q * h - x <= 0
        m.c = pyo.Constraint(expr=m.x >= m.q * m.h)
    else:  # written as an upper bound of the negated body
        m.c = pyo.Constraint(expr=-m.x <= -m.q)
    return m


@pytest.mark.parametrize("form", ["bound", "body", "negated"])
@pytest.mark.parametrize("q", [3.5, 4.0, 5.25])
def test_limit_derivative_is_the_analytic_derivative_whichever_side_pyomo_puts_the_limit(form, q):
    m = _problem(form, q)
    r = solve_nlp(m, {"tol": 1e-10})
    assert r.ok
    assert limit_derivative(r, [m.c], m.q) == pytest.approx(2.0 * (q - 3.0), rel=1e-6)
    assert pyo.value(m.q) == q  # the parameter is left where it was


def test_a_limit_not_held_or_not_binding_costs_nothing():
    m = _problem("body", 4.0, held=0.0)  # the minimum is off (a swing zone not aerated): x >= 0 does not bind
    r = solve_nlp(m, {"tol": 1e-10})
    assert r.ok and limit_derivative(r, [m.c], m.q) == pytest.approx(0.0, abs=1e-8)
    m = _problem("bound", 2.0)  # x = 3 lies above the minimum
    r = solve_nlp(m, {"tol": 1e-10})
    assert r.ok and limit_derivative(r, [m.c], m.q) == pytest.approx(0.0, abs=1e-8)


@pytest.mark.slow
def test_a_swing_zones_do_minimum_costs_what_resolves_say(fenwhistle):
    """Fenwhistle's swing zone Z2 (its DO minimum held only in the periods it is aerated): the marginal cost from
    the duals against the central difference of warm re-solves with the staged swing states kept; before the
    constraint's side was read, the summed duals reported a raised minimum as a saving."""
    from airtaper.optimize.diurnal import StudyOptions, run_optimization
    from airtaper.optimize.marginal import raw_derivatives

    study = run_optimization(fenwhistle, StudyOptions(verify=False)).study
    assert study.problem.swing_states is not None and "Z2" in study.problem.swing_states
    r = study.resolve()
    assert r is not None and r.ok
    dual = raw_derivatives(study.problem, r)[("do_min_mg_L", "Z2")]
    value = float(pyo.value(study.m.opt.do_min_mg_L["Z2"]))
    d = 0.05
    energies = []
    for v in (value + d, value - d):
        study.set_limit("do_min", v, "Z2")
        again = study.resolve()
        assert again is not None and again.ok
        energies.append(study.goal())
    study.set_limit("do_min", value, "Z2")
    fd = (energies[0] - energies[1]) / (2 * d)
    assert fd > 0  # a higher minimum in the aerated periods costs air
    assert dual == pytest.approx(fd, rel=0.10), (dual, fd)
