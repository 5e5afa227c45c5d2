"""The resolved plant: what every later layer computes with, made once from a layout.

:func:`airtaper.plant.resolve.resolve_plant` builds a :class:`ResolvedPlant` from a
validated :class:`~airtaper.layout.types.Layout`. Each quantity that more than one
layer needs has its one home here:

* the site barometric pressure and the blower inlet pressure (:class:`AirSide`);
* the hydraulics per period: influent share per zone, recycle and return flows, the
  flow through every zone and the forward flow out of it (:class:`Hydraulics`);
* the ASM1 parameters per period and the influent's 13 components per period;
* per zone its aeration: a :class:`DiffusedZone` (fitted SOTE and headloss curves,
  C*inf20, field saturation, airflow range, the kLa rule and the zone's required
  pressure), a :class:`FixedKla` zone, or None;
* the air side: header, blowers, tariff and the blower power chain (:class:`AirSide`).

Arrays are read-only. Units are those the names carry (:mod:`airtaper.units`).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from airtaper import units
from airtaper.layout.types import (
    Blower,
    Capital,
    Clarifier,
    DiffuserType,
    Header,
    Horizon,
    Kinetics,
    Layout,
    Limits,
    LoadDay,
    Operation,
    Tariff,
    Zone,
)
from airtaper.physics.blower import blower_power_kW, energy_kWh
from airtaper.physics.pressure import (
    HeadlossCurve,
    blower_discharge_pressure_kPa,
    header_pressure_gauge_kPa,
    pipe_loss_kPa,
    static_head_kPa,
    zone_required_pressure_gauge_kPa,
)
from airtaper.physics.saturation import do_sat_mg_L as surface_do_sat_mg_L
from airtaper.physics.sote import SoteCurve
from airtaper.physics.transfer import field_do_sat_mg_L, field_kla_per_h
from airtaper.process.asm1 import ASM1Parameters

#: Added to a zone's airflow inside the SOTE curve so that the curve's power law is
#: defined at zero air (the airflow itself multiplies the SOTE, so the kLa is still 0 there);
#: numerical guard, common practice (no source).
AIRFLOW_FLOOR_Sm3_h = 1e-6


def frozen_array(values, dtype=float) -> np.ndarray:
    """A read-only numpy copy of ``values`` (the resolved plant is shared by every layer)."""
    a = np.array(values, dtype=dtype)
    a.setflags(write=False)
    return a


@dataclass(frozen=True, eq=False)
class DiffusedZone:
    """A zone that takes air from the header through a diffuser grid (aerated or swing).

    ``index`` is the zone's position in the train; ``do_sat_mg_L`` the field saturation
    per period at the period's water temperature.
    """

    zone: Zone
    index: int
    sote: SoteCurve
    headloss: HeadlossCurve
    diffusers: int
    density_percent: float
    submergence_m: float
    effective_depth_fraction: float
    c_inf20_mg_L: float
    pressure_kPa: float  # site barometric pressure, absolute
    do_sat_mg_L: np.ndarray  # (P,)
    airflow_min_Sm3_h: float  # zone range: diffusers, mixing, valve (a swing zone's when on)
    airflow_max_Sm3_h: float
    diffuser_airflow_min_Sm3_h: float  # per diffuser, the type's lower limit
    diffuser_airflow_max_Sm3_h: float  # per diffuser, the type's upper limit
    diffuser_type: DiffuserType  # the grid's type: membrane area, per-diffuser airflow range, clean-water tests
    # (lowest, highest) count a design may give the zone: whole count steps within the densities of the type's
    # clean-water tests, capped at the practical maximum density (resolve.design_count_range)
    count_range: tuple[int, int]

    # --- plain attributes the model reads -------------------------------------------------
    @property
    def id(self) -> str:
        return self.zone.id

    @property
    def alpha(self) -> float:
        return self.zone.alpha

    @property
    def fouling(self) -> float:
        return self.zone.fouling

    @property
    def beta(self) -> float:
        return self.zone.beta

    @property
    def volume_m3(self) -> float:
        return self.zone.volume_m3

    @property
    def kind(self) -> str:
        return self.zone.kind

    @property
    def swing(self) -> bool:
        return self.zone.kind == "swing"

    @property
    def airflow_range_Sm3_h(self) -> tuple[float, float]:
        return (self.airflow_min_Sm3_h, self.airflow_max_Sm3_h)

    @property
    def area_m2(self) -> float:
        return self.zone.area_m2

    @property
    def count_step(self) -> int:
        """Whole increment of the count a design may choose (a row or module of diffusers)."""
        return self.zone.grid.count_step

    def density_percent_at(self, count) -> float:
        """Membrane area of ``count`` diffusers of the zone's type over its floor, percent."""
        return 100.0 * float(count) * self.diffuser_type.membrane_area_m2 / self.zone.area_m2

    # --- the rules (numbers, numpy arrays or Pyomo expressions alike) ---------------------
    def do_sat_at(self, temperature_C):
        """Field DO saturation at a water temperature, mg/L (ASCE/EWRI 2-06 with the depth correction)."""
        return field_do_sat_mg_L(temperature_C, self.c_inf20_mg_L, self.beta, self.pressure_kPa)

    def kla_per_d(self, airflow_Sm3_h, temperature_C, diffusers=None, alpha_fouling=None):
        """Field kLa, 1/d, at a zone airflow and water temperature: the one kLa rule of the project.

        ``diffusers``: a diffuser count other than the layout's (a number or a Pyomo
        parameter); the density scales with it. ``alpha_fouling``: a product alpha x F
        other than the layout's (a calibration parameter). SOTE from the fitted curve at the
        airflow per diffuser, then ``kLa = SOTR alpha F theta**(T-20) / (C*inf20 V)``
        (:func:`airtaper.physics.transfer.field_kla_per_h`).
        """
        n = self.diffusers if diffusers is None else diffusers
        density = self.density_percent if diffusers is None else self.density_percent * n / self.diffusers
        sote = self.sote.sote_fraction((airflow_Sm3_h + AIRFLOW_FLOOR_Sm3_h) / n, density, self.submergence_m)
        alpha, fouling = (self.alpha, self.fouling) if alpha_fouling is None else (alpha_fouling, 1.0)
        kla_h = field_kla_per_h(airflow_Sm3_h, sote, self.volume_m3, alpha, fouling, temperature_C, self.c_inf20_mg_L)
        return units.per_hour_to_per_day(kla_h)

    def required_pressure_kPa(self, airflow_Sm3_h, diffusers=None):
        """Gauge pressure the zone needs at its valve outlet, kPa: static head, diffuser and drop-leg loss."""
        n = self.diffusers if diffusers is None else diffusers
        return zone_required_pressure_gauge_kPa(self.submergence_m, self.headloss.headloss_kPa(airflow_Sm3_h / n),
                                          pipe_loss_kPa(self.zone.drop_leg_k_kPa_per_Sm3_h2, airflow_Sm3_h))

    @property
    def static_head_kPa(self) -> float:
        return float(static_head_kPa(self.submergence_m))


