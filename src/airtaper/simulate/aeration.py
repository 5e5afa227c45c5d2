"""Per-zone oxygen transfer for the simulator: airflow -> (field kLa, field saturation).

One function, :func:`zone_transfer`, turns a zone's airflow into the two numbers
of its DO balance ``dSO/dt = ... + kLa (C* - SO)`` through the resolved plant's
kLa rule and saturation (:mod:`airtaper.plant`: the inputs and the pure physics
the simulator shares with the model; its equations and integrator are its own). :class:`TransferTable`
samples it over the zone's airflow range so the right-hand side can invert it
(ideal DO control) with a monotone interpolation, vectorised.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from airtaper.plant import DiffusedZone, FixedKla, ResolvedPlant

#: Airflow samples per zone table (between the zone's minimum and maximum airflow).
TABLE_POINTS = 65


def zone_transfer(plant: ResolvedPlant, index: int, airflow_Sm3_h, temperature_C: float):
    """Field kLa (1/d) and field saturation (mg/L) of zone ``index`` at an airflow.

    Parameters
    ----------
    plant : ResolvedPlant
    index : int
        The zone's position in the train.
    airflow_Sm3_h : float or ndarray
        Zone airflow, Sm3/h (ignored for fixed-kLa zones).
    temperature_C : float
        Mixed-liquor temperature.

    Returns
    -------
    (kla_per_d, do_sat_mg_L) : arrays shaped like ``airflow_Sm3_h``.

    Notes
    -----
    Fixed-kLa zones (benchmark plants, mechanical aerators) return their fixed
    values. Diffused zones: the plant's kLa rule (SOTE from the diffuser type's
    fitted curve at the airflow per diffuser, C*inf20 from the effective-depth form,
    ``kLa = SOTR alpha F theta**(T-20) / (C*inf20 V)``) and saturation
    ``C* = tau beta Omega C*inf20`` (:mod:`airtaper.physics.transfer`).
    Zero airflow gives kLa 0.
    """
    q = np.asarray(airflow_Sm3_h, dtype=float)
    a = plant.aeration[index]
    sat = plant.zone_do_sat_mg_L(index, temperature_C)
    if isinstance(a, FixedKla):
        return np.full_like(q, a.kla_per_d), np.full_like(q, sat)
    if not isinstance(a, DiffusedZone):
        return np.zeros_like(q), np.full_like(q, sat)
    q_pos = np.maximum(q, 1e-9)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        kla_d = a.kla_per_d(q_pos, temperature_C)
    return np.where(q > 0.0, kla_d, 0.0), np.full_like(q, float(sat))


@dataclass(frozen=True)
class TransferTable:
    """kLa sampled over a zone's airflow range, for inversion (ideal DO control)."""

    airflow_Sm3_h: np.ndarray  # increasing
    kla_per_d: np.ndarray  # non-decreasing
    do_sat_mg_L: float

    @property
    def kla_min(self) -> float:
        return float(self.kla_per_d[0])

    @property
    def kla_max(self) -> float:
        return float(self.kla_per_d[-1])

    def airflow(self, kla_per_d):
        """Airflow giving ``kla_per_d`` (clamped to the table)."""
        return np.interp(kla_per_d, self.kla_per_d, self.airflow_Sm3_h)

    def kla(self, airflow_Sm3_h):
        return np.interp(airflow_Sm3_h, self.airflow_Sm3_h, self.kla_per_d)


def transfer_table(plant: ResolvedPlant, index: int, temperature_C: float) -> TransferTable | None:
    """Zone ``index``'s kLa over its airflow range; None for zones without diffusers."""
    a = plant.aeration[index]
    if not isinstance(a, DiffusedZone):
        return None
    lo, hi = a.airflow_range_Sm3_h
    lo = max(lo, 1e-6 * hi)
    q = np.linspace(lo, hi, TABLE_POINTS)
    kla, sat = zone_transfer(plant, index, q, temperature_C)
    kla = np.maximum.accumulate(kla)
    return TransferTable(q, kla, float(sat[0]))
