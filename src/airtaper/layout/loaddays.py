"""Load days: the Layout of one named day of the year.

A layout's ``[[load_days]]`` name the days a design or a year study must treat
(average day, maximum month, peak day, minimum day, winter, summer, ...), each with
its weight in days per year. :func:`day_layout` turns one of them into a complete
Layout of that day, so that every later layer (model, simulator, optimiser) treats
a load day exactly like a layout of its own; :func:`layout_days` gives a layout's
days, or the base profile as the one day of the year when it names none.

Scaling the base profile: the flow of every period is multiplied by the flow
factor and every load (COD, TSS, nitrogen; with ASM1 components, every component
but oxygen and alkalinity) by the load factor, so concentrations change by
load factor / flow factor. Alkalinity is a property of the water and keeps its
concentration. Recycles and return sludge given as ratios follow the day's flow;
those given as flows keep them. A day's own DO range of a zone (``[load_days.zones.<id>]``, say a DO maximum
the operator accepts higher on the minimum day) replaces the zone's limit on that day only; the other zones,
and the limits it does not name, keep the zone's own.
"""

from __future__ import annotations

from dataclasses import replace

from airtaper.layout import defaults
from airtaper.layout.types import ASM1_COMPONENTS, Influent, Layout, LoadDay

#: ASM1 components whose influent concentration does not follow the load: dissolved oxygen and alkalinity.
_UNSCALED_COMPONENTS = ("SO", "SALK")


def base_day(layout: Layout) -> LoadDay:
    """The layout's own profile as one day standing for the whole year."""
    return LoadDay(
        id="base", days_per_year=defaults.DAYS_PER_YEAR, basis=None, flow_factor=1.0, load_factor=1.0,
        influent=None, water_temperature_C=None, air_temperature_C=None, alpha_factor=1.0, limits=layout.limits,
    )


def layout_days(layout: Layout) -> tuple[LoadDay, ...]:
    """The layout's load days in file order, or its base profile as the one day of the year."""
    return layout.load_days if layout.load_days else (base_day(layout),)


def scaled_influent(influent: Influent, flow_factor: float, load_factor: float) -> Influent:
    """The influent with flows times ``flow_factor`` and loads times ``load_factor`` (see the module notes)."""
    conc = load_factor / flow_factor
    asm1 = None
    if influent.asm1_mg_L is not None:
        keep = [c in _UNSCALED_COMPONENTS for c in ASM1_COMPONENTS]
        asm1 = tuple(tuple(v if k else v * conc for v, k in zip(row, keep)) for row in influent.asm1_mg_L)
    return replace(
        influent,
        flow_m3_d=tuple(flow_factor * q for q in influent.flow_m3_d),
        cod_total_mg_L=tuple(conc * x for x in influent.cod_total_mg_L),
        cod_soluble_mg_L=tuple(conc * x for x in influent.cod_soluble_mg_L),
        tkn_mg_L=tuple(conc * x for x in influent.tkn_mg_L),
        nh4_mg_L=tuple(conc * x for x in influent.nh4_mg_L),
        tss_mg_L=tuple(conc * x for x in influent.tss_mg_L),
        asm1_mg_L=asm1,
    )


def day_layout(layout: Layout, day: LoadDay) -> Layout:
    """The complete Layout of one load day (its own load days emptied: it is one day)."""
    if day.influent is not None:
        influent = day.influent
    elif day.flow_factor == 1.0 and day.load_factor == 1.0:
        influent = layout.influent
    else:
        influent = scaled_influent(layout.influent, day.flow_factor, day.load_factor)
    q = influent.flow_m3_d
    recycles = tuple(r if r.ratio is None else replace(r, flow_m3_d=tuple(r.ratio * x for x in q))
                     for r in layout.recycles)
    ras = layout.return_sludge
    if ras.ratio is not None:
        ras = replace(ras, flow_m3_d=tuple(ras.ratio * x for x in q))
    plant = layout.plant
    if day.water_temperature_C is not None:
        plant = replace(plant, temperature_C=day.water_temperature_C)
    inlet = layout.inlet_air
    if day.air_temperature_C is not None:
        inlet = replace(inlet, temperature_C=day.air_temperature_C)
    zones = layout.zones
    if day.alpha_factor != 1.0:
        zones = tuple(replace(z, alpha=z.alpha * day.alpha_factor) for z in zones)
    if day.zone_do:
        own = {d.zone: d for d in day.zone_do}
        zones = tuple(z if z.id not in own else replace(
            z, do_min_mg_L=z.do_min_mg_L if own[z.id].do_min_mg_L is None else own[z.id].do_min_mg_L,
            do_max_mg_L=z.do_max_mg_L if own[z.id].do_max_mg_L is None else own[z.id].do_max_mg_L) for z in zones)
    return replace(layout, plant=plant, zones=zones, influent=influent, recycles=recycles, return_sludge=ras,
                   inlet_air=inlet, limits=day.limits, load_days=())


def with_grid_counts(layout: Layout, counts: dict[str, int]) -> Layout:
    """The layout with the diffuser counts of the named zones replaced (a candidate grid of a design)."""
    zones = tuple(replace(z, grid=replace(z.grid, count=int(counts[z.id]))) if z.id in counts else z
                  for z in layout.zones)
    return replace(layout, zones=zones)


__all__ = ["base_day", "day_layout", "layout_days", "scaled_influent", "with_grid_counts"]