@dataclass(frozen=True, eq=False)
class FixedKla:
    """A zone with a given kLa and saturation (benchmark plants, mechanical aerators)."""

    zone: Zone
    index: int
    kla_per_d: float
    do_sat_mg_L: float

    @property
    def id(self) -> str:
        return self.zone.id


@dataclass(frozen=True, eq=False)
class Hydraulics:
    """Flows of the train per period (``P`` periods, ``Z`` zones), m3/d.

    Zone ``z`` receives its influent share, the forward flow of zone ``z-1``, the
    internal recycles ending in it and the return sludge if it ends there, and sends
    the recycles it is the source of plus the forward flow on (the last zone's forward
    flow is the clarifier feed). Flows are linear in the inputs, so the daily mean of
    a flow is the flow of the daily means.
    """

    influent_m3_d: np.ndarray  # (P,)
    feed_fraction: np.ndarray  # (Z,) share of the influent entering each zone
    recycles: tuple[tuple[int, int, np.ndarray], ...]  # (from zone, to zone, flow (P,))
    ras_zone: int
    ras_m3_d: np.ndarray  # (P,)
    zone_flow_m3_d: np.ndarray  # (P, Z) flow through each zone (in = out)
    forward_m3_d: np.ndarray  # (P, Z) flow from zone z to z+1 / to the clarifier
    waste_m3_d: np.ndarray | None  # (P,) fixed waste flow, or None with an SRT target
    srt_d: float | None

    @property
    def feed_m3_d(self) -> np.ndarray:
        """Clarifier feed per period, m3/d."""
        return self.forward_m3_d[:, -1]

    def over(self, fn) -> "Hydraulics":
        """The same flows with ``fn`` applied to every per-period array (period axis first): a daily mean, a slice."""
        return Hydraulics(
            influent_m3_d=fn(self.influent_m3_d), feed_fraction=self.feed_fraction,
            recycles=tuple((s, d, fn(f)) for s, d, f in self.recycles), ras_zone=self.ras_zone,
            ras_m3_d=fn(self.ras_m3_d), zone_flow_m3_d=fn(self.zone_flow_m3_d), forward_m3_d=fn(self.forward_m3_d),
            waste_m3_d=None if self.waste_m3_d is None else fn(self.waste_m3_d), srt_d=self.srt_d)


