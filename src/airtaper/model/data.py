"""Numbers the train model needs, read from the :class:`~airtaper.plant.ResolvedPlant`.

Everything here is plain numpy (the plant's arrays, resolved once in :mod:`airtaper.plant.resolve`): flows through every zone per period, the
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

from airtaper.layout.types import Layout
from airtaper.units import HOURS_PER_DAY
from airtaper.plant import DiffusedZone, FixedKla, ResolvedPlant, resolve_plant
from airtaper.process.asm1 import ASM1Parameters, at_temperature
from airtaper.process.stoichiometry import petersen_matrix

#: A zone with a diffuser grid, as the model sees it: the resolved plant's diffused zone.
GridAeration = DiffusedZone
#: A zone with a given kLa and saturation: the resolved plant's fixed-kLa zone.
FixedAeration = FixedKla


@dataclass(frozen=True, eq=False)
class TrainData:
    """Resolved numbers of one train, per period (``P`` periods, ``Z`` zones)."""

    plant: ResolvedPlant
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
    def layout(self) -> Layout:
        """The layout the plant was resolved from (for what is written back out)."""
        return self.plant.layout

    @property
    def n_zones(self) -> int:
        return len(self.zones)

    @property
    def clarifier(self):
        return self.plant.clarifier

    @property
    def feed_m3_d(self) -> np.ndarray:
        """Clarifier feed per period (forward flow of the last zone), m3/d."""
        return self.forward_m3_d[:, -1]


def train_data(plant: ResolvedPlant | Layout) -> TrainData:
    """The per-period numbers of a resolved plant (a layout is resolved first), see the module notes."""
    plant = resolve_plant(plant)
    h = plant.hydraulics
    return TrainData(
        plant=plant, zones=plant.zone_ids, volume_m3=plant.volume_m3, n_periods=plant.n_periods,
        period_h=plant.period_h, steps_per_period=plant.horizon.steps_per_period, temperature_C=plant.temperature_C,
        params=plant.params, nu=np.stack([petersen_matrix(p) for p in plant.params]),
        influent_m3_d=h.influent_m3_d, influent_conc=plant.influent_conc, feed_fraction=h.feed_fraction,
        recycles=h.recycles, ras_zone=h.ras_zone, ras_m3_d=h.ras_m3_d, zone_flow_m3_d=h.zone_flow_m3_d,
        forward_m3_d=h.forward_m3_d, waste_m3_d=h.waste_m3_d, srt_d=h.srt_d, aeration=plant.aeration)


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
    plant = data.plant
    q = data.influent_m3_d
    conc = (q[:, None] * data.influent_conc).sum(axis=0, keepdims=True) / q.sum()
    t_mean = float(data.temperature_C.mean())
    if plant.kinetics.temperature_correction:
        params = (at_temperature(plant.base_params, t_mean),)
    else:
        params = (plant.base_params,)
    aeration = []
    for a in data.aeration:
        if isinstance(a, GridAeration):
            sat = np.array([float(a.do_sat_at(t_mean))])
            aeration.append(replace(a, do_sat_mg_L=sat))
        else:
            aeration.append(a)
    return replace(
        data, n_periods=1, period_h=HOURS_PER_DAY, steps_per_period=1, temperature_C=np.array([t_mean]), params=params,
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
        data, n_periods=1, period_h=HOURS_PER_DAY, steps_per_period=1, temperature_C=data.temperature_C[sl],
        params=(data.params[period],), nu=data.nu[sl], influent_m3_d=data.influent_m3_d[sl],
        influent_conc=data.influent_conc[sl], recycles=tuple((s, d, f[sl]) for s, d, f in data.recycles),
        ras_m3_d=data.ras_m3_d[sl], zone_flow_m3_d=data.zone_flow_m3_d[sl], forward_m3_d=data.forward_m3_d[sl],
        waste_m3_d=None if data.waste_m3_d is None else data.waste_m3_d[sl], aeration=aeration)

