"""DO saturation: Benson & Krause (1984) equations against published tables and references."""

import numpy as np
import pytest
from CoolProp.CoolProp import PropsSI

from airtaper.physics import saturation as sat

# APHA Standard Methods 4500-O style table (Benson & Krause 1984 equation), 1 atm, mg/L, 3 decimals.
STANDARD_METHODS_TABLE = {0: 14.621, 8: 11.843, 16: 9.870, 24: 8.418, 32: 7.305, 40: 6.413}
# ISO 5814 table, 101.325 kPa, mg/L, 2 decimals.
ISO_5814_TABLE = {0: 14.62, 5: 12.77, 10: 11.29, 15: 10.08, 20: 9.09, 25: 8.26, 30: 7.56}


@pytest.mark.parametrize(("temperature_C", "expected"), sorted(STANDARD_METHODS_TABLE.items()))
def test_1atm_against_standard_methods_table(temperature_C, expected):
    # Source: APHA Standard Methods 4500-O table of DO solubility (Benson & Krause 1984), 3 d.p.
    assert sat.do_sat_1atm_mg_L(temperature_C) == pytest.approx(expected, abs=0.001)


@pytest.mark.parametrize(("temperature_C", "expected"), sorted(ISO_5814_TABLE.items()))
def test_1atm_against_iso_5814_table(temperature_C, expected):
    # Source: ISO 5814 (dissolved oxygen, electrochemical probe method), solubility table, 2 d.p.
    assert sat.do_sat_1atm_mg_L(temperature_C) == pytest.approx(expected, abs=0.005)


def test_1atm_decreases_with_temperature_over_0_to_40():
    t = np.linspace(0.0, 40.0, 401)
    c = sat.do_sat_1atm_mg_L(t)
    assert np.all(np.diff(c) < 0)


@pytest.mark.parametrize("temperature_C", [0.0, 10.0, 20.0, 30.0, 40.0])
def test_vapour_pressure_against_iapws(temperature_C):
    # Source: IAPWS-95 saturation pressure of water via CoolProp (general-purpose reference library).
    reference_atm = PropsSI("P", "T", temperature_C + 273.15, "Q", 0, "Water") / 101325.0
    assert sat.water_vapour_pressure_atm(temperature_C) == pytest.approx(reference_atm, rel=3e-3)


def test_theta0_values():
    # theta0 = 0.000975 - 1.426e-5 t + 6.436e-8 t^2 (Benson & Krause 1984; USGS OWQ TM 2011.03):
    # 0.000975 at 0 degC and 7.1554e-4 at 20 degC. A public copy with a factor-of-ten slip
    # (1.426e-4) would give -0.0018 at 20 degC, a negative virial term.
    assert sat.theta0_per_atm(0.0) == pytest.approx(0.000975, rel=1e-12)
    assert sat.theta0_per_atm(20.0) == pytest.approx(0.000975 - 1.426e-5 * 20 + 6.436e-8 * 400, rel=1e-12)
    assert sat.theta0_per_atm(20.0) == pytest.approx(7.1554e-4, rel=1e-4)
    assert 4e-4 < sat.theta0_per_atm(40.0) < 1e-3


def test_pressure_factor_is_one_at_one_atmosphere():
    t = np.array([0.0, 12.5, 20.0, 35.0])
    np.testing.assert_allclose(sat.pressure_factor(t, 101.325), 1.0, rtol=1e-14)


def test_pressure_correction_and_its_theta0_term():
    # USGS OWQ TM 2011.03 / Benson & Krause (1984):
    # C_P = C_1atm * P (1 - Pwv/P)(1 - th0 P) / ((1 - Pwv)(1 - th0)), P in atm.
    t, p_kPa = 20.0, 0.8 * 101.325
    pwv = sat.water_vapour_pressure_atm(t)
    without_theta = sat.do_sat_1atm_mg_L(t) * (0.8 - pwv) / (1 - pwv)
    # th0 term alone: (1 - th0 P)/(1 - th0) = 1 + th0 (1 - P)/(1 - th0) = 1.0001432 at 20 degC, P = 0.8.
    theta_term = (1 - 7.1554e-4 * 0.8) / (1 - 7.1554e-4)
    assert theta_term == pytest.approx(1.0001432, rel=1e-7)
    assert sat.do_sat_mg_L(t, p_kPa) == pytest.approx(without_theta * theta_term, rel=1e-6)
    # A tenfold th0 would move the result by about 0.13 %, well outside 1e-6.
    assert abs(sat.do_sat_mg_L(t, p_kPa) / (without_theta * (1 - 7.1554e-3 * 0.8) / (1 - 7.1554e-3)) - 1) > 1e-3


def test_pressure_correction_hand_value():
    # Hand calculation from the USGS OWQ TM 2011.03 formulas at 20 degC and 700 mmHg (93.326 kPa):
    # Pwv = 0.023074 atm, th0 = 7.1554e-4, P = 0.921053 atm -> 9.0924 * 0.919184 * 1.0000565 = 8.3580 mg/L.
    assert sat.do_sat_mg_L(20.0, 700 / 760 * 101.325) == pytest.approx(8.358, abs=0.002)


def test_pressure_is_nearly_proportional():
    # Henry's law: saturation roughly proportional to the O2 partial pressure (P - Pwv).
    c_half = sat.do_sat_mg_L(25.0, 0.5 * 101.325)
    assert 0.48 * sat.do_sat_1atm_mg_L(25.0) < c_half < 0.5 * sat.do_sat_1atm_mg_L(25.0)


def test_salinity():
    # Seawater S = 35 g/kg at 20 degC: about 7.38-7.40 mg/L (seawater solubility tables after
    # Benson & Krause 1984; value from memory).
    assert sat.do_sat_mg_L(20.0, 101.325, 35.0) == pytest.approx(7.39, abs=0.03)
    assert sat.do_sat_mg_L(20.0, 101.325, 0.0) == pytest.approx(sat.do_sat_1atm_mg_L(20.0), rel=1e-14)
    assert sat.salinity_factor(20.0, 0.0) == pytest.approx(1.0)
    assert sat.do_sat_mg_L(20.0, 101.325, 1.0) < sat.do_sat_1atm_mg_L(20.0)


def test_pyomo_matches_numpy(rng, pyomo_check):
    n = 20
    t = rng.uniform(0.0, 40.0, n)
    p = rng.uniform(70.0, 105.0, n)
    s = rng.uniform(0.0, 10.0, n)
    pyomo_check(sat.do_sat_1atm_mg_L, np.column_stack([t]))
    pyomo_check(sat.do_sat_mg_L, np.column_stack([t, p]))
    pyomo_check(sat.do_sat_mg_L, np.column_stack([t, p, s]))
    pyomo_check(sat.pressure_factor, np.column_stack([t, p]))
