"""The one resolution step: a validated layout to the :class:`ResolvedPlant` every layer computes with.

:func:`resolve_plant` runs every check that needs more than the parser (the SOTE and
headloss fits, the influent fractionation, the ASM1 overrides, a positive forward flow
out of every zone in every period) and reports all their problems at once as one
:class:`~airtaper.errors.InputError` in the layout's error form (file, key, got,
expected). :func:`load_plant` reads a layout file (with an optional override file)
and resolves it: the entry point of every command, ``check`` included, so a layout
``check`` passes is one the model, the simulator and the optimiser accept.

A plant is resolved once per layout: :func:`resolve_plant` keeps the last few
results, so layers handed the same layout share one plant.
"""

from __future__ import annotations

import math
import os
import warnings as _warnings
from collections import OrderedDict
from dataclasses import replace

import numpy as np

from airtaper.errors import InputError, Problem
from airtaper.layout import defaults as D
from airtaper.layout.graph import forward_flows
from airtaper.layout.loaddays import day_layout, with_grid_counts
from airtaper.layout.overrides import blame_overrides, load_layout_with_overrides
from airtaper.layout.reader import LayoutWarning
from airtaper.layout.types import Layout
from airtaper.physics.depth import c_inf20_mg_L
from airtaper.physics.pressure import fit_headloss_curve
from airtaper.physics.sote import SoteFitWarning, fit_sote_curve
from airtaper.plant.resolved import AirSide, DiffusedZone, FixedKla, Hydraulics, ResolvedPlant, frozen_array
from airtaper.process.asm1 import at_temperature, parameter_set, with_overrides
from airtaper.process.fractionation import influent_components

#: How many resolved plants are kept (a command works on one layout; tests on a handful).
_CACHE_SIZE = 16
_cache: OrderedDict = OrderedDict()


# --------------------------------------------------------------------------- pieces
def _hydraulics(layout: Layout, problems: list) -> Hydraulics:
    zones = [z.id for z in layout.zones]
    nz = len(zones)
    influent = frozen_array(layout.influent.flow_m3_d)
    n_p = influent.size
    frac = np.zeros(nz)
    for sf in layout.step_feed:
        frac[zones.index(sf.zone)] += sf.fraction
    recycles = tuple((zones.index(r.from_zone), zones.index(r.to_zone), frozen_array(r.flow_m3_d))
                     for r in layout.recycles)
    ras_zone = zones.index(layout.return_sludge.to_zone)
    ras = frozen_array(layout.return_sludge.flow_m3_d)
    # the forward flows have one home, the train graph's water balance (the parser checks them there)
    forward = np.array(forward_flows(zones, layout.step_feed, layout.recycles, layout.return_sludge,
                                     layout.influent.flow_m3_d), dtype=float).reshape(nz, n_p).T
    through = forward.copy()  # a zone's inflow = its outflow = forward flow + recycles drawn from it
    for src, _, q in recycles:
        through[:, src] += q
    for j, zid in enumerate(zones):  # the parser allows 0; a reactor needs flow through it (a millionth of
        bad = np.nonzero(forward[:, j] <= 1e-6 * through[:, j])[0]  # its throughflow is none: round-off)
        if bad.size:
            k = int(bad[0])
            problems.append(Problem(layout.path, f"zones.{zid}",
                                    f"the recycles drawn from this zone exceed the flow through it in period {k + 1}",
                                    got=round(float(forward[k, j]), 3), expected="a positive forward flow"))
    waste = None if layout.wasting.flow_m3_d is None else frozen_array(layout.wasting.flow_m3_d)
    return Hydraulics(influent_m3_d=influent, feed_fraction=frozen_array(frac), recycles=recycles,
                      ras_zone=ras_zone, ras_m3_d=ras, zone_flow_m3_d=frozen_array(through),
                      forward_m3_d=frozen_array(forward), waste_m3_d=waste, srt_d=layout.wasting.srt_d)


