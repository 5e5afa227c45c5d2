"""Per-zone oxygen transfer for the simulator: airflow -> (field kLa, field saturation).

One function, :func:`zone_transfer`, turns a zone's airflow into the two numbers
of its DO balance ``dSO/dt = ... + kLa (C* - SO)`` through the physics layer
(SOTE curve, saturation at depth, field corrections). :class:`TransferTable`
samples it over the zone's airflow range so the right-hand side can invert it
(ideal DO control) with a monotone interpolation, vectorised.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from airtaper import units
from airtaper.physics import atmosphere, depth, saturation, transfer
from airtaper.physics.sote import fit_sote_curve

#: Airflow samples per zone table (between the zone's minimum and maximum airflow).
TABLE_POINTS = 65


@lru_cache(maxsize=64)
def _sote_curve(dtype):
    pts = dtype.sote_points
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return fit_sote_curve(
            [p.airflow_per_diffuser_Sm3_h for p in pts], [p.sote_percent for p in pts],
            [p.density_percent for p in pts], [p.submergence_m for p in pts], name=dtype.id,
        )


def site_pressure_kPa(layout) -> float:
    """Site barometric pressure: as given, or from elevation (US Standard Atmosphere 1976)."""
    if layout.plant.barometric_pressure_kPa is not None:
        return float(layout.plant.barometric_pressure_kPa)
    return float(atmosphere.barometric_pressure_kPa(layout.plant.elevation_m))


def surface_do_sat_mg_L(layout, zone, temperature_C: float) -> float:
    """Surface DO saturation at the site (zones with no diffuser grid and no fixed value)."""
    sat = saturation.do_sat_mg_L(temperature_C, site_pressure_kPa(layout), layout.plant.salinity_g_kg)
    return float(sat) * zone.beta


def zone_transfer(layout, zone, airflow_Sm3_h, temperature_C: float):
    """Field kLa (1/d) and field saturation (mg/L) of a zone at an airflow.

    Parameters
    ----------
    layout : Layout
    zone : Zone
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
    values. Diffused zones: SOTE from the diffuser type's fitted curve at the
    airflow per diffuser, C*inf20 from the effective-depth form, then
    ``kLa = SOTR alpha F theta**(T-20) / (C*inf20 V)`` and
    ``C* = tau beta Omega C*inf20`` (:mod:`airtaper.physics.transfer`).
    Zero airflow gives kLa 0.
    """
    q = np.asarray(airflow_Sm3_h, dtype=float)
    if zone.fixed_kla_per_d is not None:
        sat = zone.fixed_do_sat_mg_L if zone.fixed_do_sat_mg_L is not None else surface_do_sat_mg_L(
            layout, zone, temperature_C)
        return np.full_like(q, zone.fixed_kla_per_d), np.full_like(q, sat)
    if zone.grid is None or not zone.aerated:
        sat = zone.fixed_do_sat_mg_L if zone.fixed_do_sat_mg_L is not None else surface_do_sat_mg_L(
            layout, zone, temperature_C)
        return np.zeros_like(q), np.full_like(q, sat)
    dtype = layout.diffuser_type(zone.grid.type_id)
    curve = _sote_curve(dtype)
    density = layout.diffuser_density_percent(zone)
    c_inf20 = float(depth.c_inf20_mg_L(zone.grid.submergence_m, dtype.effective_depth_fraction))
    q_pos = np.maximum(q, 1e-9)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        sote = curve.sote_fraction(q_pos / zone.grid.count, density, zone.grid.submergence_m)
    kla_h = transfer.field_kla_per_h(q_pos, sote, zone.volume_m3, zone.alpha, zone.fouling,
                                     temperature_C, c_inf20)
    kla_d = np.where(q > 0.0, units.per_hour_to_per_day(kla_h), 0.0)
    sat = zone.fixed_do_sat_mg_L if zone.fixed_do_sat_mg_L is not None else float(
        transfer.field_do_sat_mg_L(temperature_C, c_inf20, zone.beta, site_pressure_kPa(layout)))
    return kla_d, np.full_like(q, sat)


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


def transfer_table(layout, zone, temperature_C: float) -> TransferTable | None:
    """The zone's kLa over its airflow range; None for zones without diffusers."""
    if zone.grid is None or not zone.aerated or zone.fixed_kla_per_d is not None:
        return None
    lo, hi = layout.zone_airflow_range_Sm3_h(zone)
    lo = max(lo, 1e-6 * hi)
    q = np.linspace(lo, hi, TABLE_POINTS)
    kla, sat = zone_transfer(layout, zone, q, temperature_C)
    kla = np.maximum.accumulate(kla)
    return TransferTable(q, kla, float(sat[0]))
