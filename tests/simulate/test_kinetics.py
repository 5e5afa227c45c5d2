"""The simulator's ASM1 rates against the rate equations written out by hand (Henze et al. 1987, Table 6.1)."""

import math

import numpy as np
import pytest

from airtaper.layout.types import ASM1_COMPONENTS
from airtaper.process.asm1 import ASM1_20C, BSM1_15C
from airtaper.simulate.kinetics import process_rates


@pytest.mark.parametrize("params", [ASM1_20C, BSM1_15C])
def test_rates_match_the_asm1_equations_for_one_state_and_for_many(params, asm1_by_hand):
    POINT, by_hand = asm1_by_hand  # Henze et al. (1987), Table 6.1 (tests/conftest.py)
    rng = np.random.default_rng(3)
    states = [dict(POINT)] + [{k: v * rng.uniform(0.2, 3.0) for k, v in POINT.items()} for _ in range(5)]
    C = np.array([[s[k] for k in ASM1_COMPONENTS] for s in states]).T  # (13, states)
    many = process_rates(C, params)
    for j, s in enumerate(states):
        one = process_rates(C[:, j], params)  # (13,): one volume
        for g, g_many, ref in zip(one, many[:, j], by_hand(s, params)):
            assert math.isclose(g, ref, rel_tol=1e-12) and g == g_many
    # (13, zones, columns), as the right-hand side calls it
    np.testing.assert_array_equal(process_rates(C.reshape(13, 2, 3), params), many.reshape(8, 2, 3))


def test_negative_dissolved_concentrations_enter_clipped_and_no_biomass_stays_finite(asm1_by_hand):
    POINT = asm1_by_hand[0]
    c = np.array([dict(POINT, SS=-0.1, SO=-0.01, SNO=-0.2, SNH=-0.05)[k] for k in ASM1_COMPONENTS])
    r = process_rates(c, ASM1_20C)
    assert r[0] == 0.0 and r[1] == 0.0 and r[2] == 0.0  # no substrate, no growth
    c = np.array([dict(POINT, XBH=0.0)[k] for k in ASM1_COMPONENTS])
    r = process_rates(c, ASM1_20C)
    assert np.all(np.isfinite(r)) and r[6] == 0.0 and r[7] == 0.0
