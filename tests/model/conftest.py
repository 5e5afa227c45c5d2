"""Shared, module-scoped models for the model-layer tests (built once per session)."""

import pytest

from airtaper.layout.bsm1 import bsm1_layout
from airtaper.layout.parse import load_layout
from airtaper.model import build_steady_model, initialise_steady

DEMO = "layouts/demo.toml"
#: A tapered airflow schedule for the demo's grid zones (Sm3/h), invented for the tests.
DEMO_AIRFLOW = {"Z2": 2100.0, "Z3": 1450.0, "Z4": 1100.0, "Z5": 800.0, "Z6": 650.0}


@pytest.fixture(scope="session")
def demo_layout():
    import pathlib

    root = pathlib.Path(__file__).resolve().parents[2]
    return load_layout(str(root / DEMO))


@pytest.fixture(scope="session")
def bsm1_layered():
    return bsm1_layout("layered", n_periods=24)


@pytest.fixture(scope="session")
def bsm1_steady(bsm1_layered):
    m = build_steady_model(bsm1_layered)
    initialise_steady(m)
    return m


@pytest.fixture(scope="session")
def demo_steady(demo_layout):
    m = build_steady_model(demo_layout, airflow=DEMO_AIRFLOW)
    initialise_steady(m)
    return m