@dataclass(frozen=True, eq=False)
class AirSide:
    """The air side: site and inlet pressures, diffused zones, header, blowers, tariff, power chain.

    One home for the chain airflow -> zone required pressure -> header pressure (most-open
    valve) -> blower discharge pressure -> blower power -> energy and cost, used with
    Pyomo expressions by the optimiser and with numbers by the simulator's summary, the
    baseline and the reports (equations in :mod:`airtaper.physics.pressure` and
    :mod:`airtaper.physics.blower`; docs/physics.md)::

        p_zone   = 9.80665 Df + dp_diffuser(Q / n) + k_drop Q^2          kPa gauge
        p_header = max over zones with air (p_zone) + dp_valve,min        (most-open-valve rule)
        p2 = Pb + p_header + k_header Q_total^2,   p1 = p_inlet - dp_filter      kPa absolute
        P  = m_dot cp T1 ((p2/p1)^(2/7) - 1) / eta_aggregate              kW
        E  = sum_p P_p t_p,    cost = sum_p price_p P_p t_p + demand / days x max_p P_p
    """

    site_pressure_kPa: float  # barometric, absolute: given, or from elevation
    inlet_pressure_kPa: float  # blower inlet, absolute: inlet air (or site) minus the filter loss
    inlet_temperature_C: np.ndarray  # (P,)
    zones: tuple[DiffusedZone, ...]  # the zones that take air from the header, in train order
    header: Header
    blowers: tuple[Blower, ...]
    tariff: Tariff | None
    period_h: float

    # --- zones -------------------------------------------------------------------------------
    @cached_property
    def _by_id(self) -> dict[str, DiffusedZone]:
        return {d.id: d for d in self.zones}

    def zone(self, zone) -> DiffusedZone:
        """The diffused zone of an id (or of a layout :class:`Zone`)."""
        return self._by_id[zone if isinstance(zone, str) else zone.id]

    def has_diffusers(self, zone) -> bool:
        """True for a zone (id or :class:`Zone`) that takes air from the header (:attr:`Zone.has_diffusers`)."""
        return (zone if isinstance(zone, str) else zone.id) in self._by_id

    @property
    def zone_ids(self) -> tuple[str, ...]:
        return tuple(d.id for d in self.zones)

    @cached_property
    def headloss_curves(self) -> dict[str, HeadlossCurve]:
        """Fitted headloss curve per diffuser type in use."""
        return {d.zone.grid.type_id: d.headloss for d in self.zones}

    def zone_required_pressure_gauge_kPa(self, zone, airflow_Sm3_h, diffusers=None):
        """Gauge pressure a zone needs at its valve outlet, kPa (numbers, arrays or Pyomo)."""
        return self.zone(zone).required_pressure_kPa(airflow_Sm3_h, diffusers)

    def static_head_kPa(self, zone) -> float:
        return self.zone(zone).static_head_kPa

    # --- blowers -----------------------------------------------------------------------------
    @property
    def blower_capacity_Sm3_h(self) -> float:
        """Total installed blower airflow, Sm3/h (inf with no blowers)."""
        return float(sum(x.airflow_max_Sm3_h for x in self.blowers)) if self.blowers else float("inf")

    @property
    def blower_turndown_Sm3_h(self) -> float:
        """Smallest airflow the blowers can deliver: the smallest machine at its minimum, Sm3/h."""
        return float(min(x.airflow_min_Sm3_h for x in self.blowers)) if self.blowers else 0.0

    @property
    def blower_pressure_max_kPa(self) -> float:
        """Highest discharge gauge pressure any installed blower reaches, kPa (inf with no blowers)."""
        return float(max(x.pressure_max_gauge_kPa for x in self.blowers)) if self.blowers else float("inf")

    # --- header and power (numbers) ----------------------------------------------------------
    def header_pressure_gauge_kPa(self, airflow_by_zone: dict) -> np.ndarray:
        """Header gauge pressure by the most-open-valve rule (numbers), kPa.

        ``airflow_by_zone``: zone id -> airflow array (same shape for every diffused zone).
        A zone with no air (a swing zone switched off) has its valve shut and does not count.
        """
        req = []
        for d in self.zones:
            q = np.asarray(airflow_by_zone[d.id], dtype=float)
            lo = d.diffuser_airflow_min_Sm3_h * d.diffusers
            p = np.asarray(d.required_pressure_kPa(np.where(q > 0.0, q, lo)), dtype=float)
            req.append(np.where(q > 0.0, p, 0.0))
        return header_pressure_gauge_kPa(req, self.header.min_valve_loss_kPa)

    def discharge_pressure_kPa(self, header_gauge_kPa, total_airflow_Sm3_h):
        """Blower discharge pressure, kPa absolute: site + header + main-header loss."""
        loss = pipe_loss_kPa(self.header.loss_k_kPa_per_Sm3_h2, total_airflow_Sm3_h)
        return blower_discharge_pressure_kPa(header_gauge_kPa, self.site_pressure_kPa, loss)

    def discharge_gauge_kPa(self, header_gauge_kPa, total_airflow_Sm3_h):
        """Blower discharge gauge pressure, kPa: header + main-header loss."""
        return header_gauge_kPa + pipe_loss_kPa(self.header.loss_k_kPa_per_Sm3_h2, total_airflow_Sm3_h)

    def power_kW(self, total_airflow_Sm3_h, header_gauge_kPa, period):
        """Wire-to-air blower power at the inlet temperature of a period (0-based; int or int array), kW."""
        t_in = self.inlet_temperature_C[period]
        if np.ndim(t_in) == 0:
            t_in = float(t_in)
        return blower_power_kW(total_airflow_Sm3_h, t_in, self.inlet_pressure_kPa,
                               self.discharge_pressure_kPa(header_gauge_kPa, total_airflow_Sm3_h),
                               self.header.aggregate_efficiency)

    def step_power_kW(self, airflow_by_zone: dict, period_of_step) -> np.ndarray:
        """Blower power at every time step, kW (numbers); 0 at steps with no air.

        ``airflow_by_zone``: zone id -> airflow per step; ``period_of_step``: 0-based
        period of every step (for the inlet temperature).
        """
        period = np.asarray(period_of_step, dtype=int)
        if not self.zones:
            return np.zeros(period.shape)
        header = self.header_pressure_gauge_kPa(airflow_by_zone)
        total = np.sum([np.asarray(airflow_by_zone[d.id], dtype=float) for d in self.zones], axis=0)
        power = np.asarray(self.power_kW(total, header, period), dtype=float)
        return np.where(total > 0.0, power, 0.0)

    def energy_kWh(self, power_by_period) -> float:
        """Energy over the day, kWh (numbers)."""
        return float(np.sum(energy_kWh(np.asarray(power_by_period, dtype=float), self.period_h)))

    # --- the day's bill: the one cost formula -------------------------------------------------
    @property
    def demand_rate_per_kW_day(self) -> float:
        """Demand charge per kW of the day's peak and per day (the billing period's charge spread over its days)."""
        return 0.0 if self.tariff is None else self.tariff.demand_charge_per_kW / self.tariff.demand_period_days

    def energy_cost(self, power_kW, hours, period=None):
        """Energy cost of power samples: sum of price(period) x power x hours (numbers or Pyomo expressions).

        ``hours``: the duration each sample stands for (one number or one per sample);
        ``period``: each sample's 0-based period (default: sample k is period k).
        """
        price = self.tariff.price_per_kWh
        n = len(power_kW)
        hrs = np.broadcast_to(np.asarray(hours, dtype=float), (n,))
        per = range(n) if period is None else np.asarray(period, dtype=int)
        return sum(float(price[k]) * p * float(h) for p, h, k in zip(power_kW, hrs, per))

    def demand_charge(self, peak_kW):
        """The day's share of the demand charge at a peak power (a number or a Pyomo variable)."""
        return self.demand_rate_per_kW_day * peak_kW

    def day_cost(self, power_kW, hours, period=None, peak_kW=None):
        """Cost of a day: energy cost + the day's demand charge at the peak (the samples' largest by default)."""
        peak = max(power_kW) if peak_kW is None else peak_kW
        return self.energy_cost(power_kW, hours, period) + self.demand_charge(peak)

    def cost(self, power_by_period) -> float | None:
        """Cost of a day of per-period powers under the tariff (with the demand charge per day), or None."""
        if self.tariff is None:
            return None
        return float(self.day_cost([float(x) for x in np.asarray(power_by_period, dtype=float)], self.period_h))

    def schedule_figures(self, airflow_by_zone: dict) -> dict:
        """Header pressure, total airflow, power, energy and cost of a per-period schedule (numbers).

        ``airflow_by_zone``: zone id -> per-period airflow (n_periods,), Sm3/h.
        """
        header = self.header_pressure_gauge_kPa(airflow_by_zone)
        total = np.sum([np.asarray(airflow_by_zone[d.id], dtype=float) for d in self.zones], axis=0)
        power = np.asarray(self.power_kW(total, header, np.arange(len(total))), dtype=float)
        return dict(header_gauge_kPa=header, total_airflow_Sm3_h=total, power_kW=power,
                    energy_kWh_per_day=self.energy_kWh(power), cost_per_day=self.cost(power))


