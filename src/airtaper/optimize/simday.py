"""A day simulated by the independent simulator, reduced to what the optimisation needs.

:func:`simulate_day` runs :func:`airtaper.simulate.periodic` (under an airflow
schedule or ideal DO control) and returns a :class:`SimDay`: per-step airflow and
DO of every zone, effluent NH4-N, TN and flow, the compliance figures of
:mod:`airtaper.optimize.compliance`, and the blower power, energy and cost of the day
from :class:`~airtaper.plant.AirSide` at every output step.

The compliance figures and the energy integrate the simulated day, not samples of
it: effluent means and period means by Gauss-Legendre quadrature of the solver's
dense output on every solver step (:class:`airtaper.simulate.run.DayQuadrature`),
DO margins from the lowest and highest DO of every zone and period over continuous
time (:func:`airtaper.simulate.run.do_extremes`), blower energy and cost from the
airflow at the quadrature nodes (it varies within a period under DO control). A
left-point sum of quarter-hour samples biased the NH4-N daily mean on the demo by
-0.4 % and missed DO minima between samples by up to 0.015 mg/L.

The simulator also reports its states at the start of each of the ``steps_per_period``
equal steps of every period (0 h, 0.25 h, ... for hourly periods with four steps);
:meth:`SimDay.state_at` interpolates them (linearly, around the periodic day) to
the model's time points (a start for the optimiser, not a figure).
"""

from __future__ import annotations

import time
import warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from airtaper import units
from airtaper.layout.types import ASM1_COMPONENTS, Layout
from airtaper.optimize.compliance import day_figures
from airtaper.plant import ResolvedPlant, resolve_plant
from airtaper.simulate.summary import setpoint_shortfalls
from airtaper.units import HOURS_PER_DAY


@dataclass
class SimDay:
    plant: ResolvedPlant
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
    do_extremes: pd.DataFrame | None = None  # period (0-based), zone, do_min/max_mg_L and their times
    node_airflow: np.ndarray | None = None  # (nodes, zones) airflow at the quadrature nodes, Sm3/h
    node_period: np.ndarray | None = None  # (nodes,) 0-based period of every node
    node_weight: np.ndarray | None = None  # (nodes,) quadrature weight of every node (fractions of the day)
    node_power_kW: np.ndarray | None = None  # (nodes,) blower power at the quadrature nodes, kW
    setpoint_shortfalls: list = field(default_factory=list)  # DO setpoints the control could not hold
    layers: np.ndarray | None = None  # (N, layers, 13) clarifier layers from the top (layered only)

    def start_state(self) -> tuple[dict, float | None]:
        """The state at 0 h of this periodic day, and its waste flow (target SRT), to start another day from."""
        y = np.asarray(self.extra["y_end"], dtype=float).reshape(-1, len(ASM1_COMPONENTS))
        nz = self.plant.n_zones
        state = {"zones": {zid: y[i].tolist() for i, zid in enumerate(self.plant.zone_ids)}}
        if y.shape[0] > nz:
            state["layers"] = y[nz:].tolist()
        waste = float(self.extra["waste_m3_d"][0]) if self.plant.hydraulics.srt_d is not None else None
        return state, waste

    def do_min_by_period(self) -> dict:
        """Zone id -> lowest DO of every period over continuous time, (n_periods,), mg/L."""
        ex = self.do_extremes
        return {z: g.sort_values("period")["do_min_mg_L"].to_numpy() for z, g in ex.groupby("zone", sort=False)}

    def period_mean_airflow(self) -> dict:
        """Zone id -> mean airflow of every period, (n_periods,), Sm3/h."""
        n = self.plant.n_periods
        return {z: np.array([a[self.period == k].mean() for k in range(n)]) for z, a in self.airflow.items()}

    def period_mean_power_kW(self) -> np.ndarray:
        """Mean blower power of every period, (n_periods,), kW: the quadrature that gives the day's energy,
        so the periods' means times their hours add up to ``energy_kWh_per_day``."""
        n = self.plant.n_periods
        w, k = self.node_weight, self.node_period
        return np.array([float(w[k == i] @ self.node_power_kW[k == i] / w[k == i].sum()) for i in range(n)])

    def state_at(self, hour: float) -> np.ndarray:
        """Zone concentrations (zones, 13) at a time of day, linear between samples, periodic."""
        return self._interpolate(self.conc, hour)

    def layers_at(self, hour: float) -> np.ndarray | None:
        """Clarifier layers (layers, 13) at a time of day as :meth:`state_at`; None for an ideal separator."""
        return None if self.layers is None else self._interpolate(self.layers, hour)

    def _interpolate(self, samples: np.ndarray, hour: float) -> np.ndarray:
        n = len(self.time_h)
        step = units.HOURS_PER_DAY / n
        x = (hour % units.HOURS_PER_DAY) / step
        i = int(np.floor(x)) % n
        f = x - np.floor(x)
        return (1.0 - f) * samples[i] + f * samples[(i + 1) % n]


