"""Shared, module-scoped models for the model-layer tests (built once per session)."""

import numpy as np
import pyomo.environ as pyo
import pytest

from airtaper.layout.bsm1 import bsm1_layout
from airtaper.layout.parse import load_layout
from airtaper.model import build_steady_model, initialise_steady
from airtaper.process.stoichiometry import cod_composition, cod_of_n2, n2_yield, n_composition

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


def plant_balance(m, t, p=None):
    """COD and N net inflow rates of the whole train at step t (g/d): in - out - O2 - N2 terms.

    COD (oxygen equivalents): SO counts -1, nitrate -cod_per_no3_n, so the oxygen transferred
    removes COD and N2 formation adds ``-cod_of_n2`` per g N2-N (Henze et al. 1987 ThOD
    convention); at steady state, or summed over a periodic day, both must vanish.
    """
    d = m.train_data
    p = m.period_of_step[t] if p is None else p
    par = d.params[p - 1]
    cod, n = cod_composition(par), n_composition(par)
    comps = list(m.COMPONENTS)
    cin = d.influent_conc[p - 1]
    q_in = d.influent_m3_d[p - 1]
    ce = np.array([pyo.value(m.effluent_conc[t, c]) for c in comps])
    cu = np.array([pyo.value(m.underflow_conc[t, c]) for c in comps])
    qe, qw = pyo.value(m.effluent_m3_d[p]), m.waste_m3_d[p].value
    o2 = sum(pyo.value(m.otr_kg_h[t, z]) for z in m.AERATED_ZONES) * 1000 * 24  # g/d
    n2 = sum(m.zone_volume_m3[z] * sum(n2_yield(par)[j] * pyo.value(m.rate[t, z, name])
                                       for j, name in enumerate(m.PROCESSES)) for z in m.ZONES)
    cod_net = q_in * cin @ cod - (qe * ce + qw * cu) @ cod - o2 - cod_of_n2(par) * n2
    n_net = q_in * cin @ n - (qe * ce + qw * cu) @ n - n2
    return cod_net, n_net, q_in * cin @ cod, q_in * cin @ n


@pytest.fixture(name="plant_balance")
def _plant_balance_fixture():
    return plant_balance