@dataclass(frozen=True, eq=False)
class ResolvedPlant:
    """One train resolved from its layout (``P`` periods, ``Z`` zones); see the module notes.

    ``layout`` is kept for what is written back out (provenance, the layout summary in
    reports); computations read the fields below.
    """

    layout: Layout
    path: str  # the layout file ("<memory>" / "<bsm1>" when built in code)
    name: str
    zones: tuple[Zone, ...]  # in flow order
    volume_m3: np.ndarray  # (Z,)
    horizon: Horizon
    temperature_C: np.ndarray  # (P,) water temperature
    salinity_g_kg: float
    kinetics: Kinetics
    base_params: ASM1Parameters  # the set with its overrides, at its reference temperature
    params: tuple[ASM1Parameters, ...]  # (P,) per period (temperature-corrected when asked)
    influent_conc: np.ndarray  # (P, 13) ASM1 components, g/m3 (SALK mol/m3)
    hydraulics: Hydraulics
    aeration: tuple[DiffusedZone | FixedKla | None, ...]  # (Z,)
    air: AirSide
    clarifier: Clarifier
    limits: Limits
    operation: Operation
    capital: Capital | None  # diffuser-grid capital costs of a design study (None: the layout gives none)
    load_days: tuple[LoadDay, ...]  # the layout's named load days (empty: its base profile is the one day)

    # --- shorthands ----------------------------------------------------------------------------
    @property
    def n_zones(self) -> int:
        return len(self.zones)

    @property
    def n_periods(self) -> int:
        return self.horizon.n_periods

    @property
    def period_h(self) -> float:
        return self.horizon.period_h

    @property
    def zone_ids(self) -> tuple[str, ...]:
        return tuple(z.id for z in self.zones)

    @property
    def site_pressure_kPa(self) -> float:
        return self.air.site_pressure_kPa

    @property
    def tariff(self) -> Tariff | None:
        return self.air.tariff

    @property
    def blowers(self) -> tuple[Blower, ...]:
        return self.air.blowers

    @property
    def diffused(self) -> tuple[DiffusedZone, ...]:
        """The zones that take air from the header, in train order."""
        return self.air.zones

    def has_diffusers(self, zone) -> bool:
        """True for a zone (id or :class:`Zone`) that takes air from the header."""
        return self.air.has_diffusers(zone)

    @cached_property
    def _index(self) -> dict[str, int]:
        return {z.id: i for i, z in enumerate(self.zones)}

    def zone_index(self, zone_id: str) -> int:
        return self._index[zone_id]

    def zone(self, zone_id: str) -> Zone:
        return self.zones[self._index[zone_id]]

    def zone_do_sat_mg_L(self, index: int, temperature_C):
        """DO saturation a zone's balance uses at a water temperature, mg/L.

        Diffused zones: the field saturation at depth; fixed-kLa zones: the given value;
        zones with no air: the surface saturation at the site times beta (it multiplies a
        zero kLa there).
        """
        a = self.aeration[index]
        if isinstance(a, DiffusedZone):
            return a.do_sat_at(temperature_C)
        if isinstance(a, FixedKla):
            return a.do_sat_mg_L
        z = self.zones[index]
        return surface_do_sat_mg_L(temperature_C, self.site_pressure_kPa, self.salinity_g_kg) * z.beta


__all__ = ["AIRFLOW_FLOOR_Sm3_h", "AirSide", "DiffusedZone", "FixedKla", "Hydraulics", "ResolvedPlant",
           "frozen_array"]
