"""Shared fixtures of the simulator tests: the BSM1 plant (factory doubles as fixture)."""

import pytest

from airtaper.layout.bsm1 import bsm1_layout


@pytest.fixture(scope="session")
def bsm1_layered():
    """BSM1 open-loop plant with its 10-layer settler (Alex et al. 2008)."""
    return bsm1_layout("layered", n_periods=24)


@pytest.fixture(scope="session")
def bsm1_ideal():
    """BSM1 plant with an ideal separator in place of the settler (not part of the benchmark)."""
    return bsm1_layout("ideal", n_periods=24)
