"""Blower power against an independent isentropic calculation (CoolProp), efficiency curves, energy."""

import warnings

import numpy as np
import pytest
from CoolProp.CoolProp import PropsSI
from hypothesis import given, settings
from hypothesis import strategies as st

from airtaper import units
from airtaper.errors import InputError
from airtaper.physics import blower as bl
from airtaper.physics.extrapolation import EfficiencyExtrapolationWarning


def coolprop_isentropic_power_kW(airflow_Sm3_h, inlet_temperature_C, inlet_kPa, discharge_kPa, efficiency):
    """Isentropic enthalpy rise of real dry air (CoolProp 'Air', Lemmon et al. 2000 pseudo-pure fluid)."""
    t1 = inlet_temperature_C + 273.15
    h1 = PropsSI("H", "T", t1, "P", inlet_kPa * 1e3, "Air")
    s1 = PropsSI("S", "T", t1, "P", inlet_kPa * 1e3, "Air")
    h2 = PropsSI("H", "P", discharge_kPa * 1e3, "S", s1, "Air")
    mass_kg_s = airflow_Sm3_h * units.AIR_kg_per_Sm3 / 3600.0
    return mass_kg_s * (h2 - h1) / 1e3 / efficiency


CASES = [
    (t, p1, ratio)
    for t in (0.0, 20.0, 40.0)
    for p1 in (80.0, 101.325)
    for ratio in (1.2, 1.5, 1.8, 2.0)
]


@pytest.mark.parametrize(("temperature_C", "inlet_kPa", "ratio"), CASES)
def test_pinned_formula_against_coolprop(temperature_C, inlet_kPa, ratio):
    # Independent reference: CoolProp (general-purpose thermodynamic library, real-gas air).
    # Documented difference of the pinned ideal-gas form (k = 1.4, cp = 1.005): within 0.2 %.
    reference = coolprop_isentropic_power_kW(5000.0, temperature_C, inlet_kPa, inlet_kPa * ratio, 0.75)
    got = bl.blower_power_kW(5000.0, temperature_C, inlet_kPa, inlet_kPa * ratio, 0.75)
    assert got == pytest.approx(reference, rel=2e-3)


@pytest.mark.parametrize(("temperature_C", "inlet_kPa", "ratio"), CASES)
def test_textbook_29_7_form_against_coolprop(temperature_C, inlet_kPa, ratio):
    # Metcalf & Eddy printed form (from memory) against CoolProp: documented 2.4-2.6 % lower
    # (accepted band 2.3-2.8 %).
    reference = coolprop_isentropic_power_kW(5000.0, temperature_C, inlet_kPa, inlet_kPa * ratio, 0.75)
    got = bl.blower_power_textbook_kW(5000.0, temperature_C, inlet_kPa, inlet_kPa * ratio, 0.75)
    assert 0.972 < got / reference < 0.977


def test_hand_value():
    # m cp T1 ((p2/p1)^(2/7) - 1) / eta: 3600 Sm3/h = 1.20412 kg/s, 20 degC, 101.325 -> 162.12 kPa (ratio 1.6),
    # eta 0.7: 1.20412 * 1.005 * 293.15 * (1.6^(2/7) - 1) / 0.7 = 72.83 kW (hand calculation).
    assert bl.blower_power_kW(3600.0, 20.0, 101.325, 162.12, 0.7) == pytest.approx(72.83, abs=0.02)
    assert bl.blower_power_kW(3600.0, 20.0, 101.325, 101.325, 0.7) == 0.0


@settings(max_examples=60, deadline=None)
@given(
    airflow=st.floats(100.0, 50_000.0),
    p2a=st.floats(110.0, 220.0),
    p2b=st.floats(110.0, 220.0),
    factor=st.floats(1.001, 3.0),
    temperature=st.floats(-10.0, 45.0),
)
def test_power_increases_with_pressure_and_flow(airflow, p2a, p2b, factor, temperature):
    lo, hi = sorted((p2a, p2b))
    p_lo = bl.blower_power_kW(airflow, temperature, 100.0, lo, 0.7)
    p_hi = bl.blower_power_kW(airflow, temperature, 100.0, hi, 0.7)
    assert p_hi >= p_lo
    if hi - lo > 1e-6:
        assert p_hi > p_lo
    assert bl.blower_power_kW(airflow * factor, temperature, 100.0, lo, 0.7) > p_lo


def test_efficiency_curve_fit_and_use():
    # Invented turbo blower: best efficiency near 70 % of the largest tested flow.
    q = np.array([3000.0, 4000.0, 5000.0, 6000.0, 7000.0])
    x = q / 7000.0
    eta = 0.78 - 0.5 * (x - 0.7) ** 2
    curve = bl.fit_efficiency_curve(q, eta, name="turbo")
    np.testing.assert_allclose(curve.efficiency(q), eta, atol=1e-9)
    assert max(abs(r) for r in curve.residuals) < 1e-9
    assert curve.coefficients[2] <= 0
    direct = bl.blower_power_kW(5000.0, 20.0, 100.0, 160.0, float(curve.efficiency(5000.0)))
    assert bl.blower_power_kW(5000.0, 20.0, 100.0, 160.0, curve) == pytest.approx(direct, rel=1e-14)
    with pytest.warns(EfficiencyExtrapolationWarning):
        curve.efficiency(9000.0)


def test_efficiency_curve_small_sets_and_bad_input():
    constant = bl.fit_efficiency_curve([4000.0], [0.72])
    assert constant.efficiency(4000.0) == pytest.approx(0.72)
    line = bl.fit_efficiency_curve([3000.0, 5000.0], [0.65, 0.75])
    assert line.efficiency(4000.0) == pytest.approx(0.70)
    with pytest.raises(InputError, match=r"\(0, 1\]"):
        bl.fit_efficiency_curve([3000.0, 5000.0], [0.65, 1.2])
    with pytest.raises(InputError):
        bl.fit_efficiency_curve([3000.0, 5000.0], [0.65])


def test_energy():
    assert bl.energy_kWh(120.0, 0.5) == pytest.approx(60.0)
    np.testing.assert_allclose(bl.energy_kWh(np.array([100.0, 150.0]), 1.0).sum(), 250.0)


def test_pyomo_matches_numpy(rng, pyomo_check):
    n = 12
    pts = np.column_stack(
        [rng.uniform(500.0, 20_000.0, n), rng.uniform(-5.0, 40.0, n), rng.uniform(80.0, 102.0, n),
         rng.uniform(120.0, 200.0, n), rng.uniform(0.5, 0.85, n)]
    )
    pyomo_check(bl.blower_power_kW, pts)
    pyomo_check(bl.blower_power_textbook_kW, pts)
    curve = bl.fit_efficiency_curve([3000.0, 5000.0, 7000.0], [0.70, 0.76, 0.72])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        pyomo_check(lambda q, t, p1, p2: bl.blower_power_kW(q, t, p1, p2, curve),
                    np.column_stack([rng.uniform(3000.0, 7000.0, n), pts[:, 1:4]]))


def test_efficiency_from_power_inverts_blower_power():
    """efficiency_from_power is the exact inverse of blower_power_kW (same pinned formula)."""
    from airtaper.physics.blower import blower_power_kW, efficiency_from_power

    q, T1, p1, p2, eta = 4200.0, 18.0, 97.0, 155.0, 0.66
    wire_kW = blower_power_kW(q, T1, p1, p2, eta)
    assert efficiency_from_power(q, T1, p1, p2, wire_kW) == pytest.approx(eta, rel=1e-12)
