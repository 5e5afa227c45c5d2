"""Fitted clean-water SOTE curves."""

import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from airtaper.errors import InputError
from airtaper.physics import sote
from airtaper.physics.extrapolation import ExtrapolationWarning, SoteExtrapolationWarning


def synthetic_points(a=-0.18, b=0.22, c=0.95, noise=0.0, seed=1):
    """Points generated from the pinned form with known exponents (invented diffuser)."""
    rng = np.random.default_rng(seed)
    q = np.tile([1.0, 2.0, 3.0, 4.5, 6.0], 4)
    rho = np.repeat([8.0, 8.0, 16.0, 16.0], 5)
    df = np.repeat([4.0, 6.0, 4.0, 6.0], 5)
    s = 30.0 * (q / 3.0) ** a * (rho / 12.0) ** b * (df / 5.0) ** c
    s = s * (1.0 + noise * rng.standard_normal(s.size))
    return q, s, rho, df


def test_recovers_known_exponents_exactly():
    q, s, rho, df = synthetic_points()
    curve = sote.fit_sote_curve(q, s, rho, df, name="disc")
    assert curve.airflow_exponent == pytest.approx(-0.18, abs=1e-8)
    assert curve.density_exponent == pytest.approx(0.22, abs=1e-8)
    assert curve.submergence_exponent == pytest.approx(0.95, abs=1e-8)
    assert curve.density_exponent_fitted and curve.submergence_exponent_fitted
    assert curve.max_abs_residual_percent < 1e-8
    assert curve.sote_percent(3.0, 12.0, 5.0) == pytest.approx(30.0, rel=1e-9)
    assert curve.sote_fraction(3.0, 12.0, 5.0) == pytest.approx(0.30, rel=1e-9)


def test_noisy_points_report_residuals():
    q, s, rho, df = synthetic_points(noise=0.02, seed=7)
    curve = sote.fit_sote_curve(q, s, rho, df)
    assert curve.residuals.shape == (20,)
    # Residuals are fitted minus tested, in percentage points.
    fitted = curve.sote_percent(q, rho, df)
    np.testing.assert_allclose(curve.residuals, fitted - s, atol=1e-9)
    assert 0.05 < curve.rms_residual_percent < 2.0
    assert -0.3 < curve.airflow_exponent < -0.05
    report = curve.report()
    assert "residuals (20 points)" in report and "fitted" in report


def test_invented_single_density_points_use_default_and_say_so():
    # An invented 9-inch disc tested at one density and one submergence.
    q = np.array([1.5, 2.5, 3.5, 5.0, 7.0])
    s = np.array([36.1, 33.9, 32.4, 31.0, 29.6])
    curve = sote.fit_sote_curve(q, s, 12.0, 5.5, name="disc-9")
    assert not curve.density_exponent_fitted and not curve.submergence_exponent_fitted
    assert curve.density_exponent == sote.DEFAULT_DENSITY_EXPONENT
    assert curve.submergence_exponent == sote.DEFAULT_SUBMERGENCE_EXPONENT
    assert "density exponent set to the default" in curve.report()
    assert "submergence exponent set to the default" in curve.report()
    assert curve.airflow_range == (1.5, 7.0)
    assert curve.max_abs_residual_percent < 0.5
    grid = np.linspace(*curve.airflow_range, 50)
    values = curve.sote_percent(grid, 12.0, 5.5)
    assert np.all(values > 0) and np.all(np.diff(values) < 0)


def test_fixed_exponent_is_used():
    q, s, rho, df = synthetic_points()
    curve = sote.fit_sote_curve(q, s, rho, df, submergence_exponent=1.0)
    assert curve.submergence_exponent == 1.0 and not curve.submergence_exponent_fitted
    assert "fixed by the caller" in curve.report()


