"""Validated layout of an aeration train: frozen dataclasses, the input boundary.

Everything past :func:`airtaper.layout.load_layout` trusts these objects: values are
in the units their names carry, per-period quantities are resolved to tuples of
length ``horizon.n_periods``, defaults are filled in, cross references (diffuser
types, recycle ends) are known to exist. Pressures called ``*_gauge_kPa`` are above
the site atmosphere; others are absolute.

See docs/layout-format.md for the file format key by key and docs/glossary.md for
symbols and units.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Literal

from airtaper.physics.atmosphere import barometric_pressure_kPa
from airtaper.physics.pressure import blower_inlet_pressure_kPa

ZoneKind = Literal["aerated", "anoxic", "swing"]
ClarifierKind = Literal["ideal", "layered"]
ObjectiveKind = Literal["energy", "cost"]

#: ASM1 component order used everywhere in airtaper (Henze et al. 1987).
ASM1_COMPONENTS: tuple[str, ...] = (
    "SI", "SS", "XI", "XS", "XBH", "XBA", "XP", "SO", "SNO", "SNH", "SND", "XND", "SALK",
)


@dataclass(frozen=True)
class SotePoint:
    """One clean-water oxygen transfer test point of a diffuser type."""

    airflow_per_diffuser_Sm3_h: float
    sote_percent: float
    density_percent: float  # membrane area / floor area x 100
    submergence_m: float


@dataclass(frozen=True)
class HeadlossPoint:
    """One dynamic wet pressure (headloss) point of a diffuser type."""

    airflow_per_diffuser_Sm3_h: float
    headloss_kPa: float


@dataclass(frozen=True)
class DiffuserType:
    id: str
    membrane_area_m2: float  # active area of one diffuser
    airflow_min_Sm3_h: float  # per diffuser
    airflow_max_Sm3_h: float  # per diffuser
    sote_points: tuple[SotePoint, ...]
    headloss_points: tuple[HeadlossPoint, ...]
    effective_depth_fraction: float  # de in the effective saturation-depth correction


@dataclass(frozen=True)
class DiffuserGrid:
    type_id: str
    count: int
    submergence_m: float
    count_step: int = 1  # whole increment of the count a design may choose (a row or module of diffusers)


@dataclass(frozen=True)
class Zone:
    id: str
    kind: ZoneKind
    volume_m3: float
    depth_m: float  # side-water depth
    area_m2: float  # floor area (given, or volume / depth)
    do_min_mg_L: float | None  # None for anoxic zones
    do_max_mg_L: float | None
    alpha: float
    fouling: float  # F, diffuser fouling factor
    beta: float
    grid: DiffuserGrid | None  # None for zones with no diffusers
    valve_capacity_Sm3_h: float | None  # drop-leg/valve airflow capacity
    drop_leg_k_kPa_per_Sm3_h2: float  # drop-leg loss = k Q^2
    mixing_airflow_min_Sm3_h_m2: float  # mixing minimum per floor area (aerated zones)
    fixed_kla_per_d: float | None  # benchmark plants, mechanical aerators
    fixed_do_sat_mg_L: float | None
    max_switches_per_day: int | None = None  # swing zones: on/off changes per day (cyclic), None = no limit

    @property
    def aerated(self) -> bool:
        """True when the zone can receive air (aerated or swing)."""
        return self.kind != "anoxic"

    @property
    def has_diffusers(self) -> bool:
        """True when the zone takes air from the header: aerated or swing, with a diffuser grid.

        The project's one "zone has diffusers" predicate (a fixed-kLa zone has no grid).
        """
        return self.aerated and self.grid is not None and self.fixed_kla_per_d is None

    def airflow_range_Sm3_h(self, dtype: "DiffuserType") -> tuple[float, float]:
        """(min, max) zone airflow allowed by its diffusers (of type ``dtype``), mixing and valve.

        A swing zone's range when it is on; (0, 0) for a zone without diffusers.
        """
        if not self.has_diffusers:
            return (0.0, 0.0)
        lo = max(self.grid.count * dtype.airflow_min_Sm3_h, self.mixing_airflow_min_Sm3_h_m2 * self.area_m2)
        hi = self.grid.count * dtype.airflow_max_Sm3_h
        if self.valve_capacity_Sm3_h is not None:
            hi = min(hi, self.valve_capacity_Sm3_h)
        return (lo, hi)

    def diffuser_density_percent(self, dtype: "DiffuserType") -> float:
        """Membrane area of the zone's grid (of type ``dtype``) over its floor area, in percent."""
        if self.grid is None:
            return 0.0
        return 100.0 * self.grid.count * dtype.membrane_area_m2 / self.area_m2


