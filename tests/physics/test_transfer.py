"""Oxygen transfer: SOTR, field AOTR and the equivalent field kLa."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from airtaper import units
from airtaper.physics import transfer as tr
from airtaper.physics.saturation import do_sat_1atm_mg_L


def test_sotr_from_airflow():
    # SOTE = SOTR / O2 mass flow supplied (ASCE/EWRI 2-06); 0.2786 kg O2 per Sm3 of dry air at 20 degC, 1 atm.
    assert tr.sotr_kg_h(1000.0, 0.30) == pytest.approx(1000.0 * 0.30 * 0.2786, rel=2e-4)
    assert tr.sotr_kg_h(1000.0, 0.30) == pytest.approx(1000.0 * 0.30 * units.O2_kg_per_Sm3, rel=1e-14)


def test_theta_correction():
    # theta = 1.024 (Mueller, Boyle & Poepel 2002, Table 3.12; ASCE/EWRI 2-06): 1.024^10 = 1.26765,
    # 1.024^-10 = 0.78886.
    assert tr.THETA_DEFAULT == 1.024
    assert tr.temperature_factor(20.0) == 1.0
    assert tr.temperature_factor(30.0) == pytest.approx(1.26765, abs=1e-5)
    assert tr.temperature_factor(10.0) == pytest.approx(0.78886, abs=1e-5)
    assert tr.temperature_factor(10.0, theta=1.02) == pytest.approx(1.02**-10, rel=1e-14)


def test_tau():
    # tau = C*s,T / C*s,20: 11.288 / 9.092 at 10 degC (Standard Methods 4500-O table values).
    assert tr.tau(20.0) == pytest.approx(1.0, rel=1e-14)
    assert tr.tau(10.0) == pytest.approx(11.288 / 9.092, abs=2e-4)


def test_omega():
    assert tr.omega(101.325) == pytest.approx(1.0)
    assert tr.omega(90.0) == pytest.approx(90.0 / 101.325)
    # Full Benson & Krause correction is slightly below Pb/Pstd at altitude (water vapour term).
    assert tr.omega(79.5, 20.0, "full") < tr.omega(79.5)
    with pytest.raises(ValueError):
        tr.omega(90.0, pressure_correction="guess")
    with pytest.raises(ValueError):
        tr.omega(90.0, pressure_correction="full")


CASE = dict(alpha=0.55, fouling=0.85, temperature_C=15.0, c_inf20_mg_L=10.6, beta=0.96, pressure_kPa=95.0)


def test_aotr_textbook_worked_case():
    # Metcalf & Eddy (2014), 5th ed.: AOTR = SOTR alpha F theta^(T-20) (tau beta Omega C*inf20 - C) / C*inf20,
    # written out here independently of the package.
    sotr = 2000.0 * 0.28 * 0.2786  # kg/h
    tau = do_sat_1atm_mg_L(15.0) / do_sat_1atm_mg_L(20.0)
    expected = sotr * 0.55 * 0.85 * 1.024 ** (15 - 20) * (tau * 0.96 * (95.0 / 101.325) * 10.6 - 2.0) / 10.6
    got = tr.aotr_kg_h(2000.0, 0.28, do_mg_L=2.0, **CASE)
    assert got == pytest.approx(expected, rel=2e-4)  # 0.2786 is rounded


def test_field_kla_reproduces_aotr_exactly(rng):
    n = 50
    airflow = rng.uniform(50.0, 5000.0, n)
    sote = rng.uniform(0.1, 0.4, n)
    volume = rng.uniform(200.0, 3000.0, n)
    alpha = rng.uniform(0.3, 0.9, n)
    fouling = rng.uniform(0.6, 1.0, n)
    temperature = rng.uniform(5.0, 30.0, n)
    c_inf = rng.uniform(9.1, 12.0, n)
    beta = rng.uniform(0.9, 1.0, n)
    pressure = rng.uniform(75.0, 103.0, n)
    do = rng.uniform(0.0, 6.0, n)
    for correction in tr.PRESSURE_CORRECTIONS:
        kla = tr.field_kla_per_h(airflow, sote, volume, alpha, fouling, temperature, c_inf)
        csat = tr.field_do_sat_mg_L(temperature, c_inf, beta, pressure, correction)
        otr_kg_h = tr.oxygen_transfer_rate_g_m3_h(kla, csat, do) * volume / 1000.0
        aotr = tr.aotr_kg_h(airflow, sote, alpha, fouling, temperature, c_inf, beta, pressure, do,
                            pressure_correction=correction)
        np.testing.assert_allclose(otr_kg_h, aotr, rtol=1e-12)


def test_maximum_transfer_at_zero_do():
    kla = tr.field_kla_per_h(1500.0, 0.3, 1333.0, 0.6, 0.9, 15.0, 10.6)
    csat = tr.field_do_sat_mg_L(15.0, 10.6, 0.96, 95.0)
    at_zero = tr.oxygen_transfer_rate_g_m3_h(kla, csat, 0.0)
    assert at_zero == pytest.approx(kla * csat, rel=1e-14)
    assert tr.aotr_kg_h(1500.0, 0.3, 0.6, 0.9, 15.0, 10.6, 0.96, 95.0, 0.0) == pytest.approx(at_zero * 1.333, rel=1e-12)
    do = np.linspace(0.0, csat, 20)
    assert np.all(tr.oxygen_transfer_rate_g_m3_h(kla, csat, do) <= at_zero)
    # At saturation the transfer stops.
    assert tr.oxygen_transfer_rate_g_m3_h(kla, csat, csat) == pytest.approx(0.0, abs=1e-12)


def test_clean_water_standard_conditions_give_sotr():
    # At 20 degC, 1 atm, alpha = F = beta = 1 and C = 0 the field rate is the SOTR (ASCE/EWRI 2-06 definition).
    assert tr.aotr_kg_h(1000.0, 0.25, 1.0, 1.0, 20.0, 10.2, 1.0, 101.325, 0.0) == pytest.approx(
        tr.sotr_kg_h(1000.0, 0.25), rel=1e-12
    )


unit = st.floats(0.3, 0.95)
positive_airflow = st.floats(10.0, 10_000.0)
do_values = st.floats(0.0, 6.0)


@settings(max_examples=60, deadline=None)
@given(airflow=positive_airflow, alpha=unit, do1=do_values, do2=do_values, temperature=st.floats(5.0, 30.0))
def test_aotr_decreases_with_do(airflow, alpha, do1, do2, temperature):
    lo, hi = sorted((do1, do2))
    args = dict(sote_fraction=0.3, alpha=alpha, fouling=0.9, temperature_C=temperature, c_inf20_mg_L=10.5,
                beta=0.96, pressure_kPa=98.0)
    a_lo = tr.aotr_kg_h(airflow, do_mg_L=lo, **args)
    a_hi = tr.aotr_kg_h(airflow, do_mg_L=hi, **args)
    assert a_hi <= a_lo
    if hi - lo > 1e-6:
        assert a_hi < a_lo


@settings(max_examples=60, deadline=None)
@given(airflow=positive_airflow, alpha1=unit, alpha2=unit, factor=st.floats(1.001, 5.0), do=do_values)
def test_aotr_increases_with_alpha_and_airflow(airflow, alpha1, alpha2, factor, do):
    lo, hi = sorted((alpha1, alpha2))
    args = dict(sote_fraction=0.3, fouling=0.9, temperature_C=15.0, c_inf20_mg_L=10.5, beta=0.96,
                pressure_kPa=98.0, do_mg_L=do)
    # do < C*_field (about 10.9 mg/L here), so the driving force is positive.
    assert tr.aotr_kg_h(airflow, alpha=hi, **args) >= tr.aotr_kg_h(airflow, alpha=lo, **args)
    assert tr.aotr_kg_h(airflow * factor, alpha=lo, **args) > tr.aotr_kg_h(airflow, alpha=lo, **args)


def test_pyomo_matches_numpy(rng, pyomo_check):
    n = 12
    pts = np.column_stack(
        [
            rng.uniform(50.0, 5000.0, n),  # airflow
            rng.uniform(0.1, 0.4, n),  # sote
            rng.uniform(200.0, 3000.0, n),  # volume
            rng.uniform(0.3, 0.9, n),  # alpha
            rng.uniform(0.6, 1.0, n),  # fouling
            rng.uniform(5.0, 30.0, n),  # temperature
            rng.uniform(9.1, 12.0, n),  # c_inf20
        ]
    )
    pyomo_check(tr.field_kla_per_h, pts)
    pyomo_check(tr.sotr_kg_h, pts[:, :2])
    sat_pts = np.column_stack([pts[:, 5], pts[:, 6], rng.uniform(0.9, 1.0, n), rng.uniform(75.0, 103.0, n)])
    pyomo_check(tr.field_do_sat_mg_L, sat_pts)
    pyomo_check(lambda *x: tr.field_do_sat_mg_L(*x, pressure_correction="full"), sat_pts)
    aotr_pts = np.column_stack([pts[:, [0, 1, 3, 4, 5, 6]], sat_pts[:, 2:], rng.uniform(0.0, 4.0, n)])
    pyomo_check(tr.aotr_kg_h, aotr_pts)
