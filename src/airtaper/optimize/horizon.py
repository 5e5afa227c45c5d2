"""A layout on another diurnal grid: fewer (or more) periods per day.

Tests and benchmarks solve shorter horizons (6 or 12 periods) or finer ones (48, 96)
of the same plant. Every per-period tuple of the layout is mapped to the new grid:

* coarser grid (``24 / n`` a multiple of the old period): flows, temperatures and
  prices are the plain means of the periods merged; influent concentrations are
  flow-weighted means (the merged period carries the same volume and loads);
* finer grid (the old period a multiple of the new one): values are repeated.

The number of periods must divide, or be divisible by, the old one.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from airtaper import units
from airtaper.errors import ModelError
from airtaper.layout.types import Layout

_CONCENTRATIONS = ("cod_total_mg_L", "cod_soluble_mg_L", "tkn_mg_L", "nh4_mg_L", "tss_mg_L", "alkalinity_mol_m3")


def _mapper(old: int, new: int):
    if new == old:
        return lambda v, w=None: tuple(float(x) for x in v)
    if old % new == 0:
        k = old // new

        def coarse(v, w=None):
            a = np.asarray(v, dtype=float).reshape(new, k)
            if w is None:
                return tuple(float(x) for x in a.mean(axis=1))
            ww = np.asarray(w, dtype=float).reshape(new, k)
            return tuple(float(x) for x in (a * ww).sum(axis=1) / ww.sum(axis=1))
        return coarse
    if new % old == 0:
        k = new // old
        return lambda v, w=None: tuple(float(x) for x in np.repeat(np.asarray(v, dtype=float), k))
    raise ModelError(f"cannot map {old} periods onto {new}: one must divide the other")


def _influent(inf, f):
    q = inf.flow_m3_d
    return replace(inf, flow_m3_d=f(q), **{c: f(getattr(inf, c), q) for c in _CONCENTRATIONS},
                   asm1_mg_L=None if inf.asm1_mg_L is None else tuple(
                       zip(*[f(col, q) for col in zip(*inf.asm1_mg_L)])))


def with_periods(layout: Layout, n_periods: int, steps_per_period: int | None = None) -> Layout:
    """``layout`` on a grid of ``n_periods`` periods per day (see module notes)."""
    old = layout.horizon.n_periods
    f = _mapper(old, n_periods)
    influent = _influent(layout.influent, f)
    days = tuple(replace(
        d, influent=None if d.influent is None else _influent(d.influent, f),
        water_temperature_C=None if d.water_temperature_C is None else f(d.water_temperature_C),
        air_temperature_C=None if d.air_temperature_C is None else f(d.air_temperature_C)) for d in layout.load_days)
    tariff = layout.tariff
    if tariff is not None:
        tariff = replace(tariff, price_per_kWh=f(tariff.price_per_kWh))
    wasting = layout.wasting
    if wasting.flow_m3_d is not None:
        wasting = replace(wasting, flow_m3_d=f(wasting.flow_m3_d))
    spp = layout.horizon.steps_per_period if steps_per_period is None else int(steps_per_period)
    return replace(
        layout,
        plant=replace(layout.plant, temperature_C=f(layout.plant.temperature_C)),
        influent=influent,
        recycles=tuple(replace(r, flow_m3_d=f(r.flow_m3_d)) for r in layout.recycles),
        return_sludge=replace(layout.return_sludge, flow_m3_d=f(layout.return_sludge.flow_m3_d)),
        wasting=wasting,
        inlet_air=replace(layout.inlet_air, temperature_C=f(layout.inlet_air.temperature_C)),
        tariff=tariff,
        load_days=days,
        horizon=replace(layout.horizon, n_periods=int(n_periods), period_h=units.HOURS_PER_DAY / n_periods,
                        steps_per_period=spp),
    )


__all__ = ["with_periods"]
