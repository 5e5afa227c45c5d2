"""Synthetic plant data from the independent simulator, with stated true values and noise.

For tests, the benchmark and the example file in ``layouts/``: the plant of a layout
with chosen alpha x F per diffused zone (and optionally a chosen mu_A), run by
:func:`airtaper.simulate.periodic` over ``days`` days of its diurnal influent (each
day's flow scaled by its own factor) under an airflow schedule: the airflow uniform
DO control would use, moved by a random factor every hour so that DO moves too. The
logged values are the simulator's states at every ``interval_h``, plus Gaussian noise
of the stated standard deviations (a fixed seed). Everything is invented: no plant's data.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from airtaper.calibrate.horizon import record_layout
from airtaper.layout.plantdata import EFFLUENT, PeriodInputs
from airtaper.layout.types import ASM1_COMPONENTS, Layout
from airtaper.plant import resolve_plant

#: Day-to-day factors on the influent flow (a week: weekdays, then a lighter weekend).
DAY_FACTORS = (1.0, 0.94, 1.07, 1.02, 0.97, 0.85, 0.82)


@dataclass(frozen=True)
class SyntheticTruth:
    alpha_F: dict  # zone -> alpha x F used by the simulator
    mu_A: float | None  # autotrophs' maximum growth rate at the set's reference temperature, 1/d (None: layout's)
    do_sd_mg_L: float
    nh4_sd_mg_L: float
    airflow_sd_fraction: float
    seed: int
    days: int
    interval_h: float


def truth_layout(layout: Layout, alpha_F: dict, mu_A: float | None = None) -> Layout:
    """``layout`` with alpha = alpha_F / F in the named zones and ``mu_A`` in the kinetics overrides."""
    zones = tuple(replace(z, alpha=float(alpha_F[z.id]) / z.fouling) if z.id in alpha_F else z for z in layout.zones)
    kinetics = layout.kinetics
    if mu_A is not None:
        ov = dict(kinetics.overrides)
        ov["mu_A"] = float(mu_A)
        kinetics = replace(kinetics, overrides=tuple(sorted(ov.items())))
    return replace(layout, zones=zones, kinetics=kinetics)


def synthetic_plant_data(layout: Layout, *, days: int, alpha_F: dict, mu_A: float | None = None,
                         interval_h: float = 0.25, do_sd_mg_L: float = 0.1, nh4_sd_mg_L: float = 0.2,
                         airflow_sd_fraction: float = 0.01, excitation: float = 0.12, seed: int = 1,
                         do_setpoint_mg_L: float = 2.0, nh4_zones: tuple = (), saturated_zone: str | None = None,
                         tol: float = 1e-4):
    """(CSV text, :class:`SyntheticTruth`, the simulator's result) of a synthetic record (module notes).

    The true values and the record's inputs are applied to ``layout`` before resolution
    (:func:`truth_layout`, :func:`~airtaper.calibrate.horizon.record_layout`); what is
    computed with them reads the resolved plants.

    ``nh4_zones``: zones whose in-basin NH4-N is logged besides the effluent's;
    ``saturated_zone``: a zone whose logged DO is replaced by its field saturation plus
    noise (a probe in clean water, a zone with no demand): data that cannot identify
    that zone's alpha x F.
    """
    from airtaper.simulate import periodic

    rng = np.random.default_rng(seed)
    true = resolve_plant(truth_layout(layout, alpha_F, mu_A))
    period_h = true.period_h
    spp = int(round(period_h / interval_h))
    if abs(spp * interval_h - period_h) > 1e-9:
        raise ValueError("interval_h must divide the layout's period")
    n_day = true.n_periods
    # airflow of uniform DO control on the layout's own day
    day = periodic(true, do_setpoint_mg_L=do_setpoint_mg_L, tol=1e-4)
    ts = day.timeseries
    grid = list(true.air.zone_ids)
    base = {}
    for z in grid:
        a = ts[ts["zone"] == z]["airflow_Sm3_h"].to_numpy().reshape(n_day, -1).mean(axis=1)
        base[z] = a
    n = days * n_day
    factors = np.repeat(np.array([DAY_FACTORS[d % len(DAY_FACTORS)] for d in range(days)]), n_day)
    flow = np.tile(np.asarray(true.hydraulics.influent_m3_d), days) * factors
    airflow = {}
    for z in grid:
        d = true.air.zone(z)
        lo, hi = d.airflow_min_Sm3_h, d.airflow_max_Sm3_h
        q = np.tile(base[z], days) * factors * (1.0 + excitation * rng.standard_normal(n))
        airflow[z] = np.clip(q, lo, hi)
    inputs = PeriodInputs(0.0, period_h, n, flow, None, None, airflow)
    multi = resolve_plant(record_layout(true.layout, inputs, spp))
    start = None
    if true.clarifier.kind != "layered":  # start where the DO-controlled day starts: fewer cycles to repeat
        first = ts[ts["time_h"] == ts["time_h"].min()]
        start = {"zones": {z: first[first["zone"] == z][list(ASM1_COMPONENTS)].to_numpy()[0]
                           for z in first["zone"]}}
    sim = periodic(multi, schedule=airflow, tol=tol, max_days=60, start_state=start)
    ts = sim.timeseries
    eff = sim.effluent
    t = eff["time_h"].to_numpy()
    cols = {"time_h": t, "flow_m3_d": np.repeat(flow, spp)}
    for z in grid:
        q = np.repeat(airflow[z], spp)
        cols[f"airflow_{z}_Sm3_h"] = q * (1.0 + airflow_sd_fraction * rng.standard_normal(q.size))
    for z in true.zones:
        if not z.aerated or (z.id not in grid):
            continue
        do = ts[ts["zone"] == z.id]["SO"].to_numpy()
        if z.id == saturated_zone:
            sat = multi.aeration[multi.zone_index(z.id)].do_sat_mg_L
            do = np.repeat(sat, spp)
        cols[f"do_{z.id}_mg_L"] = np.maximum(do + do_sd_mg_L * rng.standard_normal(do.size), 0.0)
    for z in nh4_zones:
        v = ts[ts["zone"] == z]["SNH"].to_numpy()
        cols[f"nh4_{z}_mg_L"] = np.maximum(v + nh4_sd_mg_L * rng.standard_normal(v.size), 0.0)
    v = eff["SNH"].to_numpy()
    cols[f"nh4_{EFFLUENT}_mg_L"] = np.maximum(v + nh4_sd_mg_L * rng.standard_normal(v.size), 0.0)
    cols["temperature_C"] = np.repeat(np.asarray(multi.temperature_C), spp)
    truth = SyntheticTruth(dict(alpha_F), mu_A, do_sd_mg_L, nh4_sd_mg_L, airflow_sd_fraction, seed, days, interval_h)
    return _csv(cols, truth, true.name), truth, sim


def _csv(cols: dict, truth: SyntheticTruth, plant_name: str) -> str:
    af = ", ".join(f"{z} {v:g}" for z, v in truth.alpha_F.items())
    head = [
        "# SYNTHETIC plant data: made by the independent simulator, not measured at any plant.",
        f"# Plant: {plant_name} (invented). {truth.days} day(s), one row every {truth.interval_h * 60:g} min.",
        f"# True alpha x F: {af}" + (f"; true mu_A {truth.mu_A:g} 1/d at the set's reference temperature"
                                      if truth.mu_A is not None else "; mu_A as in the layout") + ".",
        f"# Noise (Gaussian, seed {truth.seed}): DO sd {truth.do_sd_mg_L:g} mg/L, NH4-N sd {truth.nh4_sd_mg_L:g} "
        f"mg/L, airflow sd {100 * truth.airflow_sd_fraction:g} % of the value; flows and temperature exact.",
        "# time_h: hours from midnight of day 1. Planning estimates only.",
    ]
    names = list(cols)
    arr = np.column_stack([np.asarray(cols[c], dtype=float) for c in names])
    lines = head + [",".join(names)]
    for row in arr:
        lines.append(",".join(_num(c, v) for c, v in zip(names, row)))
    return "\n".join(lines) + "\n"


def _num(col: str, v: float) -> str:
    if col == "time_h":
        return f"{v:.4f}".rstrip("0").rstrip(".") if v else "0"
    if col.startswith("airflow_") or col == "flow_m3_d":
        return f"{v:.1f}"
    return f"{v:.3f}"


__all__ = ["DAY_FACTORS", "SyntheticTruth", "synthetic_plant_data", "truth_layout"]