def test_extrapolation_warns_only_for_numbers():
    q, s, rho, df = synthetic_points()
    curve = sote.fit_sote_curve(q, s, rho, df)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        curve.sote_fraction(np.array([1.0, 6.0]), 8.0, 4.0)  # at the ends: no warning
    with pytest.warns(SoteExtrapolationWarning, match="airflow per diffuser"):
        curve.sote_fraction(8.0, 12.0, 5.0)
    with pytest.warns(SoteExtrapolationWarning, match="submergence"):
        curve.sote_fraction(3.0, 12.0, 7.0)
    assert issubclass(SoteExtrapolationWarning, ExtrapolationWarning)
    assert issubclass(SoteExtrapolationWarning, UserWarning)
    import pyomo.environ as pyo

    m = pyo.ConcreteModel()
    m.q = pyo.Var(initialize=50.0)  # far outside, but a Var: no warning
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        curve.sote_fraction(m.q, 12.0, 5.0)


def test_increasing_points_hold_exponent_at_bound_and_warn():
    q = np.array([1.0, 2.0, 3.0, 4.0])
    s = np.array([20.0, 21.0, 22.0, 23.0])
    with pytest.warns(sote.SoteFitWarning):
        curve = sote.fit_sote_curve(q, s, 10.0, 5.0)
    assert curve.airflow_exponent == pytest.approx(sote.AIRFLOW_EXPONENT_BOUNDS[1])
    assert any("bound" in note for note in curve.notes)


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (([1.0, 1.0, 1.0], [30, 31, 32], 10.0, 5.0), "one airflow"),
        (([1.0, 2.0, -3.0], [30, 29, 28], 10.0, 5.0), "finite and > 0"),
        (([1.0, 2.0, 3.0], [30, 29], 10.0, 5.0), "length differs"),
        (([1.0, 2.0, 3.0], [130, 29, 28], 10.0, 5.0), "below 100"),
        (([1.0, 2.0], [30, 29], [8.0, 16.0], 5.0), "fewer test points"),
        (([1.0, 2.0, 3.0, 4.0], [30, 29, 28, 27], [8.0, 8.0, 16.0, 16.0], [4.0, 4.0, 6.0, 6.0]), "cannot be separated"),
    ],
)
def test_bad_points_raise_input_error(args, message):
    with pytest.raises(InputError, match=message) as info:
        sote.fit_sote_curve(*args, source_file="plant.toml", key="diffusers.disc.sote_points")
    assert all(p.file == "plant.toml" for p in info.value.problems)


def test_curve_is_frozen():
    q, s, rho, df = synthetic_points()
    curve = sote.fit_sote_curve(q, s, rho, df)
    with pytest.raises(AttributeError):
        curve.airflow_exponent = 0.0  # type: ignore[misc]


@settings(max_examples=25, deadline=None)
@given(
    a=st.floats(-0.4, -0.05),
    s_ref=st.floats(15.0, 45.0),
    noise_seed=st.integers(0, 10_000),
)
def test_fitted_curve_positive_and_decreasing(a, s_ref, noise_seed):
    rng = np.random.default_rng(noise_seed)
    q = np.array([0.8, 1.5, 2.5, 4.0, 6.0, 8.0])
    s = s_ref * (q / 3.0) ** a * (1 + 0.03 * rng.standard_normal(q.size))
    curve = sote.fit_sote_curve(q, s, 10.0, 5.0)
    grid = np.linspace(*curve.airflow_range, 40)
    values = curve.sote_fraction(grid, 10.0, 5.0)
    assert np.all(values > 0)
    assert np.all(np.diff(values) < 0)
    # SOTR per diffuser (q * SOTE) still increases with airflow.
    assert np.all(np.diff(grid * values) > 0)


def test_pyomo_matches_numpy(rng, pyomo_check):
    q, s, rho, df = synthetic_points(noise=0.02)
    curve = sote.fit_sote_curve(q, s, rho, df)
    pts = np.column_stack([rng.uniform(1.0, 6.0, 15), rng.uniform(8.0, 16.0, 15), rng.uniform(4.0, 6.0, 15)])
    pyomo_check(curve.sote_fraction, pts)
