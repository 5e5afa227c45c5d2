"""A day simulated by the independent simulator, reduced to what the optimisation needs.

:func:`simulate_day` runs :func:`airtaper.simulate.periodic` (under an airflow
schedule or ideal DO control) and returns a :class:`SimDay`: per-step airflow and
DO of every zone, effluent NH4-N, TN and flow, the compliance figures of
:mod:`airtaper.optimize.figures`, and the blower power, energy and cost of the day
from :class:`~airtaper.optimize.airside.AirSide` at every output step.

The simulator reports its states at the start of each of the ``steps_per_period``
equal steps of every period (0 h, 0.25 h, ... for hourly periods with four steps);
:meth:`SimDay.state_at` interpolates them (linearly, around the periodic day) to
the model's time points.
"""

from __future__ import annotations

import time
import warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from airtaper.layout.types import ASM1_COMPONENTS, Layout
from airtaper.optimize.airside import AirSide
from airtaper.optimize.figures import day_figures


@dataclass
class SimDay:
    layout: Layout
    timeseries: pd.DataFrame  # simulator's tidy zone table (time_h, zone, components, airflow, kla, otr)
    effluent: pd.DataFrame
    time_h: np.ndarray  # (N,)
    period: np.ndarray  # (N,) 0-based
    airflow: dict  # zone id -> (N,) Sm3/h
    do: dict  # zone id -> (N,) mg/L
    conc: np.ndarray  # (N, zones, 13)
    power_kW: np.ndarray  # (N,)
    energy_kWh_per_day: float
    cost_per_day: float | None
    figures: dict
    converged: bool
    days: int
    seconds: float
    extra: dict = field(default_factory=dict)

    def period_mean_airflow(self) -> dict:
        """Zone id -> mean airflow of every period, (n_periods,), Sm3/h."""
        n = self.layout.horizon.n_periods
        return {z: np.array([a[self.period == k].mean() for k in range(n)]) for z, a in self.airflow.items()}

    def state_at(self, hour: float) -> np.ndarray:
        """Zone concentrations (zones, 13) at a time of day, linear between samples, periodic."""
        n = len(self.time_h)
        step = 24.0 / n
        x = (hour % 24.0) / step
        i = int(np.floor(x)) % n
        f = x - np.floor(x)
        return (1.0 - f) * self.conc[i] + f * self.conc[(i + 1) % n]


def simulate_day(layout: Layout, schedule: dict | None = None, do_setpoint_mg_L=None, *, start_state=None,
                 start_waste_m3_d: float | None = None, tol: float | None = None) -> SimDay:
    """Periodic day of ``layout`` under a schedule (zone -> per-period airflow) or DO control.

    ``start_state``/``start_waste_m3_d``: where the simulator's first day starts (its
    default is the mean-load steady state); ``tol``: its day-repeat tolerance.
    """
    from airtaper.simulate import periodic

    t0 = time.perf_counter()
    kwargs = {}
    if start_state is not None:
        kwargs["start_state"] = start_state
    if start_waste_m3_d is not None:
        kwargs["start_waste_m3_d"] = start_waste_m3_d
    if tol is not None:
        kwargs["tol"] = tol
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = periodic(layout, schedule=schedule, do_setpoint_mg_L=do_setpoint_mg_L, **kwargs)
    ts, eff = res.timeseries, res.effluent
    zone_ids = [z.id for z in layout.zones]
    nz = len(zone_ids)
    n = len(eff)
    time_h = eff["time_h"].to_numpy()
    period = np.minimum((time_h / layout.horizon.period_h + 1e-9).astype(int), layout.horizon.n_periods - 1)
    air = ts["airflow_Sm3_h"].to_numpy().reshape(n, nz)
    conc = ts[list(ASM1_COMPONENTS)].to_numpy().reshape(n, nz, len(ASM1_COMPONENTS))
    so = ts["SO"].to_numpy().reshape(n, nz)
    airflow = {zid: air[:, i] for i, zid in enumerate(zone_ids)}
    do = {zid: so[:, i] for i, zid in enumerate(zone_ids)}
    side = AirSide(layout)
    with warnings.catch_warnings():  # curve extrapolation is the layout check's business, not this day's
        warnings.simplefilter("ignore")
        power = side.step_power_kW(airflow, period) if side.zones else np.zeros(n)
    step_h = 24.0 / n
    energy = float(power.sum() * step_h)
    cost = None
    if layout.tariff is not None:
        price = np.asarray(layout.tariff.price_per_kWh, dtype=float)[period]
        cost = float((price * power).sum() * step_h) + \
            layout.tariff.demand_charge_per_kW / layout.tariff.demand_period_days * float(power.max())
    figs = day_figures(layout, eff["SNH"].to_numpy(), eff["tn_mg_L"].to_numpy(), eff["q_effluent_m3_d"].to_numpy(),
                       period, do)
    return SimDay(layout=layout, timeseries=ts, effluent=eff, time_h=time_h, period=period, airflow=airflow, do=do,
                  conc=conc, power_kW=power, energy_kWh_per_day=energy, cost_per_day=cost, figures=figs,
                  converged=bool(res.converged), days=int(res.days), seconds=time.perf_counter() - t0,
                  extra={"waste_m3_d": eff["q_waste_m3_d"].to_numpy()})


__all__ = ["SimDay", "simulate_day"]
