"""Daily figures of a simulated periodic day: effluent, DO, airflow, oxygen and blower energy.

Means over the day use the output steps (equal steps covering the day from
0 h; the day is periodic, so the rectangle rule is the trapezoidal rule).
Effluent means are flow-weighted (by the effluent flow); maxima are the
largest value at an output step.

Blower energy: at each step the header pressure follows the most-open-valve
rule over the zones receiving air (static head + diffuser headloss at the
airflow per diffuser + drop-leg loss, plus the minimum valve loss), the main
header loss ``k Q_total**2`` is added at the discharge, and the power is the
isentropic ideal-gas power at the layout's aggregate wire-to-air efficiency
(:mod:`airtaper.physics.pressure`, :mod:`airtaper.physics.blower`).
"""

from __future__ import annotations

import warnings
from functools import lru_cache

import numpy as np

from airtaper.physics import blower as blower_phys
from airtaper.physics import pressure
from airtaper.simulate.aeration import site_pressure_kPa

_EFFLUENT_KEYS = ("SNH", "SNO", "tkn_mg_L", "tn_mg_L", "cod_mg_L", "tss_mg_L", "SS", "SO")


@lru_cache(maxsize=64)
def _headloss_curve(dtype):
    pts = dtype.headloss_points
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return pressure.fit_headloss_curve([p.airflow_per_diffuser_Sm3_h for p in pts],
                                           [p.headloss_kPa for p in pts], name=dtype.id)


def blower_power_kW(layout, airflow_by_zone_Sm3_h: np.ndarray, inlet_temperature_C: np.ndarray) -> np.ndarray:
    """Blower power at each step, kW, from zone airflows (steps, zones).

    Zones without a diffuser grid (fixed kLa) add no air and no pressure demand.
    Steps with no air give 0 kW.
    """
    Q = np.asarray(airflow_by_zone_Sm3_h, dtype=float)
    baro = site_pressure_kPa(layout)
    required = []
    for i, z in enumerate(layout.zones):
        if z.grid is None or not z.aerated:
            continue
        q = Q[:, i]
        curve = _headloss_curve(layout.diffuser_type(z.grid.type_id))
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            dp = curve.headloss_kPa(np.maximum(q, 1e-9) / z.grid.count)
        p = pressure.zone_required_pressure_kPa(z.grid.submergence_m, dp,
                                                pressure.pipe_loss_kPa(z.drop_leg_k_kPa_per_Sm3_h2, q))
        required.append(np.where(q > 0.0, p, 0.0))
    total = Q.sum(axis=1)
    if not required:
        return np.zeros(Q.shape[0])
    header = pressure.header_pressure_kPa(required, layout.header.min_valve_loss_kPa)
    p2 = pressure.blower_discharge_pressure_kPa(header, baro,
                                                pressure.pipe_loss_kPa(layout.header.loss_k_kPa_per_Sm3_h2, total))
    p_in = layout.inlet_air.pressure_kPa if layout.inlet_air.pressure_kPa is not None else baro
    p1 = pressure.blower_inlet_pressure_kPa(p_in, layout.inlet_air.filter_loss_kPa)
    power = blower_phys.blower_power_kW(total, inlet_temperature_C, p1, p2, layout.header.aggregate_efficiency)
    return np.where(total > 0.0, power, 0.0)


def summarize(result) -> dict:
    """JSON-ready summary of a :class:`~airtaper.simulate.run.PeriodicResult`."""
    lay = result.layout
    ts, eff = result.timeseries, result.effluent
    nz = len(lay.zones)
    zone_ids = [z.id for z in lay.zones]
    nt = len(eff)
    step_h = 24.0 / nt
    qe = eff["q_effluent_m3_d"].to_numpy()
    effluent = {}
    for key in _EFFLUENT_KEYS:
        v = eff[key].to_numpy()
        effluent[key] = {"mean": float((qe * v).sum() / qe.sum()), "max": float(v.max())}
    air = ts["airflow_Sm3_h"].to_numpy().reshape(nt, nz)
    otr = ts["otr_kg_h"].to_numpy().reshape(nt, nz)
    do = ts["SO"].to_numpy().reshape(nt, nz)
    period = np.minimum((eff["time_h"].to_numpy() // lay.horizon.period_h).astype(int), lay.horizon.n_periods - 1)
    t_in = np.asarray(lay.inlet_air.temperature_C, dtype=float)[period]
    power = blower_power_kW(lay, air, t_in)
    zones = {}
    for i, zid in enumerate(zone_ids):
        zones[zid] = {
            "do_min_mg_L": float(do[:, i].min()),
            "do_mean_mg_L": float(do[:, i].mean()),
            "airflow_mean_Sm3_h": float(air[:, i].mean()),
            "air_Sm3_per_day": float(air[:, i].sum() * step_h),
            "oxygen_kg_per_day": float(otr[:, i].sum() * step_h),
        }
    return {
        "plant": lay.plant.name,
        "layout": lay.path,
        "days_simulated": int(result.days),
        "periodic": bool(result.converged),
        "day_change": float(result.day_change),
        "seconds": float(result.seconds),
        "effluent_mg_L": effluent,
        "srt_d": {"mean": float(eff["srt_d"].mean()), "min": float(eff["srt_d"].min()),
                  "max": float(eff["srt_d"].max())},
        "waste_m3_per_day": float(eff["q_waste_m3_d"].mean()),
        "zones": zones,
        "air_Sm3_per_day": float(air.sum() * step_h),
        "oxygen_kg_per_day": float(otr.sum() * step_h),
        "blower_kWh_per_day": float(power.sum() * step_h),
        "blower_kW_max": float(power.max()) if power.size else 0.0,
        "balance": {k: float(v) for k, v in result.balance.items()},
    }
