"""Fixtures shared by the test folders."""

import pytest


@pytest.fixture(params=[(1e-5, 1e-5), (3e-6, 7e-6)], ids=["default", "perturbed"])
def day_tolerances(request) -> dict:
    """Solver tolerances of a simulated day (``rtol``, ``atol`` of :func:`airtaper.simulate.periodic`): the
    default pair and a perturbed one, so that a result compared across ways of reaching the repeating day
    does not hold for one set of round-off only."""
    rtol, atol = request.param
    return {"rtol": rtol, "atol": atol}


#: One activated-sludge state (g/m3 as the ASM1 components) for the rate checks of the simulator and the model.
ASM1_POINT = dict(SI=30.0, SS=5.0, XI=1000.0, XS=60.0, XBH=2400.0, XBA=140.0, XP=400.0, SO=1.5, SNO=6.0,
                  SNH=2.5, SND=0.8, XND=4.0, SALK=5.0)


def asm1_rates_by_hand(c, p) -> list:
    """Henze et al. (1987), Table 6.1: the eight process rates of ASM1, written out by hand."""
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


@pytest.fixture(scope="session")
def asm1_by_hand():
    """(a state, the ASM1 rates by hand): the one reference of the simulator's and the model's rate checks."""
    return dict(ASM1_POINT), asm1_rates_by_hand