def _fits(layout: Layout, problems: list, notes: list) -> tuple[dict, dict]:
    """SOTE and headloss curves of every diffuser type a diffused zone uses."""
    sote, headloss = {}, {}
    for z in layout.zones:
        if not z.has_diffusers or z.grid.type_id in sote:
            continue
        dt = layout.diffuser_type(z.grid.type_id)
        key = f"diffuser_types.{dt.id}"
        sp, hp = dt.sote_points, dt.headloss_points
        with _warnings.catch_warnings(record=True) as caught:
            _warnings.simplefilter("always", SoteFitWarning)
            try:
                sote[dt.id] = fit_sote_curve(
                    [p.airflow_per_diffuser_Sm3_h for p in sp], [p.sote_percent for p in sp],
                    [p.density_percent for p in sp], [p.submergence_m for p in sp],
                    name=dt.id, source_file=layout.path, key=f"{key}.sote_points")
            except InputError as exc:
                problems.extend(exc.problems)
                sote[dt.id] = None
        notes.extend(LayoutWarning(layout.path, f"{key}.sote_points", str(w.message)) for w in caught
                     if issubclass(w.category, SoteFitWarning))
        try:
            headloss[dt.id] = fit_headloss_curve(
                [p.airflow_per_diffuser_Sm3_h for p in hp], [p.headloss_kPa for p in hp], name=dt.id,
                source_file=layout.path, key=f"{key}.headloss_points")
        except InputError as exc:
            problems.extend(exc.problems)
            headloss[dt.id] = None
    return sote, headloss


#: Largest diffuser count a design range may reach (far above any basin's; it only keeps the
#: arithmetic finite for a diffuser of next to no membrane area).
COUNT_CAP = 10**9


def design_count_range(count_step: int, per_diffuser_percent: float, test_densities_percent) -> tuple[int, int]:
    """(lowest, highest) count a design may give a zone: whole ``count_step`` steps within the tested densities.

    The density range is that of the diffuser type's clean-water test points (where the SOTE
    fit interpolates), capped at the practical maximum density ``DENSITY_MAX_PERCENT``; when not
    one whole step fits inside it, the range widens to one step up to the practical maximum.
    ``per_diffuser_percent``: the density of one diffuser (its membrane area over the floor).
    """
    step = int(count_step)
    dens = list(test_densities_percent)
    top = min(max(dens), D.DENSITY_MAX_PERCENT)

    def steps(density_percent: float, up: bool) -> int:
        # whole steps to a density; a diffuser of (next to) no area gives an infinite count: capped, so an
        # implausible membrane area (1e-320 m2, a fuzzed layout) resolves instead of overflowing
        n = density_percent / per_diffuser_percent / step
        n = min(n, COUNT_CAP / step) if math.isfinite(n) else COUNT_CAP / step
        return math.ceil(n - 1e-9) if up else math.floor(n + 1e-9)

    lo = max(step, step * steps(min(dens), True))
    hi = step * steps(top, False)
    if hi < lo:
        lo, hi = step, max(step, step * steps(D.DENSITY_MAX_PERCENT, False))
    return int(lo), int(hi)


def _aeration(layout: Layout, temperature, pressure, sote, headloss):
    out = []
    for i, z in enumerate(layout.zones):
        if z.aerated and z.fixed_kla_per_d is not None:
            out.append(FixedKla(z, i, float(z.fixed_kla_per_d),
                                None if z.fixed_do_sat_mg_L is None else float(z.fixed_do_sat_mg_L)))
        elif z.has_diffusers:
            dt = layout.diffuser_type(z.grid.type_id)
            c20 = float(c_inf20_mg_L(z.grid.submergence_m, dt.effective_depth_fraction))
            lo, hi = z.airflow_range_Sm3_h(dt)
            d = DiffusedZone(
                zone=z, index=i, sote=sote[dt.id], headloss=headloss[dt.id], diffusers=z.grid.count,
                density_percent=z.diffuser_density_percent(dt),
                submergence_m=z.grid.submergence_m, effective_depth_fraction=dt.effective_depth_fraction,
                c_inf20_mg_L=c20, pressure_kPa=pressure, do_sat_mg_L=frozen_array([]), airflow_min_Sm3_h=lo,
                airflow_max_Sm3_h=hi, diffuser_airflow_min_Sm3_h=float(dt.airflow_min_Sm3_h),
                diffuser_airflow_max_Sm3_h=float(dt.airflow_max_Sm3_h), diffuser_type=dt,
                count_range=design_count_range(z.grid.count_step, 100.0 * dt.membrane_area_m2 / z.area_m2,
                                               [p.density_percent for p in dt.sote_points]))
            out.append(replace(d, do_sat_mg_L=frozen_array([float(d.do_sat_at(t)) for t in temperature])))
        else:
            out.append(None)
    return tuple(out)


# --------------------------------------------------------------------------- the step
def _day_problems(layout: Layout, day, base) -> list[Problem]:
    """The resolution problems of one load day's plant, keyed by the day (``load_days.<id>, <key>``).

    A day with its own influent has its fractionation checked (a scaled base profile keeps the
    base's signs: every concentration scales by the same factor); every day its flows.
    """
    day_lay = day_layout(layout, day)
    problems: list[Problem] = []
    if day.influent is not None and base is not None:
        try:
            influent_components(day_lay.influent, base, layout.path)
        except InputError as exc:
            problems.extend(exc.problems)
    _hydraulics(day_lay, problems)
    return [Problem(p.file, f"load_days.{day.id}, {p.key}", p.problem, p.got, p.expected) for p in problems]


