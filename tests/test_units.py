"""Unit conversions and constants of airtaper.units."""

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from airtaper import units

finite = st.floats(min_value=-1e6, max_value=1e6, allow_nan=False)


def test_o2_mass_per_standard_m3():
    # Ideal gas, 20.946 % O2 by volume of dry air, 20 degC and 101.325 kPa: 0.2786 kg/m3
    # (ASCE/EWRI 2-06 standard conditions; O2 fraction US Standard Atmosphere 1976).
    assert units.O2_kg_per_Sm3 == pytest.approx(0.2786, abs=5e-5)
    # Same at 0 degC ("normal" m3): 0.2990 kg/m3 (ideal gas, same sources).
    assert units.O2_kg_per_Nm3 == pytest.approx(0.2990, abs=5e-5)
    # Mass fraction of O2 in dry air: 0.2314 derived from the US Standard Atmosphere 1976
    # composition; handbooks print 0.231-0.232 (from memory).
    assert units.O2_MASS_FRACTION_AIR == pytest.approx(0.2314, abs=2e-4)
    assert units.O2_kg_per_Sm3 == pytest.approx(units.AIR_kg_per_Sm3 * units.O2_MASS_FRACTION_AIR, rel=1e-12)


def test_standard_air_density():
    # Dry air at 20 degC, 1 atm: 1.204 kg/m3 (ideal gas with M = 28.9644 g/mol, USSA 1976).
    assert units.AIR_kg_per_Sm3 == pytest.approx(1.2041, abs=1e-4)
    # Sea-level standard density at 15 degC: 1.2250 kg/m3 (US Standard Atmosphere 1976, Table I).
    assert units.air_density_kg_m3(101.325, 15.0) == pytest.approx(1.2250, abs=1e-4)


def test_airflow_mass_flow():
    # 3600 Sm3/h = 1 Sm3/s = 1.2041 kg/s.
    assert units.Sm3_h_to_kg_s(3600.0) == pytest.approx(units.AIR_kg_per_Sm3, rel=1e-12)
    assert units.Sm3_h_to_kg_O2_h(1000.0) == pytest.approx(1000.0 * units.O2_kg_per_Sm3, rel=1e-12)


def test_normal_and_standard_m3():
    # Same mass: volume scales with absolute temperature at equal pressure (293.15 / 273.15).
    assert units.Nm3_to_Sm3(1.0) == pytest.approx(293.15 / 273.15, rel=1e-12)
    assert units.O2_kg_per_Nm3 * 1.0 == pytest.approx(units.O2_kg_per_Sm3 * units.Nm3_to_Sm3(1.0), rel=1e-12)


def test_water_column():
    # Conventional metre of water: 9.80665 kPa (ISO 80000-4, conventional value).
    assert units.m_water_to_kPa(1.0) == pytest.approx(9.80665, rel=1e-12)
    # One atmosphere is 10.332 m of conventional water column.
    assert units.kPa_to_m_water(101.325) == pytest.approx(10.3323, abs=1e-4)


def test_rates_and_concentrations():
    assert units.per_day_to_per_hour(240.0) == pytest.approx(10.0)
    assert units.per_hour_to_per_day(10.0) == pytest.approx(240.0)
    assert units.g_m3_to_mg_L(8.0) == 8.0
    assert units.m3_d_to_m3_h(18446.0) == pytest.approx(768.5833333, rel=1e-9)
    assert units.kg_d_to_kg_h(24.0) == pytest.approx(1.0)
    assert units.kW_h_to_kWh(50.0, 2.0) == pytest.approx(100.0)
    assert units.kPa_to_atm(101.325) == pytest.approx(1.0)
    assert units.C_to_K(20.0) == pytest.approx(293.15)


@pytest.mark.parametrize(
    ("forward", "backward"),
    [
        (units.Sm3_h_to_kg_s, units.kg_s_to_Sm3_h),
        (units.Nm3_to_Sm3, units.Sm3_to_Nm3),
        (units.kPa_to_m_water, units.m_water_to_kPa),
        (units.kPa_to_atm, units.atm_to_kPa),
        (units.kPa_to_Pa, units.Pa_to_kPa),
        (units.g_m3_to_mg_L, units.mg_L_to_g_m3),
        (units.per_day_to_per_hour, units.per_hour_to_per_day),
        (units.m3_d_to_m3_h, units.m3_h_to_m3_d),
        (units.kg_d_to_kg_h, units.kg_h_to_kg_d),
        (units.g_to_kg, units.kg_to_g),
        (units.C_to_K, units.K_to_C),
    ],
)
@given(x=finite)
def test_round_trips(forward, backward, x):
    assert backward(forward(x)) == pytest.approx(x, rel=1e-12, abs=1e-9)


def test_conversions_accept_arrays():
    x = np.array([0.0, 1.0, 2.5])
    np.testing.assert_allclose(units.kPa_to_m_water(units.m_water_to_kPa(x)), x)
    assert math.isclose(float(units.Sm3_h_to_kg_s(np.array([3600.0]))[0]), units.AIR_kg_per_Sm3)


@pytest.mark.parametrize("hours, text", [(0.0, "00:00"), (10.0, "10:00"), (13.5, "13:30"), (23.9999, "24:00"),
                                         (24.0, "24:00"), (2.0 / 3.0, "00:40")])
def test_clock(hours, text):
    """Hours from midnight to HH:MM, to the nearest minute; the day's end is 24:00."""
    assert units.clock(hours) == text
