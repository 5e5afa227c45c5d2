"""The whole job of ``airtaper calibrate``: data checks, the fit, its statistics, the override values.

:func:`run_calibration`:

1. **data checks** (:func:`identifiability_of_data`): a zone whose logged DO sits at
   its field saturation, or at zero, through the whole record cannot identify its
   alpha x F (the DO does not depend on it there); its alpha x F is held at the
   layout's value and a message says why;
2. **build** the cyclic train model on the record's horizon
   (:func:`airtaper.calibrate.horizon.record_layout`) with the logged airflows
   imposed, and the least-squares problem (:mod:`airtaper.calibrate.problem`);
3. **solve** it as one NLP with Ipopt through the bridge (exact derivatives), from the
   mean-load steady state; on failure, again from a start marched through the record
   and solved square at the layout's parameter values;
4. **statistics** (:mod:`airtaper.calibrate.statistics`): standard errors, 95 %
   intervals, correlations, identifiability;
5. the fitted values as **overrides** (key paths into the layout):
   ``zones.<id>.alpha`` = fitted alpha x F / the layout's F (F kept),
   ``kinetics.overrides.mu_A``, ``kinetics.overrides.K_OH``.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from airtaper.calibrate.horizon import record_layout
from airtaper.calibrate.problem import (BOUNDS, Fit, FitSpec, attach_fit, fix_parameters, free_parameters, parameters,
                                        residuals)
from airtaper.calibrate.statistics import FitStatistics, fit_statistics
from airtaper.errors import ModelError
from airtaper.layout.plantdata import PlantRecord, period_inputs
from airtaper.layout.types import Layout
from airtaper.plant import ResolvedPlant, resolve_plant
from airtaper.model.data import GridAeration, train_data
from airtaper.model.initial_point import initialise_cyclic, march_cyclic
from airtaper.model.state_scaling import apply_scaling
from airtaper.model.train import build_train_model
from airtaper.solve import solve_nlp

#: Ipopt options of the fit. ``mumps_pivot_order = 2`` (AMF) as in the optimisation: every
#: time point couples all zones (docs/optimization.md, Performance).
IPOPT_OPTIONS = {"tol": 1e-8, "acceptable_tol": 1e-6, "max_iter": 300, "mu_strategy": "adaptive",
                 "mumps_pivot_order": 2}
#: Longest integration step of the fitted model, h. DO answers an airflow change within minutes: on the
#: six-period demo with noise-free synthetic data the model's DO differed from the simulator's by 0.045-0.059
#: mg/L RMS with 1-h Radau steps and by 0.0004 mg/L with 15-min steps, which moved alpha x F by up to
#: 0.0019 and mu_A by 0.0027 against under 1e-4 (one run, December 2026).
MAX_STEP_h = 0.25
#: A zone's DO "sits at saturation" when this share of its values is above SATURATED_FRACTION x C*.
#: Common practice (no source).
STUCK_SHARE = 0.9
SATURATED_FRACTION = 0.85
#: ... or "at zero" when that share is below this DO, mg/L. Common practice (no source).
ZERO_DO_mg_L = 0.2


@dataclass
class CalibrationOptions:
    mu_A: bool = False
    K_OH: bool = False
    do_sd_mg_L: float = 0.1  # DO probe noise, common practice (no source)
    nh4_sd_mg_L: float = 0.3  # NH4-N analyser noise, common practice (no source)
    warmup_h: float = 6.0
    steps_per_period: int | None = None  # None: steps of at most MAX_STEP_h
    ipopt_options: dict = field(default_factory=dict)


@dataclass
class CalibrationResult:
    status: str  # "fitted" or "failed"
    spec: FitSpec
    statistics: FitStatistics | None
    estimates: pd.DataFrame  # one row per parameter
    observations: pd.DataFrame  # one row per logged value used: time_h, kind, location, measured, fitted, residual
    rms: dict  # "do.<zone>" / "nh4.<where>" -> RMS of (fitted - measured), mg/L
    overrides: dict  # key path -> value
    override_notes: dict  # key path -> comment
    held: dict  # zone -> reason its alpha x F was not fitted
    messages: list[str]
    solver: dict
    summary: dict
    model: object = field(repr=False, default=None)


def model_steps_per_period(plant: ResolvedPlant, options: CalibrationOptions) -> int:
    """Integration steps per period of the fitted model: the option, else steps of at most :data:`MAX_STEP_h`."""
    if options.steps_per_period is not None:
        return int(options.steps_per_period)
    return max(1, math.ceil(plant.period_h / MAX_STEP_h - 1e-9))


def identifiability_of_data(plant: ResolvedPlant, record: PlantRecord, do_sat_by_zone: dict) -> dict:
    """Zone -> message for zones whose logged DO cannot identify alpha x F (see module notes).

    ``do_sat_by_zone``: zone -> field saturation per logged time, mg/L.
    """
    out = {}
    for z, do in record.do_mg_L.items():
        ok = np.isfinite(do)
        if z not in do_sat_by_zone or not ok.any():
            continue
        v, sat = do[ok], np.asarray(do_sat_by_zone[z])[ok]
        if np.mean(v >= SATURATED_FRACTION * sat) >= STUCK_SHARE:
            out[z] = (f"zone {z}: the DO sits at saturation all record long (median {np.median(v):.2f} mg/L "
                      f"against a field saturation of {np.median(sat):.2f} mg/L): the zone gets far more air than it "
                      "uses, so its DO does not depend on alpha x F, which cannot be identified from these data; "
                      "it is held at the layout's value (log a stretch with less air, or check the probe)")
        elif np.mean(v <= ZERO_DO_mg_L) >= STUCK_SHARE:
            out[z] = (f"zone {z}: the DO sits at zero all record long (median {np.median(v):.2f} mg/L): the zone "
                      "uses all the oxygen it gets, so its DO does not depend on alpha x F, which cannot be "
                      "identified from these data; it is held at the layout's value (log a stretch with more air, "
                      "or check the probe)")
    return out


def _do_sat_at_logged_times(data, record: PlantRecord, period_h: float) -> dict:
    k = np.clip(((record.time_h - record.start_h) // period_h).astype(int), 0, data.n_periods - 1)
    return {z: np.asarray(a.do_sat_mg_L)[k] for z, a in zip(data.zones, data.aeration) if isinstance(a, GridAeration)}


def _solve(m, fit: Fit, options: CalibrationOptions, attempts: list):
    opts = dict(IPOPT_OPTIONS)
    opts.update(options.ipopt_options)
    free_parameters(fit)
    r = solve_nlp(m, opts)
    attempts.append({"start": "mean-load steady state", "status": r.status.value, "iterations": r.iterations,
                     "seconds": r.timings.total_s, "message": r.message})
    if r.ok:
        return r
    # second start: the layout's parameters, marched through the record and solved square
    fix_parameters(fit)
    for v, v0 in zip(parameters(fit), fit.start_values):
        v.set_value(v0)
    initialise_cyclic(m)
    march_cyclic(m, days=1)
    fit.block.objective.deactivate()
    r0 = solve_nlp(m, dict(opts, max_iter=200))
    fit.block.objective.activate()
    free_parameters(fit)
    r = solve_nlp(m, opts)
    attempts.append({"start": "marched and square-solved at the layout's values", "status": r.status.value,
                     "iterations": r.iterations + r0.iterations, "seconds": r.timings.total_s + r0.timings.total_s,
                     "message": r.message})
    return r


def run_calibration(plant: ResolvedPlant | Layout, record: PlantRecord, options: CalibrationOptions | None = None,
                    progress=None) -> CalibrationResult:
    """Fit alpha x F per diffused zone (and optionally mu_A, K_OH) to ``record``; see module notes.

    ``plant``: the resolved plant (a validated Layout is resolved first). The record's inputs are
    applied to its layout before resolution (:func:`record_layout`, the plant over the record's
    days); everything after reads resolved plants only.
    """
    plant = resolve_plant(plant)
    opts = options or CalibrationOptions()
    say = progress or (lambda text: None)
    timings = {}
    t0 = time.perf_counter()
    period_h = plant.period_h
    inputs = period_inputs(record, period_h)
    rec_layout = record_layout(plant.layout, inputs, model_steps_per_period(plant, opts))
    data = train_data(rec_layout)
    held = identifiability_of_data(plant, record, _do_sat_at_logged_times(data, record, period_h))
    grid = [z for z, a in zip(data.zones, data.aeration) if isinstance(a, GridAeration)]
    for z in grid:
        if z not in record.do_mg_L:
            held[z] = f"zone {z}: no DO logged, so its alpha x F is not fitted (held at the layout's value)"
    zones = tuple(z for z in grid if z not in held)
    if opts.mu_A and not record.nh4_mg_L:
        raise ModelError("fitting mu_A needs NH4-N data (an nh4_effluent_mg_L or nh4_<zone>_mg_L column)")
    spec = FitSpec(zones=zones, mu_A=opts.mu_A, K_OH=opts.K_OH, do_sd_mg_L=opts.do_sd_mg_L,
                   nh4_sd_mg_L=opts.nh4_sd_mg_L, warmup_h=opts.warmup_h)
    if not spec.names():
        raise ModelError("nothing to fit: " + "; ".join(held.values()))
    say("building the model over the record")
    t = time.perf_counter()
    m = build_train_model(data, steady=False, airflow=inputs.airflow_Sm3_h, scheme="radau2",
                          name="airtaper_calibration")
    fit = attach_fit(m, record, spec)
    for z in zones:  # keep the fitted alpha inside the layout's own range (alpha <= 1.2)
        fit.block.alpha_F[z].setub(min(BOUNDS["alpha_F"][1], 1.2 * plant.zone(z).fouling))
    if not fit.observations:
        raise ModelError("no logged values after the warm-up: shorten warmup_h or give a longer record")
    timings["build_s"] = time.perf_counter() - t
    t = time.perf_counter()
    initialise_cyclic(m)
    apply_scaling(m)
    timings["initialise_s"] = time.perf_counter() - t
    say("fitting (Ipopt, exact derivatives)")
    attempts: list = []
    r = _solve(m, fit, opts, attempts)
    timings["solve_s"] = sum(a["seconds"] for a in attempts)
    messages = list(held.values())
    names = spec.names()
    params = parameters(fit)
    stats_ = None
    status = "fitted" if r.ok else "failed"
    if r.ok:
        say("statistics: reduced Hessian")
        t = time.perf_counter()
        b = fit.block
        stats_ = fit_statistics(m, names, params, [b.residual[i].expr for i in b.OBS], residuals(fit))
        timings["statistics_s"] = time.perf_counter() - t
        messages.extend(stats_.messages)
        for v, name in zip(params, names):
            lo, hi = v.lb, v.ub
            if min(abs(v.value - lo), abs(hi - v.value)) < 1e-6 * max(1.0, abs(v.value)):
                messages.append(f"{name} ended on its bound ({v.value:.4g} in [{lo:g}, {hi:g}]): the data push it "
                                "outside the plausible range; check the data and the layout")
    else:
        messages.append(f"the fit did not converge ({r.message}); no values are reported")
    obs_table = _observation_table(fit)
    rms = _rms(obs_table)
    estimates = _estimates(spec, params, fit.start_values, stats_)
    overrides, notes = _overrides(plant, spec, params, stats_) if r.ok else ({}, {})
    timings["total_s"] = time.perf_counter() - t0
    solver = {"status": r.status.value, "message": r.message, "iterations": int(sum(a["iterations"] for a in attempts)),
              "attempts": attempts, "variables": r.n_variables, "constraints": r.n_constraints,
              "objective": r.objective, "timings": timings}
    result = CalibrationResult(status=status, spec=spec, statistics=stats_, estimates=estimates,
                               observations=obs_table, rms=rms, overrides=overrides, override_notes=notes,
                               held=held, messages=messages, solver=solver, summary={}, model=m)
    result.summary = summary_of(plant, record, result)
    return result


def _observation_table(fit: Fit) -> pd.DataFrame:
    rows = []
    for ob, r in zip(fit.observations, residuals(fit)):
        r = float(r)
        rows.append({"time_h": ob.time_h, "kind": ob.kind, "location": ob.where, "measured": ob.value,
                     "fitted": ob.value + r * ob.sd, "weighted_residual": r})
    return pd.DataFrame(rows)


def _rms(table: pd.DataFrame) -> dict:
    out = {}
    for (kind, where), g in table.groupby(["kind", "location"], sort=False):
        err = g["fitted"].to_numpy() - g["measured"].to_numpy()
        out[f"{kind}.{where}"] = float(np.sqrt(np.mean(err ** 2)))
    return out


def _estimates(spec: FitSpec, params, starts, st: FitStatistics | None) -> pd.DataFrame:
    rows = []
    for k, (name, v, v0) in enumerate(zip(spec.names(), params, starts)):
        row = {"parameter": name, "layout_value": v0, "fitted": float(v.value)}
        if st is not None:
            row.update(standard_error=float(st.standard_error[k]), ci95_low=float(st.ci_low[k]),
                       ci95_high=float(st.ci_high[k]))
        rows.append(row)
    return pd.DataFrame(rows)


def _overrides(plant: ResolvedPlant, spec: FitSpec, params, st: FitStatistics):
    values, notes = {}, {}
    for k, (name, v) in enumerate(zip(spec.names(), params)):
        lo, hi = st.ci_low[k], st.ci_high[k]
        if name.startswith("alpha_F."):
            z = name.split(".", 1)[1]
            f = plant.zone(z).fouling
            key = f"zones.{z}.alpha"
            values[key] = round(float(v.value) / f, 6)
            notes[key] = f"alpha x F = {v.value:.4f} (95 % {lo:.4f} to {hi:.4f}) with the layout's F = {f:g}"
        else:
            key = f"kinetics.overrides.{name}"
            values[key] = round(float(v.value), 6)
            notes[key] = f"{name} = {v.value:.4f} (95 % {lo:.4f} to {hi:.4f})" + (
                " 1/d at the parameter set's reference temperature" if name == "mu_A" else " g O2/m3")
    return values, notes


def summary_of(plant: ResolvedPlant, record: PlantRecord, res: CalibrationResult) -> dict:
    st = res.statistics
    params = []
    for k, row in res.estimates.iterrows():
        item = {key: (None if isinstance(val, float) and not np.isfinite(val) else val) for key, val in row.items()}
        name = row["parameter"]
        if name.startswith("alpha_F."):
            z = name.split(".", 1)[1]
            item["zone"] = z
            item["rms_do_mg_L"] = res.rms.get(f"do.{z}")
        params.append(item)
    corr = None if st is None else {"names": st.names, "matrix": [[float(x) for x in r] for r in st.correlation]}
    base = plant.base_params
    return {
        "status": res.status,
        "plant": plant.name,
        "layout": plant.path,
        "data": record.path,
        "record": {"start_h": record.start_h, "days": record.days, "interval_h": record.interval_h,
                   "rows": int(len(record.time_h)), "warmup_h": res.spec.warmup_h},
        "fitted": res.spec.names(),
        "held": res.held,
        "parameters": params,
        "rms_mg_L": res.rms,
        "observations": {"used": int(len(res.observations)), "do_sd_mg_L": res.spec.do_sd_mg_L,
                         "nh4_sd_mg_L": res.spec.nh4_sd_mg_L},
        "statistics": None if st is None else {
            "residual_variance": st.residual_variance, "t_quantile": st.t_quantile,
            "condition_number": st.condition_number if np.isfinite(st.condition_number) else None,
            "eigenvalues": [float(x) for x in st.eigenvalues], "weak_directions": st.weak_directions,
            "correlation": corr,
            "reduced_hessian": [[float(x) for x in r] for r in st.reduced_hessian],
            "gauss_newton": [[float(x) for x in r] for r in st.gauss_newton]},
        "layout_values": {"mu_A": base.mu_A, "K_OH": base.K_OH},
        "overrides": res.overrides,
        "solver": res.solver,
        "messages": res.messages,
    }


__all__ = ["CalibrationOptions", "CalibrationResult", "IPOPT_OPTIONS", "identifiability_of_data", "run_calibration"]
