"""Synthetic plant data for the calibration tests: the demo plant on six 4-hour periods.

Data come from the independent simulator (airtaper.simulate) with known true values and
Gaussian noise of stated size (fixed seeds); the fit runs on the Pyomo model. Six
periods keep the suite fast; the 15-minute, 24-period case is benchmarks/bench_calibrate.py.
"""

from __future__ import annotations

import re
import shutil
import warnings
from pathlib import Path

import pytest

from airtaper.calibrate.synthetic import synthetic_plant_data
from airtaper.layout import load_layout

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "layouts" / "demo.toml"

#: True values of the synthetic plant (invented): alpha x F per zone and mu_A (1/d at 20 degC).
TRUE_ALPHA_F = {"Z2": 0.31, "Z3": 0.35, "Z4": 0.42, "Z5": 0.48, "Z6": 0.52}
TRUE_MU_A = 0.66
DO_SD, NH4_SD = 0.1, 0.2  # noise of the synthetic data, mg/L
# Airflows are logged exactly here: the intervals assume exact airflows (errors in the imposed inputs are
# not part of the least squares; docs/calibration.md says so), so the coverage test must not add them.
INTERVAL_H = 1.0
MODEL_STEPS = 8  # model steps per 4-hour period: 30-min steps, ends on the hourly samples


def demo6_file(folder: Path) -> Path:
    """The demo layout on six 4-hour periods (eight output steps each), written in ``folder``."""
    text = DEMO.read_text().replace("n_periods = 24\nsteps_per_period = 4", "n_periods = 6\nsteps_per_period = 8")
    assert "n_periods = 6" in text
    # the hourly inlet-air temperatures: one mean value (they do not enter the fit)
    text = re.sub(r"\ntemperature_C = \[[^\]]*\]", "\ntemperature_C = 18.0", text, count=1)
    path = folder / "demo6.toml"
    path.write_text(text)
    shutil.copy(ROOT / "layouts" / "demo_influent.csv", folder / "demo_influent.csv")
    return path


@pytest.fixture(scope="session")
def demo6_path(tmp_path_factory) -> Path:
    return demo6_file(tmp_path_factory.mktemp("demo6"))


@pytest.fixture(scope="session")
def demo6(demo6_path):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return load_layout(demo6_path)


def _data(layout, days, seed, folder):
    text, truth, _ = synthetic_plant_data(layout, days=days, alpha_F=TRUE_ALPHA_F, mu_A=TRUE_MU_A,
                                          interval_h=INTERVAL_H, do_sd_mg_L=DO_SD, nh4_sd_mg_L=NH4_SD,
                                          seed=seed, nh4_zones=("Z6",), airflow_sd_fraction=0.0)
    path = folder / f"data_{days}d.csv"
    path.write_text(text)
    return path


@pytest.fixture(scope="session")
def data_1day(demo6, tmp_path_factory) -> Path:
    return _data(demo6, 1, 11, tmp_path_factory.mktemp("data1"))


@pytest.fixture(scope="session")
def data_2day(demo6, tmp_path_factory) -> Path:
    return _data(demo6, 2, 12, tmp_path_factory.mktemp("data2"))
