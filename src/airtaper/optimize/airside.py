"""Air side of a layout: zone pressures, header, blower power and cost, for numbers and Pyomo alike.

One place for the chain airflow -> zone required pressure -> header pressure ->
blower discharge pressure -> blower power -> energy and cost, used three ways:

* by :mod:`airtaper.optimize.problem` with Pyomo variables (the optimiser's own
  objective and header constraints),
* by :mod:`airtaper.optimize.baseline` and :mod:`airtaper.optimize.verify` with
  numpy arrays (the energy of a simulated schedule),
* by the reports (header table).

Equations (all from :mod:`airtaper.physics`; see docs/physics.md)::

    p_zone   = 9.80665 Df + dp_diffuser(Q / n) + k_drop Q^2          kPa gauge
    p_header >= p_zone,z + dp_valve,min   for every aerated zone      (most-open-valve rule)
    p2 = Pb + p_header + k_header Q_total^2,   p1 = p_inlet - dp_filter      kPa absolute
    P  = m_dot cp T1 ((p2/p1)^(2/7) - 1) / eta_aggregate              kW
    E  = sum_p P_p t_p,    cost = sum_p price_p P_p t_p + demand / days x max_p P_p
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from airtaper.layout.types import Layout, Zone
from airtaper.physics.atmosphere import barometric_pressure_kPa
from airtaper.physics.blower import blower_power_kW, energy_kWh
from airtaper.physics.pressure import (
    HeadlossCurve,
    blower_discharge_pressure_kPa,
    blower_inlet_pressure_kPa,
    fit_headloss_curve,
    pipe_loss_kPa,
    static_head_kPa,
    zone_required_pressure_kPa,
)


@dataclass(frozen=True, eq=False)
class AirSide:
    """Air-side constants of one layout (diffused zones only)."""

    layout: Layout

    # --- plant-wide ----------------------------------------------------------------
    @cached_property
    def site_pressure_kPa(self) -> float:
        """Barometric pressure at the site, kPa absolute (given, or US Standard Atmosphere 1976)."""
        given = self.layout.plant.barometric_pressure_kPa
        return float(given) if given is not None else float(barometric_pressure_kPa(self.layout.plant.elevation_m))

    @cached_property
    def inlet_pressure_kPa(self) -> float:
        """Blower inlet pressure, kPa absolute: inlet air pressure (or site) minus the filter loss."""
        air = self.layout.inlet_air
        p = air.pressure_kPa if air.pressure_kPa is not None else self.site_pressure_kPa
        return float(blower_inlet_pressure_kPa(p, air.filter_loss_kPa))

    @property
    def zones(self) -> tuple[Zone, ...]:
        """Zones with a diffuser grid (the ones that take air from the header)."""
        return tuple(z for z in self.layout.zones if z.grid is not None and z.aerated and z.fixed_kla_per_d is None)

    @cached_property
    def headloss_curves(self) -> dict[str, HeadlossCurve]:
        curves = {}
        for z in self.zones:
            dt = self.layout.diffuser_type(z.grid.type_id)
            if dt.id not in curves:
                pts = dt.headloss_points
                curves[dt.id] = fit_headloss_curve(
                    [p.airflow_per_diffuser_Sm3_h for p in pts], [p.headloss_kPa for p in pts], name=dt.id,
                    source_file=self.layout.path, key=f"diffuser_types.{dt.id}.headloss_points")
        return curves

    @property
    def blower_capacity_Sm3_h(self) -> float:
        """Total installed blower airflow, Sm3/h (inf with no blowers)."""
        b = self.layout.blowers
        return float(sum(x.airflow_max_Sm3_h for x in b)) if b else float("inf")

    @property
    def blower_turndown_Sm3_h(self) -> float:
        """Smallest airflow the blowers can deliver: the smallest machine at its minimum, Sm3/h."""
        b = self.layout.blowers
        return float(min(x.airflow_min_Sm3_h for x in b)) if b else 0.0

    @property
    def blower_pressure_max_kPa(self) -> float:
        """Highest discharge gauge pressure any installed blower reaches, kPa (inf with no blowers)."""
        b = self.layout.blowers
        return float(max(x.pressure_max_gauge_kPa for x in b)) if b else float("inf")

    # --- per zone ------------------------------------------------------------------
    def zone_required_pressure_kPa(self, zone: Zone, airflow_Sm3_h, diffusers=None):
        """Gauge pressure a zone needs at its valve outlet, kPa (numbers, arrays or Pyomo)."""
        n = zone.grid.count if diffusers is None else diffusers
        curve = self.headloss_curves[zone.grid.type_id]
        return zone_required_pressure_kPa(
            zone.grid.submergence_m,
            curve.headloss_kPa(airflow_Sm3_h / n),
            pipe_loss_kPa(zone.drop_leg_k_kPa_per_Sm3_h2, airflow_Sm3_h),
        )

    def static_head_kPa(self, zone: Zone) -> float:
        return float(static_head_kPa(zone.grid.submergence_m))

    # --- header and blowers --------------------------------------------------------
    def header_pressure_kPa(self, airflow_by_zone: dict) -> np.ndarray:
        """Header gauge pressure by the most-open-valve rule (numbers only), kPa.

        ``airflow_by_zone``: zone id -> airflow array (same shape for every zone). Zones
        with no air do not count (their valve is shut).
        """
        req = []
        for z in self.zones:  # a zone with no air (a swing zone switched off) has its valve shut
            q = np.asarray(airflow_by_zone[z.id], dtype=float)
            lo = self.layout.diffuser_type(z.grid.type_id).airflow_min_Sm3_h * z.grid.count
            p = np.asarray(self.zone_required_pressure_kPa(z, np.where(q > 0.0, q, lo)))
            req.append(np.where(q > 0.0, p, 0.0))
        return np.max(np.stack(req), axis=0) + self.layout.header.min_valve_loss_kPa

    def discharge_pressure_kPa(self, header_kPa, total_airflow_Sm3_h):
        """Blower discharge pressure, kPa absolute: site + header + main-header loss."""
        loss = pipe_loss_kPa(self.layout.header.loss_k_kPa_per_Sm3_h2, total_airflow_Sm3_h)
        return blower_discharge_pressure_kPa(header_kPa, self.site_pressure_kPa, loss)

    def discharge_gauge_kPa(self, header_kPa, total_airflow_Sm3_h):
        """Blower discharge gauge pressure, kPa: header + main-header loss."""
        return header_kPa + pipe_loss_kPa(self.layout.header.loss_k_kPa_per_Sm3_h2, total_airflow_Sm3_h)

    def power_kW(self, total_airflow_Sm3_h, header_kPa, period):
        """Wire-to-air blower power at the inlet temperature of a period (0-based; int or int array), kW."""
        t_in = np.asarray(self.layout.inlet_air.temperature_C, dtype=float)[period]
        if np.ndim(t_in) == 0:
            t_in = float(t_in)
        return blower_power_kW(total_airflow_Sm3_h, t_in, self.inlet_pressure_kPa,
                               self.discharge_pressure_kPa(header_kPa, total_airflow_Sm3_h),
                               self.layout.header.aggregate_efficiency)

    def step_power_kW(self, airflow_by_zone: dict, period_of_step) -> np.ndarray:
        """Blower power at every time step of a simulated day, kW (numbers).

        ``airflow_by_zone``: zone id -> airflow per step; ``period_of_step``: 0-based
        period of every step (for the inlet temperature).
        """
        header = self.header_pressure_kPa(airflow_by_zone)
        total = np.sum([np.asarray(airflow_by_zone[z.id], dtype=float) for z in self.zones], axis=0)
        return np.asarray(self.power_kW(total, header, np.asarray(period_of_step, dtype=int)), dtype=float)

    @property
    def period_h(self) -> float:
        return float(self.layout.horizon.period_h)

    def energy_kWh(self, power_by_period) -> float:
        """Energy over the day, kWh (numbers)."""
        return float(np.sum(energy_kWh(np.asarray(power_by_period, dtype=float), self.period_h)))

    def cost(self, power_by_period) -> float | None:
        """Energy cost of the day under the layout's tariff (with the demand charge per day), or None."""
        tariff = self.layout.tariff
        if tariff is None:
            return None
        p = np.asarray(power_by_period, dtype=float)
        energy_cost = float(np.sum(np.asarray(tariff.price_per_kWh) * energy_kWh(p, self.period_h)))
        return energy_cost + tariff.demand_charge_per_kW / tariff.demand_period_days * float(p.max())

    def schedule_figures(self, airflow_by_zone: dict) -> dict:
        """Header pressure, total airflow, power, energy and cost of a per-period schedule (numbers).

        ``airflow_by_zone``: zone id -> per-period airflow (n_periods,), Sm3/h.
        """
        header = self.header_pressure_kPa(airflow_by_zone)
        total = np.sum([np.asarray(airflow_by_zone[z.id], dtype=float) for z in self.zones], axis=0)
        power = np.asarray(self.power_kW(total, header, np.arange(len(total))), dtype=float)
        return dict(header_kPa=header, total_airflow_Sm3_h=total, power_kW=power,
                    energy_kWh_per_day=self.energy_kWh(power), cost_per_day=self.cost(power))


__all__ = ["AirSide"]
