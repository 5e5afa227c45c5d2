"""The Pyomo ASM1 rate expressions against the rate equations written out by hand."""

import math

import pyomo.environ as pyo
import pytest

from airtaper.model.asm1_rates import RATE_ORDER, asm1_process_rates
from airtaper.process.asm1 import ASM1_20C, BSM1_15C
from airtaper.process.stoichiometry import PROCESSES

POINT = dict(SI=30.0, SS=5.0, XI=1000.0, XS=60.0, XBH=2400.0, XBA=140.0, XP=400.0, SO=1.5, SNO=6.0,
             SNH=2.5, SND=0.8, XND=4.0, SALK=5.0)


def _by_hand(c, p):
    # Henze et al. (1987), Table 6.1: the eight process rates of ASM1
    mh = c["SS"] / (p.K_S + c["SS"])
    so_h = c["SO"] / (p.K_OH + c["SO"])
    ih = p.K_OH / (p.K_OH + c["SO"])
    no = c["SNO"] / (p.K_NO + c["SNO"])
    ratio = c["XS"] / c["XBH"]
    hyd = p.k_h * ratio / (p.K_X + ratio) * (so_h + p.eta_h * ih * no) * c["XBH"]
    return [
        p.mu_H * mh * so_h * c["XBH"],
        p.mu_H * mh * ih * no * p.eta_g * c["XBH"],
        p.mu_A * c["SNH"] / (p.K_NH + c["SNH"]) * c["SO"] / (p.K_OA + c["SO"]) * c["XBA"],
        p.b_H * c["XBH"],
        p.b_A * c["XBA"],
        p.k_a * c["SND"] * c["XBH"],
        hyd,
        hyd * c["XND"] / c["XS"],
    ]


@pytest.mark.parametrize("params", [ASM1_20C, BSM1_15C])
def test_rates_match_the_asm1_equations(params):
    m = pyo.ConcreteModel()
    m.c = pyo.Var(list(POINT), initialize=POINT)
    got = [pyo.value(r) for r in asm1_process_rates({k: m.c[k] for k in POINT}, params)]
    for g, ref in zip(got, _by_hand(POINT, params)):
        assert math.isclose(g, ref, rel_tol=1e-12)


def test_rates_accept_floats_and_stay_finite_without_biomass():
    c = dict(POINT, XBH=0.0, XS=10.0)
    rates = asm1_process_rates(c, ASM1_20C)
    assert all(math.isfinite(r) for r in rates)
    assert rates[6] == 0.0 and rates[7] == 0.0


#: Henze et al. (1987), Table 6.1: the processes in the order of its rows (and of _by_hand)
HENZE_ORDER = ("aerobic_growth_heterotrophs", "anoxic_growth_heterotrophs", "aerobic_growth_autotrophs",
               "decay_heterotrophs", "decay_autotrophs", "ammonification", "hydrolysis_organics",
               "hydrolysis_organic_n")


def test_rate_order_is_the_petersen_row_order():
    assert RATE_ORDER == PROCESSES
    assert RATE_ORDER == HENZE_ORDER
