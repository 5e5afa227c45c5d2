"""The Pyomo ASM1 rate expressions against the rate equations written out by hand."""

import math

import pyomo.environ as pyo
import pytest

from airtaper.model.asm1_rates import RATE_ORDER, asm1_process_rates
from airtaper.process.asm1 import ASM1_20C, BSM1_15C
from airtaper.process.stoichiometry import PROCESSES


@pytest.mark.parametrize("params", [ASM1_20C, BSM1_15C])
def test_rates_match_the_asm1_equations(params, asm1_by_hand):
    POINT, by_hand = asm1_by_hand  # Henze et al. (1987), Table 6.1 (tests/conftest.py)
    m = pyo.ConcreteModel()
    m.c = pyo.Var(list(POINT), initialize=POINT)
    got = [pyo.value(r) for r in asm1_process_rates({k: m.c[k] for k in POINT}, params)]
    for g, ref in zip(got, by_hand(POINT, params)):
        assert math.isclose(g, ref, rel_tol=1e-12)


def test_rates_accept_floats_and_stay_finite_without_biomass(asm1_by_hand):
    c = dict(asm1_by_hand[0], XBH=0.0, XS=10.0)
    rates = asm1_process_rates(c, ASM1_20C)
    assert all(math.isfinite(r) for r in rates)
    assert rates[6] == 0.0 and rates[7] == 0.0


#: Henze et al. (1987), Table 6.1: the processes in the order of its rows (and of the rates by hand in tests/conftest.py)
HENZE_ORDER = ("aerobic_growth_heterotrophs", "anoxic_growth_heterotrophs", "aerobic_growth_autotrophs",
               "decay_heterotrophs", "decay_autotrophs", "ammonification", "hydrolysis_organics",
               "hydrolysis_organic_n")


def test_rate_order_is_the_petersen_row_order():
    assert RATE_ORDER == PROCESSES
    assert RATE_ORDER == HENZE_ORDER
