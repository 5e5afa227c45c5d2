"""Settling velocity (Takacs et al. 1991) and the limiting solids flux."""

import math

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


def _takacs_by_hand(x, x_min, v0_max, v0, rh, rp):
    """Takacs, Patry & Nolasco (1991), Water Research 25(10):1263-1271, doi:10.1016/0043-1354(91)90066-Y,
    eq. 4, written with the math module: vs = max(0, min(v0', v0 (exp(-rh (X - Xmin)) - exp(-rp (X - Xmin)))))."""
    return max(0.0, min(v0_max, v0 * (math.exp(-rh * (x - x_min)) - math.exp(-rp * (x - x_min)))))


def test_velocity_with_the_bsm1_parameters_against_the_published_equation():
    # BSM1 settler (Alex et al. 2008, BSM1 description): v0' 250 m/d, v0 474 m/d, rh 0.000576 m3/g,
    # rp 0.00286 m3/g, fns 0.00228; the feed TSS of 3000 g/m3 is chosen for the test.
    x_min = 0.00228 * 3000.0
    xs = [0.0, x_min, 10.0, 50.0, 200.0, 500.0, 701.6, 1000.0, 3000.0, 6000.0, 12000.0]
    got = takacs_velocity_m_d(np.array(xs), x_min, **BSM1)
    want = [_takacs_by_hand(x, x_min, 250.0, 474.0, 0.000576, 0.00286) for x in xs]
    np.testing.assert_allclose(got, want, rtol=1e-13, atol=1e-12)
    # with these parameters the double exponential peaks above v0' (so the clamp acts): its maximum is at
    # X - Xmin = ln(rp / rh) / (rp - rh) (d vs / dX = 0), where it reaches about 252.7 m/d
    peak = math.log(0.00286 / 0.000576) / (0.00286 - 0.000576)
    raw_peak = 474.0 * (math.exp(-0.000576 * peak) - math.exp(-0.00286 * peak))
    assert raw_peak == pytest.approx(252.7, abs=0.1)
    assert float(takacs_velocity_m_d(x_min + peak, x_min, **BSM1)) == 250.0
    # the clamp holds on a band around the peak whose edges are where the raw curve crosses v0' (brentq)
    raw = lambda d: 474.0 * (math.exp(-0.000576 * d) - math.exp(-0.00286 * d)) - 250.0  # noqa: E731
    lo, hi = brentq(raw, 1.0, peak), brentq(raw, peak, 5000.0)
    assert float(takacs_velocity_m_d(x_min + lo - 1.0, x_min, **BSM1)) < 250.0
    assert float(takacs_velocity_m_d(x_min + 0.5 * (lo + hi), x_min, **BSM1)) == 250.0
    assert float(takacs_velocity_m_d(x_min + hi + 1.0, x_min, **BSM1)) < 250.0


def test_smooth_velocity_stays_within_the_smoothing_of_the_published_equation(pyomo_check):
    x_min, s = 0.00228 * 3000.0, 0.5
    xs = np.array([0.0, 3.0, 100.0, 650.0, 701.6, 2000.0, 9000.0])
    smooth = takacs_velocity_m_d(xs, x_min, **BSM1, smoothing_m_d=s)
    hard = np.array([_takacs_by_hand(x, x_min, 250.0, 474.0, 0.000576, 0.00286) for x in xs])
    assert np.all(np.abs(smooth - hard) <= s + 1e-12)  # two clamps, each at most s / 2 away
    pyomo_check(lambda x: takacs_velocity_m_d(x, x_min, **BSM1, smoothing_m_d=s), xs[:, None], rtol=1e-13)


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
