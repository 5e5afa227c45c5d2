"""Shared resolved plants of the plant tests."""

from __future__ import annotations

import warnings
from pathlib import Path

import pytest

from airtaper.layout import load_layout
from airtaper.optimize.horizon import with_periods
from airtaper.plant import resolve_plant

ROOT = Path(__file__).resolve().parents[2]


def _load(name):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return load_layout(str(ROOT / "layouts" / name))


@pytest.fixture(scope="session")
def three_tank_6():
    """Three tanks, six periods of two steps, resolved."""
    return resolve_plant(with_periods(_load("three_tank.toml"), 6, steps_per_period=2))


@pytest.fixture(scope="session")
def demo():
    return resolve_plant(_load("demo.toml"))
