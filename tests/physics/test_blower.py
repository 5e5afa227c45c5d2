"""Blower power against an independent isentropic calculation (CoolProp), equivalent curves, energy."""

import numpy as np
import pytest
from CoolProp.CoolProp import PropsSI
from hypothesis import given, settings
from hypothesis import strategies as st

from airtaper import units
from airtaper.physics import blower as bl


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


def test_efficiency_from_power_inverts_blower_power():
    """efficiency_from_power is the exact inverse of blower_power_kW (same pinned formula)."""
    from airtaper.physics.blower import blower_power_kW, efficiency_from_power

    q, T1, p1, p2, eta = 4200.0, 18.0, 97.0, 155.0, 0.66
    wire_kW = blower_power_kW(q, T1, p1, p2, eta)
    assert efficiency_from_power(q, T1, p1, p2, wire_kW) == pytest.approx(eta, rel=1e-12)


# --- per-machine power curves for staging ------------------------------------------------------
def test_equivalent_curve_reproduces_the_points_and_the_power():
    """g(q) = q / eta at every point, so w(T, p2) g(q) is the pinned formula at that efficiency."""
    pts = [(4500.0, 0.62), (6500.0, 0.70), (9000.0, 0.66)]
    c = bl.equivalent_curve(4000.0, 9500.0, points=pts)
    assert c.airflow_Sm3_h[0] == 4000.0 and c.airflow_Sm3_h[-1] == 9500.0
    for q, eta in pts:
        assert c.equivalent(q) == pytest.approx(q / eta, rel=1e-12)
        assert c.efficiency(q) == pytest.approx(eta, rel=1e-12)
        w = bl.blower_power_kW(1.0, 15.0, 97.0, 150.0, 1.0)
        assert w * c.equivalent(q) == pytest.approx(bl.blower_power_kW(q, 15.0, 97.0, 150.0, eta), rel=1e-12)
    # extended along the end segments beyond the points
    s = c.slopes()
    assert c.equivalent(4000.0) == pytest.approx(4500.0 / 0.62 - 500.0 * s[0], rel=1e-12)
    constant = bl.equivalent_curve(1000.0, 3000.0, efficiency=0.6)
    assert constant.equivalent(2000.0) == pytest.approx(2000.0 / 0.6)


def test_power_curve_problems():
    ok = bl.equivalent_curve(4500.0, 9000.0, points=[(4500.0, 0.62), (6500.0, 0.70), (9000.0, 0.66)])
    assert bl.power_curve_problems(ok) == []
    concave = bl.equivalent_curve(4500.0, 9000.0, points=[(4500.0, 0.60), (6500.0, 0.66), (9000.0, 0.80)])
    assert "not convex" in bl.power_curve_problems(concave)[0]
    falling = bl.equivalent_curve(4500.0, 9000.0, points=[(4500.0, 0.50), (6500.0, 0.75), (9000.0, 0.76)])
    assert "does not rise" in bl.power_curve_problems(falling)[0]
    negative = bl.equivalent_curve(100.0, 3000.0, points=[(2000.0, 0.9), (3000.0, 0.5)])  # steep: g < 0 at 100
    assert "not positive" in bl.power_curve_problems(negative)[0]


@settings(max_examples=40, deadline=None)
@given(st.lists(st.tuples(st.floats(0.5, 3.0), st.floats(100.0, 3000.0)), min_size=1, max_size=4),
       st.floats(0.0, 1.0))
def test_aggregate_curve_is_the_least_split(slopes_and_widths, where):
    """The segment fill is the least total g: checked against scipy's LP solver (HiGHS via linprog)."""
    from scipy.optimize import linprog

    curves = []
    for i, (s0, width) in enumerate(slopes_and_widths):
        q = [500.0 + 100.0 * i, 500.0 + 100.0 * i + width, 500.0 + 100.0 * i + 2 * width]
        g = [q[0] * 1.4, q[0] * 1.4 + s0 * width, q[0] * 1.4 + s0 * width + (s0 + 0.3) * width]
        curves.append(bl.EquivalentCurve(tuple(q), tuple(g)))
    agg = bl.aggregate_curve(curves)
    total = agg.airflow_min_Sm3_h + where * (agg.airflow_max_Sm3_h - agg.airflow_min_Sm3_h)
    # LP over segment fills: min sum s f  s.t. sum f = total - sum qmin, 0 <= f <= width
    s = np.concatenate([c.slopes() for c in curves])
    widths = np.concatenate([np.diff(c.airflow_Sm3_h) for c in curves])
    rest = total - sum(c.airflow_min_Sm3_h for c in curves)
    lp = linprog(s, A_eq=np.ones((1, s.size)), b_eq=[rest], bounds=list(zip(np.zeros(s.size), widths)),
                 method="highs")
    best = sum(c.equivalent_Sm3_h[0] for c in curves) + lp.fun
    assert agg.equivalent(total) == pytest.approx(best, rel=1e-9)
    split = bl.split_airflow(curves, total)
    assert split.sum() == pytest.approx(total, rel=1e-12)
    assert sum(c.equivalent(q) for c, q in zip(curves, split)) == pytest.approx(best, rel=1e-9)
    assert bl.power_curve_problems(agg) == []  # convex in, convex out


def test_lower_convex_hull():
    pts = [(0.0, 0.0), (1.0, 2.0), (2.0, 1.5), (3.0, 4.0), (2.0, 3.0), (4.0, 4.5), (1.0, 0.5)]
    hull = bl.lower_convex_hull(pts)
    assert hull == [(0.0, 0.0), (1.0, 0.5), (2.0, 1.5), (4.0, 4.5)]
    for x, y in pts:  # every point on or above the hull
        assert y >= np.interp(x, [h[0] for h in hull], [h[1] for h in hull]) - 1e-12