@dataclass(frozen=True)
class StepFeed:
    zone: str
    fraction: float  # of the influent flow, all periods


@dataclass(frozen=True)
class Recycle:
    """Internal (nitrate) recycle, resolved to a flow per period."""

    id: str
    from_zone: str
    to_zone: str
    flow_m3_d: tuple[float, ...]
    ratio: float | None  # as given (of the period's influent flow), for display


@dataclass(frozen=True)
class ReturnSludge:
    """Clarifier underflow returned to a zone, resolved to a flow per period."""

    to_zone: str
    flow_m3_d: tuple[float, ...]
    ratio: float | None


@dataclass(frozen=True)
class Wasting:
    """Waste sludge, drawn from the clarifier underflow.

    Exactly one of ``flow_m3_d`` (fixed flow per period) and ``srt_d`` (target
    sludge retention time, the waste flow follows) is set.
    """

    flow_m3_d: tuple[float, ...] | None
    srt_d: float | None


@dataclass(frozen=True)
class Settling:
    """Double-exponential settling velocity parameters (Takacs et al. 1991)."""

    v0_max_m_d: float  # maximum practical settling velocity v0'
    v0_m_d: float  # maximum Vesilind settling velocity
    rh_m3_g: float  # hindered-zone parameter
    rp_m3_g: float  # flocculant-zone parameter
    fns: float  # non-settleable fraction
    x_threshold_g_m3: float  # threshold concentration Xt


@dataclass(frozen=True)
class Clarifier:
    kind: ClarifierKind
    effluent_tss_mg_L: float  # ideal separator: fixed effluent TSS (0 = perfect)
    area_m2: float | None  # layered
    height_m: float | None  # layered
    layers: int  # layered, default 10
    feed_layer: int  # layered, counted from the top, 1-based
    settling: Settling | None  # layered
    tss_per_cod: float  # TSS / particulate COD, default 0.75


@dataclass(frozen=True)
class EfficiencyPoint:
    airflow_Sm3_h: float
    efficiency: float  # wire-to-air, 0..1


@dataclass(frozen=True)
class PowerPoint:
    """A measured or guaranteed blower duty point: wire power at an airflow and discharge pressure."""

    airflow_Sm3_h: float
    discharge_gauge_kPa: float  # above site atmosphere
    power_kW: float


@dataclass(frozen=True)
class RangePoint:
    """A blower's airflow range when running at one discharge pressure (turndown and capacity)."""

    discharge_gauge_kPa: float  # above site atmosphere
    airflow_min_Sm3_h: float
    airflow_max_Sm3_h: float


@dataclass(frozen=True)
class Blower:
    id: str
    kind: str  # e.g. "centrifugal", "turbo", "positive_displacement", "screw"
    airflow_min_Sm3_h: float
    airflow_max_Sm3_h: float
    pressure_max_gauge_kPa: float  # discharge-pressure limit above site atmosphere
    efficiency: float | None  # constant wire-to-air efficiency, or
    efficiency_points: tuple[EfficiencyPoint, ...]  # a curve vs airflow (derived when power points are given)
    power_points: tuple[PowerPoint, ...] = ()  # as given in the layout, if the curve came from power points
    out_of_service: bool = False  # never dispatched
    min_up_h: float = 0.0  # once started, runs at least this long
    min_down_h: float = 0.0  # once stopped, stays off at least this long
    max_starts_per_day: int | None = None  # None = no limit (starts counted around the periodic day)
    start_cost: float = 0.0  # currency per start (wear, inrush), added to the cost objective
    range_points: tuple[RangePoint, ...] = ()  # airflow range vs discharge pressure (empty: the range above);
    # linear between points, held beyond the ends (airtaper.optimize.dispatch.Machine.range_at)


