"""Barometric pressure from elevation, US Standard Atmosphere 1976."""

import numpy as np
import pytest

from airtaper.physics import atmosphere as atm


@pytest.mark.parametrize(
    ("height_m", "expected_Pa"),
    # Source: US Standard Atmosphere 1976 / ICAO troposphere formula p = 101325 (1 - H/44330.8)^5.25588
    # evaluated at geopotential height H (derived values).
    [(0.0, 101325.0), (500.0, 95461.0), (1000.0, 89875.0), (2000.0, 79496.0)],
)
def test_geopotential_formula(height_m, expected_Pa):
    assert atm.barometric_pressure_geopotential_kPa(height_m) * 1e3 == pytest.approx(expected_Pa, abs=1.0)


@pytest.mark.parametrize(
    ("elevation_m", "expected_Pa"),
    # Source: US Standard Atmosphere 1976 tables by geometric altitude (9.54613E+04 at 500 m,
    # 8.98763E+04 at 1000 m, 7.95014E+04 at 2000 m; values from memory).
    [(500.0, 95461.3), (1000.0, 89876.3), (2000.0, 79501.4)],
)
def test_geometric_elevation_against_tables(elevation_m, expected_Pa):
    assert atm.barometric_pressure_kPa(elevation_m) * 1e3 == pytest.approx(expected_Pa, abs=1.0)


def test_geopotential_height():
    # H = r0 Z / (r0 + Z), r0 = 6356766 m (US Standard Atmosphere 1976): 2000 m -> 1999.37 m'.
    assert atm.geopotential_height_m(2000.0) == pytest.approx(1999.371, abs=1e-3)
    assert atm.geopotential_height_m(0.0) == 0.0


def test_icao_rounded_form_agrees_within_two_pascal():
    # ICAO rounding 101325 (1 - H/44329)^5.255876 (US Standard Atmosphere 1976 / ICAO Doc 7488).
    h = np.linspace(0.0, 2000.0, 21)
    icao = 101325.0 * (1.0 - h / 44329.0) ** 5.255876
    np.testing.assert_allclose(atm.barometric_pressure_geopotential_kPa(h) * 1e3, icao, atol=2.0)


def test_decreasing_and_pyomo(rng, pyomo_check):
    z = np.sort(rng.uniform(-100.0, 3000.0, 15))
    assert np.all(np.diff(atm.barometric_pressure_kPa(z)) < 0)
    pyomo_check(atm.barometric_pressure_kPa, z[:, None])
