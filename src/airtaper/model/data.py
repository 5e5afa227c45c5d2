"""Numbers the train model needs, resolved once from a :class:`~airtaper.layout.types.Layout`.

Everything here is plain numpy: flows through every zone per period, the
influent's 13 ASM1 components per period, kinetic parameters and the Petersen
matrix per period, the field oxygen-transfer constants of every aerated zone, and
the clarifier. :mod:`airtaper.model.train` turns it into Pyomo components; no
Pyomo object is created here, so it is cheap and easy to test.

Hydraulics (volumes constant, flows fixed per period):

* influent: the layout's step-feed fractions go to their zones, the rest of the
  influent to the first zone;
* zone ``z`` receives the forward flow of zone ``z-1``, its influent share, every
  internal recycle ending in it and the return sludge if it ends there; it sends
  the same flow on: recycles starting in it and the remainder ("forward flow") to
  zone ``z+1`` (the last zone's forward flow feeds the clarifier);
* clarifier underflow = return sludge + waste; effluent = clarifier feed - underflow.

Flows are in m3/d, volumes in m3, concentrations in g/m3 (alkalinity mol/m3),
airflow in Sm3/h (:mod:`airtaper.units`).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from airtaper import units
from airtaper.errors import ModelError
from airtaper.layout.types import Layout
from airtaper.physics.atmosphere import barometric_pressure_kPa
from airtaper.physics.depth import c_inf20_mg_L
from airtaper.physics.sote import SoteCurve, fit_sote_curve
from airtaper.physics.transfer import field_do_sat_mg_L
from airtaper.process.asm1 import ASM1Parameters, at_temperature, layout_parameters, period_parameters
from airtaper.process.fractionation import influent_components
from airtaper.process.stoichiometry import petersen_matrix


@dataclass(frozen=True, eq=False)
class GridAeration:
    """Field oxygen transfer of a zone with a diffuser grid (airflow is the handle)."""

    sote: SoteCurve
    diffusers: int
    density_percent: float
    submergence_m: float
    c_inf20_mg_L: float
    alpha: float
    fouling: float
    beta: float
    pressure_kPa: float  # site barometric pressure
    do_sat_mg_L: np.ndarray  # (P,) field saturation per period


@dataclass(frozen=True, eq=False)
class FixedAeration:
    """A zone with a given kLa and saturation (benchmark plants, mechanical aerators)."""

    kla_per_d: float
    do_sat_mg_L: float


@dataclass(frozen=True, eq=False)
class TrainData:
    """Resolved numbers of one train, per period (``P`` periods, ``Z`` zones)."""

    layout: Layout
    zones: tuple[str, ...]
    volume_m3: np.ndarray  # (Z,)
    n_periods: int
    period_h: float
    steps_per_period: int
    temperature_C: np.ndarray  # (P,)
    params: tuple[ASM1Parameters, ...]  # (P,)
    nu: np.ndarray  # (P, 8, 13) Petersen matrix per period
    influent_m3_d: np.ndarray  # (P,)
    influent_conc: np.ndarray  # (P, 13)
    feed_fraction: np.ndarray  # (Z,) share of the influent entering each zone
    recycles: tuple[tuple[int, int, np.ndarray], ...]  # (from zone, to zone, flow (P,))
    ras_zone: int
    ras_m3_d: np.ndarray  # (P,)
    zone_flow_m3_d: np.ndarray  # (P, Z) flow through each zone (in = out)
    forward_m3_d: np.ndarray  # (P, Z) flow from zone z to z+1 / to the clarifier
    waste_m3_d: np.ndarray | None  # (P,) fixed waste flow, or None with an SRT target
    srt_d: float | None
    aeration: tuple[GridAeration | FixedAeration | None, ...]  # (Z,)

    @property
    def n_zones(self) -> int:
        return len(self.zones)

    @property
    def clarifier(self):
        return self.layout.clarifier

    @property
    def feed_m3_d(self) -> np.ndarray:
        """Clarifier feed per period (forward flow of the last zone), m3/d."""
        return self.forward_m3_d[:, -1]


def _feed_fraction(layout: Layout) -> np.ndarray:
    zones = [z.id for z in layout.zones]
    frac = np.zeros(len(zones))
    for sf in layout.step_feed:
        frac[zones.index(sf.zone)] += sf.fraction
    rest = 1.0 - frac.sum()
    if rest < -1e-9:
        raise ModelError(f"step-feed fractions add up to {frac.sum():.6g} > 1")
    frac[0] += max(rest, 0.0)
    return frac


def _hydraulics(n_zones, feed_fraction, influent, recycles, ras_zone, ras):
    """Zone throughflow and forward flow per period, (P, Z) each."""
    n_p = influent.size
    through = np.zeros((n_p, n_zones))
    forward = np.zeros((n_p, n_zones))
    for i in range(n_zones):
        q_in = feed_fraction[i] * influent + (forward[:, i - 1] if i else 0.0)
        q_out_recycle = np.zeros(n_p)
        for src, dst, q in recycles:
            if dst == i:
                q_in = q_in + q
            if src == i:
                q_out_recycle = q_out_recycle + q
        if ras_zone == i:
            q_in = q_in + ras
        through[:, i] = q_in
        forward[:, i] = q_in - q_out_recycle
    return through, forward


def _grid_aeration(layout: Layout, zone, temperature_C, pressure_kPa, curves) -> GridAeration:
    dtype = layout.diffuser_type(zone.grid.type_id)
    if dtype.id not in curves:
        pts = dtype.sote_points
        curves[dtype.id] = fit_sote_curve(
            [p.airflow_per_diffuser_Sm3_h for p in pts], [p.sote_percent for p in pts],
            [p.density_percent for p in pts], [p.submergence_m for p in pts],
            name=dtype.id, source_file=layout.path, key=f"diffuser_types.{dtype.id}.sote_points")
    c_inf20 = float(c_inf20_mg_L(zone.grid.submergence_m, dtype.effective_depth_fraction))
    sat = np.array([float(field_do_sat_mg_L(t, c_inf20, zone.beta, pressure_kPa)) for t in temperature_C])
    return GridAeration(sote=curves[dtype.id], diffusers=zone.grid.count,
                        density_percent=layout.diffuser_density_percent(zone),
                        submergence_m=zone.grid.submergence_m, c_inf20_mg_L=c_inf20,
                        alpha=zone.alpha, fouling=zone.fouling, beta=zone.beta,
                        pressure_kPa=float(pressure_kPa), do_sat_mg_L=sat)


def train_data(layout: Layout) -> TrainData:
    """Resolve the per-period numbers of ``layout`` (see the module notes)."""
    zones = tuple(z.id for z in layout.zones)
    n_z = len(zones)
    temperature = np.asarray(layout.plant.temperature_C, dtype=float)
    params = period_parameters(layout)
    nu = np.stack([petersen_matrix(p) for p in params])
    influent = np.asarray(layout.influent.flow_m3_d, dtype=float)
    conc = influent_components(layout.influent, params[0], layout.path)
    feed_fraction = _feed_fraction(layout)
    recycles = tuple((layout.zone_index(r.from_zone), layout.zone_index(r.to_zone),
                      np.asarray(r.flow_m3_d, dtype=float)) for r in layout.recycles)
    ras_zone = layout.zone_index(layout.return_sludge.to_zone)
    ras = np.asarray(layout.return_sludge.flow_m3_d, dtype=float)
    through, forward = _hydraulics(n_z, feed_fraction, influent, recycles, ras_zone, ras)
    if (forward <= 0).any():
        i, j = np.argwhere(forward <= 0)[0]
        raise ModelError(f"zone {zones[j]}: recycles leave no forward flow in period {i + 1}")
    waste = None if layout.wasting.flow_m3_d is None else np.asarray(layout.wasting.flow_m3_d, dtype=float)
    pressure = layout.plant.barometric_pressure_kPa
    if pressure is None:
        pressure = float(barometric_pressure_kPa(layout.plant.elevation_m))
    curves: dict[str, SoteCurve] = {}
    aeration = []
    for z in layout.zones:
        if z.kind == "anoxic":
            aeration.append(None)
        elif z.fixed_kla_per_d is not None:
            aeration.append(FixedAeration(float(z.fixed_kla_per_d), float(z.fixed_do_sat_mg_L)))
        elif z.grid is not None:
            aeration.append(_grid_aeration(layout, z, temperature, pressure, curves))
        else:
            aeration.append(None)
    return TrainData(
        layout=layout, zones=zones, volume_m3=np.array([z.volume_m3 for z in layout.zones], dtype=float),
        n_periods=layout.horizon.n_periods, period_h=layout.horizon.period_h,
        steps_per_period=layout.horizon.steps_per_period, temperature_C=temperature, params=params, nu=nu,
        influent_m3_d=influent, influent_conc=conc, feed_fraction=feed_fraction, recycles=recycles,
        ras_zone=ras_zone, ras_m3_d=ras, zone_flow_m3_d=through, forward_m3_d=forward, waste_m3_d=waste,
        srt_d=layout.wasting.srt_d, aeration=tuple(aeration))


def _mean(x: np.ndarray) -> np.ndarray:
    return np.asarray(x, dtype=float).mean(axis=0, keepdims=True)


def mean_load(data: TrainData) -> TrainData:
    """The day collapsed to one period: the steady state "at mean load".

    Flows are daily means; influent concentrations are flow-weighted daily means
    (so the daily mass load is kept); temperature is the daily mean, and the
    kinetic parameters are taken at that temperature when the layout corrects
    for temperature. The field saturation of grid zones is evaluated at the
    mean temperature.
    """
    layout = data.layout
    q = data.influent_m3_d
    conc = (q[:, None] * data.influent_conc).sum(axis=0, keepdims=True) / q.sum()
    t_mean = float(data.temperature_C.mean())
    if layout.kinetics.temperature_correction:
        params = (at_temperature(layout_parameters(layout), t_mean),)
    else:
        params = (layout_parameters(layout),)
    aeration = []
    for a in data.aeration:
        if isinstance(a, GridAeration):
            sat = np.array([float(field_do_sat_mg_L(t_mean, a.c_inf20_mg_L, a.beta, a.pressure_kPa))])
            aeration.append(replace(a, do_sat_mg_L=sat))
        else:
            aeration.append(a)
    return replace(
        data, n_periods=1, period_h=units.HOURS_PER_DAY, steps_per_period=1, temperature_C=np.array([t_mean]),
        params=params,
        nu=np.stack([petersen_matrix(params[0])]), influent_m3_d=_mean(q), influent_conc=conc,
        recycles=tuple((s, d, _mean(f)) for s, d, f in data.recycles), ras_m3_d=_mean(data.ras_m3_d),
        zone_flow_m3_d=_mean(data.zone_flow_m3_d), forward_m3_d=_mean(data.forward_m3_d),
        waste_m3_d=None if data.waste_m3_d is None else _mean(data.waste_m3_d), aeration=tuple(aeration))


def single_period(data: TrainData, period: int) -> TrainData:
    """The day reduced to one of its periods (0-based), for a steady state at that period's load."""
    sl = slice(period, period + 1)
    aeration = tuple(replace(a, do_sat_mg_L=a.do_sat_mg_L[sl]) if isinstance(a, GridAeration) else a
                     for a in data.aeration)
    return replace(
        data, n_periods=1, period_h=units.HOURS_PER_DAY, steps_per_period=1, temperature_C=data.temperature_C[sl],
        params=(data.params[period],), nu=data.nu[sl], influent_m3_d=data.influent_m3_d[sl],
        influent_conc=data.influent_conc[sl], recycles=tuple((s, d, f[sl]) for s, d, f in data.recycles),
        ras_m3_d=data.ras_m3_d[sl], zone_flow_m3_d=data.zone_flow_m3_d[sl], forward_m3_d=data.forward_m3_d[sl],
        waste_m3_d=None if data.waste_m3_d is None else data.waste_m3_d[sl], aeration=aeration)

