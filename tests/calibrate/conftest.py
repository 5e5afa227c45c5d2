"""Synthetic plant data for the calibration tests: the three-tank plant on six 4-hour periods.

Data come from the independent simulator (airtaper.simulate) with known true values and
Gaussian noise of stated size (fixed seeds); the fit runs on the Pyomo model. The small plant
and six periods keep the suite fast; the demo's 15-minute, 24-period, three-day case is
benchmarks/bench_calibrate.py.
"""

from __future__ import annotations

import warnings
from pathlib import Path

import pytest

from airtaper.calibrate.synthetic import synthetic_plant_data
from airtaper.layout import load_layout

ROOT = Path(__file__).resolve().parents[2]
THREE = ROOT / "layouts" / "three_tank.toml"

#: True values of the synthetic plant (invented): alpha x F per tank and mu_A (1/d at 20 degC).
#: The layout says alpha x F = 0.40 in every tank and mu_A = 0.80.
TRUE_ALPHA_F = {"T1": 0.32, "T2": 0.37, "T3": 0.46}
TRUE_MU_A = 0.66
DO_SD, NH4_SD = 0.1, 0.2  # noise of the synthetic data, mg/L
# Airflows are logged exactly here: the intervals assume exact airflows (errors in the imposed inputs are
# not part of the least squares; docs/calibration.md says so), so the coverage test must not add them.
INTERVAL_H = 1.0
MODEL_STEPS = 8  # model steps per 4-hour period: 30-min steps, ends on the hourly samples
LAST = "T3"


def three6_file(folder: Path) -> Path:
    """The three-tank layout on six 4-hour periods (eight output steps each), written in ``folder``."""
    path = folder / "three6.toml"
    path.write_text(THREE.read_text() + "\n[horizon]\nn_periods = 6\nsteps_per_period = 8\n")
    return path


@pytest.fixture(scope="session")
def plant_path(tmp_path_factory) -> Path:
    return three6_file(tmp_path_factory.mktemp("three6"))


@pytest.fixture(scope="session")
def plant(plant_path):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return load_layout(plant_path)


def _data(layout, days, seed, folder):
    text, truth, _ = synthetic_plant_data(layout, days=days, alpha_F=TRUE_ALPHA_F, mu_A=TRUE_MU_A,
                                          interval_h=INTERVAL_H, do_sd_mg_L=DO_SD, nh4_sd_mg_L=NH4_SD,
                                          seed=seed, nh4_zones=(LAST,), airflow_sd_fraction=0.0,
                                          tol=1e-3)  # day-repeat tolerance of the simulator (its default)
    path = folder / f"data_{days}d.csv"
    path.write_text(text)
    return path


@pytest.fixture(scope="session")
def data_1day(plant, tmp_path_factory) -> Path:
    return _data(plant, 1, 11, tmp_path_factory.mktemp("data1"))


@pytest.fixture(scope="session")
def data_2day(plant, tmp_path_factory) -> Path:
    return _data(plant, 2, 12, tmp_path_factory.mktemp("data2"))
