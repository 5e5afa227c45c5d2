"""Air-side pressures: static head, diffuser headloss, pipe loss, zone and header pressures."""

import warnings

import numpy as np
import pyomo.environ as pyo
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from airtaper.errors import InputError
from airtaper.physics import pressure as pr
from airtaper.physics.extrapolation import HeadlossExtrapolationWarning


def test_static_head():
    # Conventional water column, 1 m = 9.80665 kPa (ISO 80000-4): 5 m -> 49.03 kPa.
    assert pr.static_head_kPa(5.0) == pytest.approx(49.03325, rel=1e-12)


def test_pipe_loss_is_quadratic():
    assert pr.pipe_loss_kPa(2e-6, 1000.0) == pytest.approx(2.0)
    assert pr.pipe_loss_kPa(2e-6, 2000.0) == pytest.approx(4 * pr.pipe_loss_kPa(2e-6, 1000.0))


def test_headloss_fit_recovers_known_curve():
    q = np.array([0.5, 1.0, 2.0, 3.0, 4.0, 6.0])
    h = 2.1 + 1.7 * (q / 6.0) ** 1.6  # invented membrane disc: opening pressure 2.1 kPa
    curve = pr.fit_headloss_curve(q, h, name="disc")
    assert curve.exponent_fitted
    assert curve.h0_kPa == pytest.approx(2.1, abs=1e-6)
    assert curve.k_kPa == pytest.approx(1.7, abs=1e-6)
    assert curve.exponent == pytest.approx(1.6, abs=1e-6)
    assert curve.rms_residual_kPa < 1e-8
    assert curve.headloss_kPa(3.0) == pytest.approx(2.1 + 1.7 * 0.5**1.6, rel=1e-8)


def test_headloss_few_points_use_orifice_exponent():
    curve = pr.fit_headloss_curve([1.0, 3.0, 5.0], [2.5, 3.0, 4.0])
    assert not curve.exponent_fitted and curve.exponent == pr.DEFAULT_HEADLOSS_EXPONENT
    assert curve.residuals.shape == (3,)
    grid = np.linspace(0.0, 5.0, 30)
    assert np.all(np.diff(curve.headloss_kPa(np.linspace(1.0, 5.0, 30))) >= 0)
    with pytest.warns(HeadlossExtrapolationWarning):
        curve.headloss_kPa(grid)


@pytest.mark.parametrize(
    ("q", "h", "message"),
    [([1.0, 1.0], [2.0, 2.1], "two or more distinct"), ([1.0, 2.0], [2.0], "length differs"),
     ([1.0, 2.0], [2.0, -1.0], ">= 0")],
)
def test_headloss_bad_points(q, h, message):
    with pytest.raises(InputError, match=message):
        pr.fit_headloss_curve(q, h)


def test_zone_required_pressure():
    # Pressure balance: static head + diffuser headloss + drop-leg loss.
    got = pr.zone_required_pressure_gauge_kPa(5.0, 3.2, pr.pipe_loss_kPa(1e-6, 1000.0))
    assert got == pytest.approx(5.0 * 9.80665 + 3.2 + 1.0, rel=1e-12)


def test_header_most_open_valve_rule():
    zones = [52.0, 55.5, 50.1]
    header = pr.header_pressure_gauge_kPa(zones, min_valve_loss_kPa=1.5)
    assert header == pytest.approx(57.0)
    losses = [pr.valve_loss_kPa(header, z) for z in zones]
    assert min(losses) == pytest.approx(1.5)  # the most demanding zone's valve is the most open
    # Per-period arrays
    per_period = pr.header_pressure_gauge_kPa([np.array([50.0, 53.0]), np.array([52.0, 51.0])], 1.0)
    np.testing.assert_allclose(per_period, [53.0, 54.0])


def test_header_smooth_max_bounds():
    zones = [52.0, 55.5, 55.5, 50.1]
    exact = pr.header_pressure_gauge_kPa(zones, 1.0)
    smooth = pr.header_pressure_gauge_kPa(zones, 1.0, smoothing_kPa=0.01)
    assert exact <= smooth <= exact + (len(zones) - 1) * 0.01 / 2 + 1e-12


def test_header_exact_max_refuses_pyomo():
    m = pyo.ConcreteModel()
    m.a = pyo.Var(initialize=50.0)
    with pytest.raises(ValueError, match="smoothing_kPa"):
        pr.header_pressure_gauge_kPa([m.a, 51.0], 1.0)
    with pytest.raises(ValueError):
        pr.header_pressure_gauge_kPa([], 1.0)


def test_absolute_pressures():
    assert pr.blower_discharge_pressure_kPa(57.0, 95.0, 2.0) == pytest.approx(154.0)
    assert pr.blower_inlet_pressure_kPa(95.0, 0.5) == pytest.approx(94.5)


@settings(max_examples=50, deadline=None)
@given(st.lists(st.floats(10.0, 100.0), min_size=1, max_size=8), st.floats(0.0, 5.0))
def test_header_covers_every_zone(zones, min_loss):
    header = pr.header_pressure_gauge_kPa(zones, min_loss)
    assert all(pr.valve_loss_kPa(header, z) >= min_loss - 1e-12 for z in zones)


def test_pyomo_matches_numpy(rng, pyomo_check):
    curve = pr.fit_headloss_curve([0.5, 1.0, 2.0, 3.0, 4.0, 6.0], [2.2, 2.3, 2.6, 2.9, 3.3, 4.1])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        pyomo_check(curve.headloss_kPa, rng.uniform(0.5, 6.0, (10, 1)))
    pyomo_check(pr.static_head_kPa, rng.uniform(2.0, 8.0, (10, 1)))
    pyomo_check(pr.pipe_loss_kPa, np.column_stack([rng.uniform(1e-7, 1e-5, 10), rng.uniform(100.0, 5000.0, 10)]))
    pyomo_check(pr.zone_required_pressure_gauge_kPa, rng.uniform(1.0, 6.0, (10, 3)))
    pyomo_check(lambda a, b, c: pr.header_pressure_gauge_kPa([a, b, c], 1.2, smoothing_kPa=0.05),
                rng.uniform(40, 60, (10, 3)))
    pyomo_check(pr.blower_discharge_pressure_kPa, rng.uniform(1.0, 100.0, (10, 3)))
