"""Settling velocity (Takacs et al. 1991) and the limiting solids flux."""

import numpy as np
import pyomo.environ as pyo
import pytest
from scipy.optimize import brentq

from airtaper.physics.settling import limiting_solids_flux_g_m2_d, takacs_velocity_m_d

# BSM1 settling parameters (Alex et al. 2008): v0' 250 m/d, v0 474 m/d, rh 5.76e-4, rp 2.86e-3 m3/g
BSM1 = dict(v0_max_m_d=250.0, v0_m_d=474.0, rh_m3_g=5.76e-4, rp_m3_g=2.86e-3)


def test_velocity_is_the_double_exponential_clamped():
    # Takacs et al. (1991) eq. 4 written out by hand
    x = np.array([0.0, 5.0, 100.0, 356.0, 3000.0, 10000.0])
    xmin = 7.5
    raw = 474.0 * (np.exp(-5.76e-4 * (x - xmin)) - np.exp(-2.86e-3 * (x - xmin)))
    np.testing.assert_allclose(takacs_velocity_m_d(x, xmin, **BSM1), np.clip(raw, 0.0, 250.0), rtol=1e-14)
    assert takacs_velocity_m_d(0.0, xmin, **BSM1) == 0.0  # below the non-settleable solids


def test_pyomo_and_numpy_give_the_same_velocity():
    m = pyo.ConcreteModel()
    m.x = pyo.Var(initialize=2000.0)
    expr = takacs_velocity_m_d(m.x, 7.5, **BSM1, smoothing_m_d=0.01)
    # away from the clamps the smoothing changes the velocity by far less than 0.01 m/d
    assert pyo.value(expr) == pytest.approx(float(takacs_velocity_m_d(2000.0, 7.5, **BSM1)), abs=1e-6)


def test_limiting_flux_is_the_stationary_point_of_the_total_flux():
    # For a pure exponential velocity vs = v0 exp(-rh X) (rp large, no clamp) the total flux
    # G = v0 X exp(-rh X) + u X has its minimum where dG/dX = v0 exp(-rh X)(1 - rh X) + u = 0
    # (solids flux theory, Ekama et al. 1997); found here with scipy's brentq.
    v0, rh, u = 400.0, 4e-4, 20.0
    kw = dict(v0_max_m_d=1e9, v0_m_d=v0, rh_m3_g=rh, rp_m3_g=50.0)
    # (its local minimum lies beyond rh X = 2, where dG/dX < 0)
    x_star = brentq(lambda x: v0 * np.exp(-rh * x) * (1.0 - rh * x) + u, 2.0 / rh, 20.0 / rh)
    g_star = v0 * x_star * np.exp(-rh * x_star) + u * x_star
    g, x = limiting_solids_flux_g_m2_d(u, 0.0, **kw, x_max_g_m3=60000.0)
    assert g == pytest.approx(g_star, rel=1e-5)
    assert x == pytest.approx(x_star, rel=2e-3)


def test_no_limit_when_the_underflow_velocity_dominates():
    # with u above the steepest fall of vs X the total flux only grows: nothing limits thickening
    g, x = limiting_solids_flux_g_m2_d(500.0, 0.0, v0_max_m_d=1e9, v0_m_d=400.0, rh_m3_g=4e-4, rp_m3_g=50.0)
    assert g == float("inf") and np.isnan(x)


@pytest.mark.parametrize("smoothing", [0.0, 0.01])
def test_velocity_is_finite_for_any_iterate(smoothing):
    # A root solve's Newton step may overshoot to solids far below 0: the velocity there is the clamp's
    # 0 (Takacs et al. 1991, eq. 4: below the non-settleable solids the double exponential is negative),
    # with no overflow and no NaN on the way (raised as errors here; underflow to 0 is exact enough).
    x = np.array([-1e12, -1e6, -3e5, -1e3, 0.0, 7.5, 1e3, 1e6, 1e12])
    with np.errstate(over="raise", invalid="raise", divide="raise"):
        v = takacs_velocity_m_d(x, 7.5, **BSM1, smoothing_m_d=smoothing)
    assert np.all(np.isfinite(v)) and np.all(v >= -smoothing) and np.all(v <= 250.0 + smoothing)
    np.testing.assert_allclose(v[:4], 0.0, atol=smoothing)
