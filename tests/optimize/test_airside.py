"""Air side of a schedule: zone pressures, header, blower power, energy and cost (no solver)."""

from __future__ import annotations

import numpy as np
import pytest

from airtaper.optimize.airside import AirSide
from airtaper.simulate.summary import blower_power_kW as simulator_power_kW


def test_header_is_the_most_demanding_zone_plus_the_valve_loss(three_tank_6):
    side = AirSide(three_tank_6)
    air = {"T1": np.array([900.0, 1500.0]), "T2": np.array([600.0, 400.0]), "T3": np.array([400.0, 1200.0])}
    req = {z.id: side.zone_required_pressure_kPa(z, air[z.id]) for z in side.zones}
    header = side.header_pressure_kPa(air)
    expect = np.max(np.stack(list(req.values())), axis=0) + three_tank_6.header.min_valve_loss_kPa
    np.testing.assert_allclose(header, expect)
    # every zone needs at least its static head: 4.2 m of water (1 m = 9.80665 kPa, ISO 80000-4 convention)
    for v in req.values():
        assert np.all(v > 4.2 * 9.80665)


def test_power_is_the_isentropic_formula(three_tank_6):
    """P = m cp T1 ((p2/p1)^(2/7) - 1) / eta, ideal-gas isentropic compression (Cengel & Boles, ch. 7)."""
    side = AirSide(three_tank_6)
    q, header = 2500.0, 48.0
    p_baro = side.site_pressure_kPa
    p1 = p_baro - three_tank_6.inlet_air.filter_loss_kPa
    p2 = p_baro + header + three_tank_6.header.loss_k_kPa_per_Sm3_h2 * q**2
    m = q * 1.2041 / 3600.0  # kg/s; dry air at 20 C, 101.325 kPa is 1.2041 kg/m3 (ideal gas)
    t1 = three_tank_6.inlet_air.temperature_C[0] + 273.15
    eta = three_tank_6.header.aggregate_efficiency
    expect = m * 1.005 * t1 * ((p2 / p1) ** (0.4 / 1.4) - 1.0) / eta
    assert float(side.power_kW(q, header, 0)) == pytest.approx(expect, rel=2e-4)


def test_step_power_agrees_with_the_simulators_own_energy_chain(demo):
    """Two implementations of the same chain (optimiser's AirSide, simulator's summary) agree."""
    side = AirSide(demo)
    rng = np.random.default_rng(3)
    n = 8
    air = np.zeros((n, len(demo.zones)))
    by_zone = {}
    for i, z in enumerate(demo.zones):
        if z.grid is not None:
            lo, hi = demo.zone_airflow_range_Sm3_h(z)
            air[:, i] = rng.uniform(lo, hi, n)
            by_zone[z.id] = air[:, i]
    period = np.arange(n)
    ours = side.step_power_kW(by_zone, period)
    theirs = simulator_power_kW(demo, air, np.asarray(demo.inlet_air.temperature_C)[period])
    np.testing.assert_allclose(ours, theirs, rtol=1e-9)


def test_cost_adds_the_demand_charge_per_day(demo):
    side = AirSide(demo)
    power = np.full(demo.horizon.n_periods, 100.0)
    power[10] = 150.0
    t = demo.tariff
    energy_cost = sum(pr * p * demo.horizon.period_h for pr, p in zip(t.price_per_kWh, power))
    assert side.cost(power) == pytest.approx(energy_cost + t.demand_charge_per_kW / t.demand_period_days * 150.0)
    assert side.energy_kWh(power) == pytest.approx(power.sum() * demo.horizon.period_h)