@dataclass(frozen=True)
class Header:
    loss_k_kPa_per_Sm3_h2: float  # main header/pipe loss = k Q_total^2
    min_valve_loss_kPa: float  # loss kept across the most open valve
    aggregate_efficiency: float  # wire-to-air efficiency used by the diurnal optimiser


@dataclass(frozen=True)
class InletAir:
    temperature_C: tuple[float, ...]  # per period
    pressure_kPa: float | None  # absolute; None = site barometric pressure
    filter_loss_kPa: float

    def blower_inlet_pressure_kPa(self, site_pressure_kPa: float) -> float:
        """Blower inlet pressure, kPa absolute: the inlet air's (or the site's) minus the filter loss."""
        given = self.pressure_kPa if self.pressure_kPa is not None else site_pressure_kPa
        return float(blower_inlet_pressure_kPa(given, self.filter_loss_kPa))


@dataclass(frozen=True)
class Fractionation:
    """Split of measured influent quantities into ASM1 components.

    Fractions are of total COD unless named otherwise; see
    :mod:`airtaper.process.fractionation` for the equations and sources.
    """

    si_of_cod: float  # SI / total COD (SS = soluble COD - SI)
    xi_of_cod: float  # XI / total COD
    xbh_of_cod: float  # XBH / total COD
    xba_of_cod: float  # XBA / total COD
    snd_of_organic_n: float  # SND / (SND + XND), the biodegradable organic N
    sno_mg_L: float  # influent nitrate-N


@dataclass(frozen=True)
class Influent:
    """Influent per period (period means), resolved from the CSV or constants.

    When ``asm1_mg_L`` is set (benchmark plants) it gives the 13 ASM1 components
    per period directly (g/m3, SALK in mol/m3) and the measured quantities are
    derived from it for display only.
    """

    source: str  # CSV path as written in the layout, or "constant"
    flow_m3_d: tuple[float, ...]
    cod_total_mg_L: tuple[float, ...]
    cod_soluble_mg_L: tuple[float, ...]
    tkn_mg_L: tuple[float, ...]
    nh4_mg_L: tuple[float, ...]
    tss_mg_L: tuple[float, ...]
    alkalinity_mol_m3: tuple[float, ...]
    fractionation: Fractionation
    asm1_mg_L: tuple[tuple[float, ...], ...] | None = None  # [period][component]

    @property
    def mean_flow_m3_d(self) -> float:
        return sum(self.flow_m3_d) / len(self.flow_m3_d)


@dataclass(frozen=True)
class Limits:
    nh4_mean_mg_L: float | None  # flow-weighted daily mean of effluent NH4-N
    nh4_max_mg_L: float | None  # maximum of period means
    tn_mean_mg_L: float | None  # flow-weighted daily mean of effluent total N


@dataclass(frozen=True)
class Tariff:
    currency: str
    price_per_kWh: tuple[float, ...]  # per period
    demand_charge_per_kW: float  # per billing period of `demand_period_days`
    demand_period_days: float


@dataclass(frozen=True)
class Horizon:
    n_periods: int  # default 24
    period_h: float  # 24 / n_periods
    steps_per_period: int  # default 4


@dataclass(frozen=True)
class DayZoneDO:
    """A load day's own DO range of one zone (``[load_days.zones.<id>]``); None: the zone's own limit."""

    zone: str
    do_min_mg_L: float | None
    do_max_mg_L: float | None


@dataclass(frozen=True)
class LoadDay:
    """One named day of the year the plant must treat, and how many days of the year it stands for.

    The day's influent is either its own profile (``influent``) or the layout's base
    profile with its flow times ``flow_factor`` and its loads (COD, TSS, nitrogen)
    times ``load_factor``, so that concentrations scale by ``load_factor / flow_factor``.
    ``None`` in a per-period field means the layout's own value. ``limits`` is the
    layout's limits with the day's changes applied. See
    :func:`airtaper.layout.loaddays.day_layout`, which gives the Layout of one day.
    """

    id: str
    days_per_year: float  # weight of the day in annual sums
    basis: str | None  # the named day of defaults.LOAD_DAY_BASES the factors started from, as given
    flow_factor: float
    load_factor: float
    influent: Influent | None  # own profile (then both factors are 1)
    water_temperature_C: tuple[float, ...] | None
    air_temperature_C: tuple[float, ...] | None
    alpha_factor: float  # multiplies every zone's alpha
    limits: "Limits"
    zone_do: tuple[DayZoneDO, ...] = ()  # the day's own DO ranges of some zones (the others keep the zone's)


