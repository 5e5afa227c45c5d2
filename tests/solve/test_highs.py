"""LP and MILP through HiGHS."""

import itertools

import pyomo.environ as pe
import pytest

from airtaper.errors import ModelError
from airtaper.solve import SolveStatus, solve_milp

pytestmark = pytest.mark.solver


def test_textbook_lp_optimum_and_shadow_prices():
    # Hillier & Lieberman, Introduction to Operations Research, Wyndor Glass Co. example:
    # max 3 x1 + 5 x2, x1 <= 4, 2 x2 <= 12, 3 x1 + 2 x2 <= 18 -> (2, 6), Z = 36,
    # shadow prices 0, 1.5, 1 (from memory)
    m = pe.ConcreteModel()
    m.x1 = pe.Var(bounds=(0, None))
    m.x2 = pe.Var(bounds=(0, None))
    m.plant1 = pe.Constraint(expr=m.x1 <= 4)
    m.plant2 = pe.Constraint(expr=2 * m.x2 <= 12)
    m.plant3 = pe.Constraint(expr=3 * m.x1 + 2 * m.x2 <= 18)
    m.z = pe.Objective(expr=3 * m.x1 + 5 * m.x2, sense=pe.maximize)
    r = solve_milp(m)
    assert r.status is SolveStatus.OPTIMAL and not r.is_mip
    assert r.objective == pytest.approx(36.0)
    assert (pe.value(m.x1), pe.value(m.x2)) == pytest.approx((2.0, 6.0))
    # same sign convention as the NLP bridge: d Z*/d b
    assert r.dual(m.plant1) == pytest.approx(0.0, abs=1e-9)
    assert r.dual(m.plant2) == pytest.approx(1.5)
    assert r.dual(m.plant3) == pytest.approx(1.0)


def test_small_milp_against_enumeration():
    # Reference: brute-force enumeration of every 0/1 choice of a small knapsack
    values = [10, 13, 7, 8, 9, 4]
    weights = [5, 7, 3, 4, 5, 2]
    cap = 14
    best = max(
        sum(v for v, c in zip(values, pick) if c)
        for pick in itertools.product((0, 1), repeat=len(values))
        if sum(w for w, c in zip(weights, pick) if c) <= cap
    )
    m = pe.ConcreteModel()
    m.I = pe.RangeSet(0, len(values) - 1)
    m.y = pe.Var(m.I, domain=pe.Binary)
    m.cap = pe.Constraint(expr=sum(weights[i] * m.y[i] for i in m.I) <= cap)
    m.o = pe.Objective(expr=sum(values[i] * m.y[i] for i in m.I), sense=pe.maximize)
    r = solve_milp(m, time_limit=30, rel_gap=0.0)
    assert r.status is SolveStatus.OPTIMAL and r.is_mip and r.has_solution
    assert r.objective == pytest.approx(best)
    assert sum(values[i] * round(pe.value(m.y[i])) for i in m.I) == best
    assert r.gap == pytest.approx(0.0, abs=1e-9)
    assert len(r.constraint_duals) == 0


def test_infeasible_lp_is_a_status():
    m = pe.ConcreteModel()
    m.x = pe.Var(bounds=(0, 1))
    m.c = pe.Constraint(expr=m.x >= 2)
    m.o = pe.Objective(expr=m.x)
    r = solve_milp(m)
    assert r.status is SolveStatus.INFEASIBLE and not r.has_solution and r.objective is None


def test_a_milp_with_every_integer_fixed_is_solved_without_duals():
    """A dispatch whose every blower is ruled out (all binaries fixed to 0) is an LP to airtaper but HiGHS
    keeps it a MIP and gives no duals: the optimum is still returned (here x = 0, all demand short)."""
    m = pe.ConcreteModel()
    m.y = pe.Var([0, 1], domain=pe.Binary)
    m.x = pe.Var(bounds=(0, None))
    m.short = pe.Var(bounds=(0, None))
    for j in (0, 1):
        m.y[j].fix(0)
    m.cap = pe.Constraint(expr=m.x <= 5 * m.y[0] + 5 * m.y[1])
    m.demand = pe.Constraint(expr=m.x + m.short >= 10)
    m.o = pe.Objective(expr=m.x + 100 * m.short)
    r = solve_milp(m)
    assert r.status is SolveStatus.OPTIMAL and r.has_solution
    assert r.objective == pytest.approx(1000.0) and pe.value(m.short) == pytest.approx(10.0)


def test_nonlinear_model_is_refused():
    m = pe.ConcreteModel()
    m.x = pe.Var(bounds=(0, 1))
    m.c = pe.Constraint(expr=m.x**2 >= 0.25)  # (HiGHS takes quadratic objectives only)
    m.o = pe.Objective(expr=m.x)
    with pytest.raises(ModelError, match="HiGHS"):
        solve_milp(m)
