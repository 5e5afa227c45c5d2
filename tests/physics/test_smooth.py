"""Smooth max, min and step (the CHKS smoothing of the plus function), on floats, numpy and Pyomo."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate, stats

from airtaper.physics.smooth import smooth_max, smooth_min, smooth_step

values = st.floats(-1e3, 1e3, allow_nan=False)
widths = st.floats(1e-3, 10.0)


@settings(max_examples=100, deadline=None)
@given(values, values, widths)
def test_smooth_max_and_min_stay_within_half_the_smoothing(a, b, s):
    # the bounds of the CHKS plus function (Chen & Mangasarian 1996, doi:10.1007/BF00249052):
    # above max(x, 0), at most beta = s / 2 above it
    hi, lo = smooth_max(a, b, s), smooth_min(a, b, s)
    tol = 1e-12 * (abs(a) + abs(b) + s)
    assert max(a, b) - tol <= hi <= max(a, b) + s / 2 + tol
    assert min(a, b) - s / 2 - tol <= lo <= min(a, b) + tol
    assert hi + lo == pytest.approx(a + b, abs=tol)  # smax + smin = a + b exactly (one shared root)


def test_excess_is_half_the_smoothing_at_a_tie_and_fades_away_from_it():
    assert smooth_max(3.0, 3.0, 0.4) == pytest.approx(3.2, rel=1e-15)
    assert smooth_min(3.0, 3.0, 0.4) == pytest.approx(2.8, rel=1e-15)
    # |a - b| = 100 s: excess s^2 / (4 |a - b|) to leading order, here 1e-3 of s (rational series)
    excess = smooth_max(100.0, 0.0, 1.0) - 100.0
    assert excess == pytest.approx(1.0 / 400.0, rel=1e-4)


def test_step_is_a_student_t_distribution_function():
    # The CHKS density d(t) = 2 / (t^2 + 4)^1.5 is Student's t with 2 degrees of freedom scaled by
    # sqrt(2), so step(x, w) = T2(sqrt(2) x / w); T2 from scipy.stats (an independent library).
    x = np.array([-50.0, -3.0, -1.0, -0.2, 0.0, 0.2, 1.0, 3.0, 50.0])
    w = 1.7
    np.testing.assert_allclose(smooth_step(x, w), stats.t(df=2).cdf(math.sqrt(2.0) * x / w), rtol=1e-12, atol=1e-15)
    assert smooth_step(0.0, w) == 0.5
    assert smooth_step(w, w) == pytest.approx(0.5 * (1 + 1 / math.sqrt(2)), rel=1e-15)  # the 0.85 of the docstring


@pytest.mark.parametrize("x", [-4.0, -0.3, 0.0, 0.5, 6.0])
def test_step_is_the_derivative_of_the_smooth_plus_and_integrates_back_to_it(x):
    w = 0.8
    h = 1e-5
    slope = (smooth_max(x + h, 0.0, w) - smooth_max(x - h, 0.0, w)) / (2 * h)
    assert slope == pytest.approx(smooth_step(x, w), rel=1e-8)
    # plus(x) = integral of the step from -inf to x (scipy quad, the tail to -inf in closed form being 0)
    area, _ = integrate.quad(lambda y: smooth_step(y, w), -np.inf, x, epsabs=1e-12, epsrel=1e-12)
    assert area == pytest.approx(smooth_max(x, 0.0, w), rel=1e-8, abs=1e-10)


def test_pyomo_and_numpy_give_the_same_numbers(pyomo_check, rng):
    pts = rng.uniform(-20.0, 20.0, (12, 2))
    pyomo_check(lambda a, b: smooth_max(a, b, 0.7), pts, rtol=1e-14)
    pyomo_check(lambda a, b: smooth_min(a, b, 0.7), pts, rtol=1e-14)
    pyomo_check(lambda x: smooth_step(x, 2.5), pts[:, :1], rtol=1e-14)


def test_approaches_the_hard_functions_as_the_smoothing_vanishes():
    a = np.array([-2.0, 0.0, 1.0, 5.0])
    b = np.array([1.0, 0.0, -1.0, 5.0])
    for s in (1e-2, 1e-4, 1e-6):
        assert np.max(np.abs(smooth_max(a, b, s) - np.maximum(a, b))) <= s / 2 + 1e-15
        assert np.max(np.abs(smooth_min(a, b, s) - np.minimum(a, b))) <= s / 2 + 1e-15
    np.testing.assert_allclose(smooth_step(np.array([-1.0, 1.0]), 1e-6), [0.0, 1.0], atol=1e-12)
