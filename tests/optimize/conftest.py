"""Shared layouts of the optimisation tests: the three-tank plant on short horizons."""

from __future__ import annotations

import warnings
from dataclasses import replace
from pathlib import Path

import pytest

from airtaper.layout import load_layout
from airtaper.optimize.horizon import with_periods

ROOT = Path(__file__).resolve().parents[2]
THREE = ROOT / "layouts" / "three_tank.toml"
DEMO = ROOT / "layouts" / "demo.toml"

#: An invented diurnal flow shape over six 4-hour periods (x mean flow), for tests that
#: need the load to change through the day; the three-tank layout has a constant influent.
FLOW_SHAPE = (0.6, 0.8, 1.15, 1.5, 1.1, 0.85)


def _load(path):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return load_layout(str(path))


@pytest.fixture(scope="session")
def three_tank():
    return _load(THREE)


@pytest.fixture(scope="session")
def three_tank_6(three_tank):
    """Three tanks, six periods of two steps."""
    return with_periods(three_tank, 6, steps_per_period=2)


@pytest.fixture(scope="session")
def three_tank_diurnal(three_tank_6):
    """Three tanks, six periods, the influent flow following :data:`FLOW_SHAPE` (same mean)."""
    q = three_tank_6.influent.flow_m3_d[0]
    return replace(three_tank_6, influent=replace(three_tank_6.influent, flow_m3_d=tuple(q * f for f in FLOW_SHAPE)))


@pytest.fixture(scope="session")
def demo():
    return _load(DEMO)


@pytest.fixture(scope="session")
def fenwhistle():
    """The invented plant with a swing zone and three unlike blowers (layouts/fenwhistle.toml)."""
    return _load(ROOT / "layouts" / "fenwhistle.toml")