def step_airflow(plant: ResolvedPlant | Layout, res) -> tuple[dict, np.ndarray]:
    """Zone id -> airflow at every output step of a simulated periodic day, and each step's 0-based period
    (a layout is resolved first)."""
    plant = resolve_plant(plant)
    n = len(res.effluent)
    time_h = res.effluent["time_h"].to_numpy()
    period = np.minimum((time_h / plant.period_h + 1e-9).astype(int), plant.n_periods - 1)
    air = res.timeseries["airflow_Sm3_h"].to_numpy().reshape(n, plant.n_zones)
    return {zid: air[:, i] for i, zid in enumerate(plant.zone_ids)}, period


def simulate_day(plant: ResolvedPlant | Layout, schedule: dict | None = None, do_setpoint_mg_L=None, *,
                 start_state=None, start_waste_m3_d: float | None = None, tol: float | None = None,
                 max_days: int | None = None, start_period: int = 0, seek: bool = False) -> SimDay:
    """Periodic day of a plant (a layout is resolved first) under a schedule (zone -> per-period airflow)
    or DO control.

    ``start_state``/``start_waste_m3_d``: where the simulator's first day starts (its
    default is the mean-load steady state), at the start of the 0-based period
    ``start_period`` (the simulator runs the rest of that day first, see
    :func:`airtaper.simulate.periodic`); ``tol``: its day-repeat tolerance; ``seek``: seek the repeating day at
    loose solver tolerances first (:func:`airtaper.simulate.periodic`): off by default, since most callers
    start on or near the repeating day (verification from the optimum), where it only adds a day.
    """
    from airtaper.simulate import periodic

    t0 = time.perf_counter()
    plant = resolve_plant(plant)
    kwargs = {"seek": seek}
    if start_state is not None:
        kwargs["start_state"] = start_state
    if start_waste_m3_d is not None:
        kwargs["start_waste_m3_d"] = start_waste_m3_d
    if tol is not None:
        kwargs["tol"] = tol
    if max_days is not None:
        kwargs["max_days"] = max_days
    if start_period:
        kwargs["start_period"] = start_period
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = periodic(plant, schedule=schedule, do_setpoint_mg_L=do_setpoint_mg_L, **kwargs)
    ts, eff = res.timeseries, res.effluent
    zone_ids = list(plant.zone_ids)
    nz = len(zone_ids)
    n = len(eff)
    time_h = eff["time_h"].to_numpy()
    airflow, period = step_airflow(plant, res)
    conc = ts[list(ASM1_COMPONENTS)].to_numpy().reshape(n, nz, len(ASM1_COMPONENTS))
    so = ts["SO"].to_numpy().reshape(n, nz)
    do = {zid: so[:, i] for i, zid in enumerate(zone_ids)}
    quad, ex = res.quadrature, res.do_extremes
    side = plant.air
    node_air = {zid: quad.airflow_Sm3_h[:, i] for i, zid in enumerate(zone_ids)}
    with warnings.catch_warnings():  # curve extrapolation is reported where the airflow is chosen
        warnings.simplefilter("ignore")
        power = side.step_power_kW(airflow, period) if side.zones else np.zeros(n)
        node_power = side.step_power_kW(node_air, quad.period) if side.zones else np.zeros(quad.period.size)
    energy = float(HOURS_PER_DAY * quad.weight @ node_power)
    cost = None
    if side.tariff is not None:
        cost = float(side.day_cost([float(x) for x in node_power], HOURS_PER_DAY * quad.weight, quad.period))
    qe = quad.effluent
    # DO margins from the continuous extremes: the lowest and highest DO of every period
    do_extreme = {zid: np.concatenate((g["do_min_mg_L"].to_numpy(), g["do_max_mg_L"].to_numpy()))
                  for zid, g in ex.groupby("zone", sort=False)}
    figs = day_figures(plant, qe["SNH"].to_numpy(), qe["tn_mg_L"].to_numpy(), qe["q_effluent_m3_d"].to_numpy(),
                       quad.period, do_extreme, weights=quad.weight)
    shortfalls = setpoint_shortfalls(plant, ex, res.setpoints_mg_L) if do_setpoint_mg_L is not None else []
    return SimDay(plant=plant, timeseries=ts, effluent=eff, time_h=time_h, period=period, airflow=airflow, do=do,
                  conc=conc, power_kW=power, energy_kWh_per_day=energy, cost_per_day=cost, figures=figs,
                  converged=bool(res.converged), days=int(res.days), seconds=time.perf_counter() - t0,
                  extra={"waste_m3_d": eff["q_waste_m3_d"].to_numpy(), "y_end": res.y_end,
                         "start_clarifier": res.start.clarifier if res.start is not None else None}, do_extremes=ex,
                  node_airflow=quad.airflow_Sm3_h, node_period=quad.period, node_weight=quad.weight,
                  node_power_kW=node_power,
                  setpoint_shortfalls=shortfalls, layers=res.layer_states)


__all__ = ["SimDay", "simulate_day", "step_airflow"]