@dataclass(frozen=True)
class Capital:
    """Diffuser-grid capital costs, in the tariff's currency, for design studies."""

    cost_per_diffuser: float  # supplied and installed, one diffuser
    cost_per_zone: float  # fixed cost of installing a grid in one zone (pipework, drop leg, valve)
    interest_rate: float  # per year, as a fraction (0.05 = 5 %)
    life_years: float  # economic life of the grid


@dataclass(frozen=True)
class Kinetics:
    parameter_set: str  # "asm1_20C" or "bsm1_15C"
    overrides: tuple[tuple[str, float], ...]  # (name, value) pairs
    temperature_correction: bool  # correct rates from the set's reference temperature


@dataclass(frozen=True)
class Operation:
    """Operating choices the studies use."""

    baseline_do_setpoint_mg_L: float  # uniform DO control for the baseline, default 2.0
    objective: ObjectiveKind  # "cost" when a tariff is given, else "energy"
    smoothing_weight: float  # penalty on period-to-period airflow change (see docs)


@dataclass(frozen=True)
class Plant:
    name: str
    elevation_m: float
    temperature_C: tuple[float, ...]  # water temperature per period
    barometric_pressure_kPa: float | None  # None = from elevation
    salinity_g_kg: float

    @property
    def site_pressure_kPa(self) -> float:
        """Site barometric pressure, kPa absolute: as given, or from the elevation (US Standard Atmosphere 1976)."""
        if self.barometric_pressure_kPa is not None:
            return float(self.barometric_pressure_kPa)
        return float(barometric_pressure_kPa(self.elevation_m))


@dataclass(frozen=True)
class Layout:
    path: str  # file it was read from ("<memory>" when built in code)
    plant: Plant
    zones: tuple[Zone, ...]  # in flow order
    diffuser_types: tuple[DiffuserType, ...]
    step_feed: tuple[StepFeed, ...]
    recycles: tuple[Recycle, ...]
    return_sludge: ReturnSludge
    wasting: Wasting
    clarifier: Clarifier
    blowers: tuple[Blower, ...]
    header: Header
    inlet_air: InletAir
    influent: Influent
    limits: Limits
    tariff: Tariff | None
    horizon: Horizon
    kinetics: Kinetics
    operation: Operation
    notes: str = field(default="")
    load_days: tuple[LoadDay, ...] = ()  # empty: the base profile stands for every day of the year
    capital: Capital | None = None

    def zone(self, zone_id: str) -> Zone:
        for z in self.zones:
            if z.id == zone_id:
                return z
        raise KeyError(zone_id)

    def zone_index(self, zone_id: str) -> int:
        for i, z in enumerate(self.zones):
            if z.id == zone_id:
                return i
        raise KeyError(zone_id)

    def diffuser_type(self, type_id: str) -> DiffuserType:
        for d in self.diffuser_types:
            if d.id == type_id:
                return d
        raise KeyError(type_id)

    def diffuser_density_percent(self, zone: Zone) -> float:
        """Membrane area of the zone's grid over its floor area, in percent (:meth:`Zone.diffuser_density_percent`)."""
        return 0.0 if zone.grid is None else zone.diffuser_density_percent(self.diffuser_type(zone.grid.type_id))

    def zone_airflow_range_Sm3_h(self, zone: Zone) -> tuple[float, float]:
        """(min, max) zone airflow (:meth:`Zone.airflow_range_Sm3_h`)."""
        return (0.0, 0.0) if not zone.has_diffusers else zone.airflow_range_Sm3_h(self.diffuser_type(zone.grid.type_id))