def _resolve(layout: Layout) -> tuple[ResolvedPlant, tuple]:
    problems: list[Problem] = []
    notes: list[LayoutWarning] = []
    path = layout.path
    base = params = conc = None
    try:
        base = with_overrides(parameter_set(layout.kinetics.parameter_set, path), layout.kinetics.overrides, path)
    except InputError as exc:
        problems.extend(exc.problems)
    temperature = frozen_array(layout.plant.temperature_C)
    if base is not None:
        params = tuple(at_temperature(base, t) if layout.kinetics.temperature_correction else base
                       for t in temperature)
        try:
            conc = frozen_array(influent_components(layout.influent, base, path))
        except InputError as exc:
            problems.extend(exc.problems)
    hydraulics = _hydraulics(layout, problems)
    sote, headloss = _fits(layout, problems, notes)
    for day in layout.load_days:  # every load day is a plant of its own: its influent and flows are checked too
        problems.extend(_day_problems(layout, day, base))
    if problems:
        raise InputError(problems)
    pressure = layout.plant.site_pressure_kPa
    aeration = _aeration(layout, temperature, pressure, sote, headloss)
    inlet = layout.inlet_air
    air = AirSide(
        site_pressure_kPa=pressure,
        inlet_pressure_kPa=inlet.blower_inlet_pressure_kPa(pressure),
        inlet_temperature_C=frozen_array(inlet.temperature_C),
        zones=tuple(a for a in aeration if isinstance(a, DiffusedZone)),
        header=layout.header, blowers=layout.blowers, tariff=layout.tariff, period_h=float(layout.horizon.period_h))
    plant = ResolvedPlant(
        layout=layout, path=path, name=layout.plant.name, zones=layout.zones,
        volume_m3=frozen_array([z.volume_m3 for z in layout.zones]), horizon=layout.horizon,
        temperature_C=temperature, salinity_g_kg=float(layout.plant.salinity_g_kg), kinetics=layout.kinetics,
        base_params=base, params=params, influent_conc=conc, hydraulics=hydraulics, aeration=aeration, air=air,
        clarifier=layout.clarifier, limits=layout.limits, operation=layout.operation, capital=layout.capital,
        load_days=layout.load_days)
    return plant, tuple(notes)


def resolve_plant(layout: Layout | ResolvedPlant, warnings: list | None = None) -> ResolvedPlant:
    """The resolved plant of a validated layout (a resolved plant is returned as it is).

    Parameters
    ----------
    layout : Layout
    warnings : list, optional
        Receives a :class:`~airtaper.layout.reader.LayoutWarning` per suspicious fit
        (a SOTE curve's fitted exponent held at its bound, for example).

    Raises
    ------
    InputError
        Every problem found, each naming the layout file and key.
    """
    if isinstance(layout, ResolvedPlant):
        return layout
    key = id(layout)
    hit = _cache.get(key)
    if hit is not None and hit[0] is layout:
        _cache.move_to_end(key)
        plant, notes = hit[1], hit[2]
    else:
        plant, notes = _resolve(layout)
        _cache[key] = (layout, plant, notes)  # holds the layout, so its id is not reused while cached
        while len(_cache) > _CACHE_SIZE:
            _cache.popitem(last=False)
    if warnings is not None:
        warnings.extend(notes)
    return plant


def load_plant(path: str | os.PathLike, overrides_path=None, warnings: list | None = None) -> ResolvedPlant:
    """Read a layout file (and an override file, if given), validate it and resolve the plant.

    Raises :class:`~airtaper.errors.InputError` listing every problem, each naming the
    file and key it concerns (problems at overridden keys name the override file).
    """
    layout = load_layout_with_overrides(path, overrides_path, warnings=warnings)
    if overrides_path is None:
        return resolve_plant(layout, warnings)
    try:
        return resolve_plant(layout, warnings)
    except InputError as exc:
        raise InputError(blame_overrides(exc.problems, overrides_path)) from None


def with_diffuser_counts(plant: ResolvedPlant, counts: dict[str, int]) -> ResolvedPlant:
    """The plant with the diffuser counts of the named zones replaced (a candidate grid of a design), resolved.

    The variant is made on the plant's layout and resolved again, so every quantity that
    depends on the counts (SOTE density, airflow ranges, kLa rule) is derived in one place.
    """
    return resolve_plant(with_grid_counts(plant.layout, counts))


__all__ = ["design_count_range", "load_plant", "resolve_plant", "with_diffuser_counts"]
