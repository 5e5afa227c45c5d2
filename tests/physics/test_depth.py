"""Clean-water saturation at depth, effective-depth form (Metcalf & Eddy 2014, 5th ed.)."""

import numpy as np
import pytest

from airtaper.physics import depth


def test_surface_value_is_benson_krause_20C():
    # Zero submergence: C*inf20 = C*s,20 = 9.092 mg/L (APHA Standard Methods 4500-O table, 20 degC).
    assert depth.c_inf20_mg_L(0.0) == pytest.approx(9.092, abs=0.001)


def test_effective_depth_form():
    # Metcalf & Eddy (2014), 5th ed.: C*inf20 = C*s,20 (1 + de Df / Pa), Pa = 10.33 m of water.
    # Fine pore, de = 0.4, Df = 5 m: 9.092 * (1 + 0.4 * 5 / 10.33) = 10.852 mg/L.
    assert depth.c_inf20_mg_L(5.0, 0.4) == pytest.approx(10.852, abs=0.002)
    assert depth.atmosphere_water_column_m() == pytest.approx(10.33, abs=0.005)


def test_default_de_and_monotonic():
    assert depth.DEFAULT_EFFECTIVE_DEPTH_FRACTION == 0.4  # fine pore, Metcalf & Eddy 5th ed. (from memory)
    d = np.linspace(0.0, 8.0, 9)
    c = depth.c_inf20_mg_L(d)
    assert np.all(np.diff(c) > 0)
    assert np.all(depth.c_inf20_mg_L(d, 0.25) < depth.c_inf20_mg_L(d, 0.45) + 1e-12)


def test_pyomo_matches_numpy(rng, pyomo_check):
    points = np.column_stack([rng.uniform(0.5, 8.0, 10), rng.uniform(0.2, 0.5, 10)])
    pyomo_check(depth.c_inf20_mg_L, points)
