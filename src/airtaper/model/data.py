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
from airtaper.plant import DiffusedZone, FixedKla, Hydraulics, ResolvedPlant, resolve_plant
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
    influent_conc: np.ndarray  # (P, 13)
    hydraulics: Hydraulics  # flows per period (the plant's, or their daily mean / one period)
    aeration: tuple[GridAeration | FixedAeration | None, ...]  # (Z,)

    @property
    def n_zones(self) -> int:
        return len(self.zones)

    @property
    def clarifier(self):
        return self.plant.clarifier

    # --- the flows (airtaper.plant.Hydraulics) ---------------------------------------------
    @property
    def influent_m3_d(self) -> np.ndarray:  # (P,)
        return self.hydraulics.influent_m3_d

    @property
    def feed_fraction(self) -> np.ndarray:  # (Z,) share of the influent entering each zone
        return self.hydraulics.feed_fraction

    @property
    def recycles(self) -> tuple:  # (from zone, to zone, flow (P,))
        return self.hydraulics.recycles

    @property
    def ras_zone(self) -> int:
        return self.hydraulics.ras_zone

    @property
    def ras_m3_d(self) -> np.ndarray:  # (P,)
        return self.hydraulics.ras_m3_d

    @property
    def zone_flow_m3_d(self) -> np.ndarray:  # (P, Z) flow through each zone (in = out)
        return self.hydraulics.zone_flow_m3_d

    @property
    def forward_m3_d(self) -> np.ndarray:  # (P, Z) flow from zone z to z+1 / to the clarifier
        return self.hydraulics.forward_m3_d

    @property
    def waste_m3_d(self) -> np.ndarray | None:  # (P,) fixed waste flow, or None with an SRT target
        return self.hydraulics.waste_m3_d

    @property
    def srt_d(self) -> float | None:
        return self.hydraulics.srt_d

    @property
    def feed_m3_d(self) -> np.ndarray:
        """Clarifier feed per period (forward flow of the last zone), m3/d."""
        return self.hydraulics.feed_m3_d


def train_data(plant: ResolvedPlant | Layout) -> TrainData:
    """The per-period numbers of a resolved plant (a layout is resolved first), see the module notes."""
    plant = resolve_plant(plant)
    return TrainData(
        plant=plant, zones=plant.zone_ids, volume_m3=plant.volume_m3, n_periods=plant.n_periods,
        period_h=plant.period_h, steps_per_period=plant.horizon.steps_per_period, temperature_C=plant.temperature_C,
        params=plant.params, nu=np.stack([petersen_matrix(p) for p in plant.params]),
        influent_conc=plant.influent_conc, hydraulics=plant.hydraulics, aeration=plant.aeration)


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
        nu=np.stack([petersen_matrix(params[0])]), influent_conc=conc, hydraulics=data.hydraulics.over(_mean),
        aeration=tuple(aeration))


def single_period(data: TrainData, period: int) -> TrainData:
    """The day reduced to one of its periods (0-based), for a steady state at that period's load."""
    sl = slice(period, period + 1)
    aeration = tuple(replace(a, do_sat_mg_L=a.do_sat_mg_L[sl]) if isinstance(a, GridAeration) else a
                     for a in data.aeration)
    return replace(
        data, n_periods=1, period_h=HOURS_PER_DAY, steps_per_period=1, temperature_C=data.temperature_C[sl],
        params=(data.params[period],), nu=data.nu[sl], influent_conc=data.influent_conc[sl],
        hydraulics=data.hydraulics.over(lambda a: a[sl]), aeration=aeration)

