"""Air side of a schedule: zone pressures, header, blower power, energy and cost (no solver)."""

from __future__ import annotations

import numpy as np
import pytest

from airtaper.physics import blower as blower_phys
from airtaper.physics import pressure


def test_header_is_the_most_demanding_zone_plus_the_valve_loss(three_tank_6):
    side = three_tank_6.air
    air = {"T1": np.array([900.0, 1500.0]), "T2": np.array([600.0, 400.0]), "T3": np.array([400.0, 1200.0])}
    req = {z.id: side.zone_required_pressure_gauge_kPa(z.id, air[z.id]) for z in side.zones}
    header = side.header_pressure_gauge_kPa(air)
    expect = np.max(np.stack(list(req.values())), axis=0) + side.header.min_valve_loss_kPa
    np.testing.assert_allclose(header, expect)
    # every zone needs at least its static head: 4.2 m of water (1 m = 9.80665 kPa, ISO 80000-4 convention)
    for v in req.values():
        assert np.all(v > 4.2 * 9.80665)


def test_power_is_the_isentropic_formula(three_tank_6):
    """P = m cp T1 ((p2/p1)^(2/7) - 1) / eta, ideal-gas isentropic compression (Cengel & Boles, ch. 7)."""
    side = three_tank_6.air
    lay = three_tank_6.layout
    q, header = 2500.0, 48.0
    p_baro = side.site_pressure_kPa
    p1 = p_baro - lay.inlet_air.filter_loss_kPa
    p2 = p_baro + header + lay.header.loss_k_kPa_per_Sm3_h2 * q**2
    m = q * 1.2041 / 3600.0  # kg/s; dry air at 20 C, 101.325 kPa is 1.2041 kg/m3 (ideal gas)
    t1 = lay.inlet_air.temperature_C[0] + 273.15
    eta = lay.header.aggregate_efficiency
    expect = m * 1.005 * t1 * ((p2 / p1) ** (0.4 / 1.4) - 1.0) / eta
    assert float(side.power_kW(q, header, 0)) == pytest.approx(expect, rel=2e-4)


def test_a_zone_with_no_air_leaves_the_header_rule(demo):
    """A zone at zero air (a swing zone switched off) has its valve shut: the header follows the others.

    The step power equals the chain written out from the physics functions over the zones that get
    air only (most-open-valve rule, common practice (no source); isentropic power, Cengel & Boles ch. 7).
    """
    side = demo.air
    lay = demo.layout
    rng = np.random.default_rng(3)
    n = 8
    by_zone = {d.id: rng.uniform(d.airflow_min_Sm3_h, d.airflow_max_Sm3_h, n) for d in side.zones}
    off = side.zones[0].id
    by_zone[off][::2] = 0.0  # off at every other step
    period = np.arange(n)
    ours = side.step_power_kW(by_zone, period)
    p_baro = side.site_pressure_kPa
    p1 = pressure.blower_inlet_pressure_kPa(p_baro, lay.inlet_air.filter_loss_kPa)
    for k in range(n):
        on = [d for d in side.zones if by_zone[d.id][k] > 0.0]
        req = [float(pressure.zone_required_pressure_gauge_kPa(
            d.submergence_m, d.headloss.headloss_kPa(by_zone[d.id][k] / d.diffusers),
            pressure.pipe_loss_kPa(d.zone.drop_leg_k_kPa_per_Sm3_h2, by_zone[d.id][k]))) for d in on]
        total = sum(by_zone[d.id][k] for d in on)
        header = max(req) + lay.header.min_valve_loss_kPa
        p2 = p_baro + header + lay.header.loss_k_kPa_per_Sm3_h2 * total**2
        expect = blower_phys.blower_power_kW(total, lay.inlet_air.temperature_C[k], p1, p2,
                                             lay.header.aggregate_efficiency)
        assert ours[k] == pytest.approx(float(expect), rel=1e-9)
    assert np.all(np.diff(side.header_pressure_gauge_kPa(by_zone)) != 0.0)


def test_cost_adds_the_demand_charge_per_day(demo):
    side = demo.air
    power = np.full(demo.horizon.n_periods, 100.0)
    power[10] = 150.0
    t = demo.tariff
    energy_cost = sum(pr * p * demo.horizon.period_h for pr, p in zip(t.price_per_kWh, power))
    assert side.cost(power) == pytest.approx(energy_cost + t.demand_charge_per_kW / t.demand_period_days * 150.0)
    assert side.energy_kWh(power) == pytest.approx(power.sum() * demo.horizon.period_h)
