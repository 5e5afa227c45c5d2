"""The plant over the data's days: the layout on the record's own horizon.

A record of ``D`` days on periods of ``period_h`` becomes a layout whose "day" is the
whole record (``n_periods = D x 24 / period_h``): the model and the simulator both
treat that horizon as one cycle, so the state at the end of the record equals the
state at its start. For synthetic data made that way the assumption is exact; for
real data the first hours are affected by it and ``warmup_h`` leaves them out of the
fit (docs/calibration.md).

Inputs per period: the record's influent flow, airflows, and where logged its
influent quality and water temperature; everything the record does not give (the
influent quality, temperature, recycle and waste flows given as flows, inlet-air
temperature, prices) is the layout's value at the same time of day. Recycles and
return sludge given as ratios follow the record's flow.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from airtaper import units
from airtaper.layout.influent import CONCENTRATIONS
from airtaper.layout.plantdata import PeriodInputs
from airtaper.layout.types import Horizon, Layout


def time_of_day_index(layout: Layout, start_h: float, period_h: float, n_periods: int) -> np.ndarray:
    """The layout period holding the middle of each record period (by time of day)."""
    mid = start_h + (np.arange(n_periods) + 0.5) * period_h
    hours = np.mod(mid, units.HOURS_PER_DAY)
    return (np.floor(hours / layout.horizon.period_h).astype(int)) % layout.horizon.n_periods


def record_layout(layout: Layout, inputs: PeriodInputs, steps_per_period: int) -> Layout:
    """``layout`` on the record's horizon (see module notes); airflows are not part of a layout."""
    n = inputs.n_periods
    idx = time_of_day_index(layout, inputs.start_h, inputs.period_h, n)

    def by_day(values):
        return tuple(float(values[i]) for i in idx)

    flow = tuple(float(q) for q in inputs.flow_m3_d)
    inf = layout.influent
    if inputs.quality is not None:
        influent = replace(inf, source="plant data", flow_m3_d=flow, asm1_mg_L=None,
                           **{c: tuple(float(v) for v in inputs.quality[c]) for c in CONCENTRATIONS})
    else:
        influent = replace(inf, flow_m3_d=flow, **{c: by_day(getattr(inf, c)) for c in CONCENTRATIONS},
                           asm1_mg_L=None if inf.asm1_mg_L is None else tuple(inf.asm1_mg_L[i] for i in idx))

    def follow(obj):
        if obj.ratio is not None:
            return replace(obj, flow_m3_d=tuple(obj.ratio * q for q in flow))
        return replace(obj, flow_m3_d=by_day(obj.flow_m3_d))

    wasting = layout.wasting
    if wasting.flow_m3_d is not None:
        wasting = replace(wasting, flow_m3_d=by_day(wasting.flow_m3_d))
    temperature = (tuple(float(t) for t in inputs.temperature_C) if inputs.temperature_C is not None
                   else by_day(layout.plant.temperature_C))
    tariff = layout.tariff
    if tariff is not None:
        tariff = replace(tariff, price_per_kWh=by_day(tariff.price_per_kWh))
    return replace(
        layout,
        plant=replace(layout.plant, temperature_C=temperature),
        influent=influent,
        recycles=tuple(follow(r) for r in layout.recycles),
        return_sludge=follow(layout.return_sludge),
        wasting=wasting,
        inlet_air=replace(layout.inlet_air, temperature_C=by_day(layout.inlet_air.temperature_C)),
        tariff=tariff,
        horizon=Horizon(n, float(inputs.period_h), int(steps_per_period)),
    )


__all__ = ["record_layout", "time_of_day_index"]
