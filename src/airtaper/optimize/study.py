"""The diurnal aeration study: baseline, optimisation, verification, marginal costs, tables.

:func:`run_optimization` is the whole job of ``airtaper optimize``:

1. **baseline** - uniform DO-setpoint control simulated by the independent simulator
   (:mod:`airtaper.optimize.baseline`);
2. **build** - the cyclic model (:func:`airtaper.model.train.build_cyclic_model`),
   started from the baseline (:mod:`airtaper.optimize.initialise`), with the
   decisions, limits and objective attached (:mod:`airtaper.optimize.problem`) and
   scaled (:mod:`airtaper.optimize.scaling`);
3. **solve** - Ipopt through the bridge, down the retry ladder on failure; when every
   rung fails, the elastic solve (:mod:`airtaper.optimize.elastic`) says which limit
   cannot be met (exit code 3);
4. **verify** - the schedule re-simulated (:mod:`airtaper.optimize.verify`; exit
   code 4 when it breaks a limit beyond the tolerances);
5. **marginal costs** from the duals (:mod:`airtaper.optimize.marginal`);
6. the tables and the summary for :func:`airtaper.report.study.write_study_outputs`.

:class:`DiurnalOptimisation` keeps the built model so that limits can be moved and
the problem re-solved warm (tests, sensitivity studies).
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import pyomo.environ as pyo

from airtaper.errors import EXIT_FAILURE, EXIT_INFEASIBLE, EXIT_OK, EXIT_UNVERIFIED, ModelError
from airtaper.layout.types import ASM1_COMPONENTS, Layout
from airtaper.model.train import build_cyclic_model
from airtaper.optimize import elastic as _elastic
from airtaper.optimize.baseline import Baseline, run_baseline
from airtaper.optimize.figures import day_figures
from airtaper.optimize.initialise import BASE_OPTIONS, LADDER, Rung, point_hours, start_airflow, start_from_day
from airtaper.optimize.marginal import marginal_costs
from airtaper.optimize.problem import attach_problem, fix_slacks, max_power_line_kW, point_weights, settings_for
from airtaper.optimize.progress import Progress, Silent
from airtaper.optimize.scaling import apply_scaling
from airtaper.optimize.staging import (day_dispatch, dispatch_summary, dispatch_table, feasibility_check,
                                       final_dispatch, run_staging)
from airtaper.optimize.verify import verify_schedule
from airtaper.solve import solve_nlp

#: Rungs ending in "locally infeasible" after which the ladder stops and the elastic
#: solve takes over. One: Ipopt's infeasibility verdict is usually right, and when it is
#: not the elastic solve finds every slack at zero and its schedule is the answer.
INFEASIBLE_STOP = 1


@dataclass
class StudyOptions:
    """Choices of ``airtaper optimize`` (None: the layout's value)."""

    objective: str | None = None  # "energy" or "cost"
    smoothing_weight: float | None = None
    mixing_airflow_min_Sm3_h_m2: float | None = None
    baseline_do_setpoint_mg_L: float | None = None
    scheme: str | None = None  # time scheme of the cyclic model (None: the model's default)
    steps_per_period: int | None = None  # None: see model_steps_per_period
    verify: bool = True
    marginal: bool = True
    staging: bool = True  # False: blowers as one machine, swing zones relaxed (the comparison in benchmarks/)
    ipopt_options: dict = field(default_factory=dict)
    ladder: tuple[Rung, ...] = LADDER


@dataclass
class StudyResult:
    schedule: pd.DataFrame
    header: pd.DataFrame
    timeseries: pd.DataFrame
    summary: dict
    exit_code: int
    study: "DiurnalOptimisation" = field(repr=False, default=None)
    blowers: pd.DataFrame | None = None  # blowers.csv: one row per period and blower (staged layouts)


def model_steps_per_period(layout: Layout, options: StudyOptions) -> int:
    """Integration steps per period of the optimisation model.

    The layout's ``steps_per_period`` counts time points per period (backward Euler:
    one point per step). The model's default 2-point Radau IIA scheme (order 3) puts
    two points in each step, so the optimiser takes half as many steps, keeping the
    number of points (and the problem size) while raising the order from 1 to 3; the
    verification against the independent simulator checks the accuracy.
    """
    if options.steps_per_period is not None:
        return int(options.steps_per_period)
    spp = layout.horizon.steps_per_period
    scheme = options.scheme or "radau2"
    points = int(scheme[-1]) if scheme.startswith("radau") else 1
    return max(1, spp // points)


class DiurnalOptimisation:
    """A built optimisation of one layout; see the module notes."""

    def __init__(self, layout: Layout, options: StudyOptions | None = None, progress: Progress | None = None,
                 baseline: Baseline | None = None):
        self.layout = layout
        self.options = options or StudyOptions()
        self.progress = progress or Silent()
        self.timings: dict[str, float] = {}
        self.attempts: list[dict] = []
        self.result = None
        self.baseline = baseline
        self.m = None

    # --- setup ---------------------------------------------------------------------------
    def run_baseline(self) -> Baseline:
        if self.baseline is None:
            self.progress.phase("baseline: uniform DO control, independent simulator")
            t = time.perf_counter()
            self.baseline = run_baseline(self.layout, self.options.baseline_do_setpoint_mg_L)
            self.timings["baseline_s"] = time.perf_counter() - t
        return self.baseline

    def reference(self) -> float:
        base = self.run_baseline()
        objective = self.options.objective or self.layout.operation.objective
        value = base.cost_per_day if objective == "cost" else base.energy_kWh_per_day
        return float(value) if value and value > 0 else 1.0

    def build(self) -> None:
        """Build the model, start it from the baseline, attach the problem and scale it."""
        base = self.run_baseline()
        self.progress.phase("building the cyclic model")
        t = time.perf_counter()
        kwargs = {"steps_per_period": model_steps_per_period(self.layout, self.options)}
        if self.options.scheme is not None:
            kwargs["scheme"] = self.options.scheme
        m = build_cyclic_model(self.layout, **kwargs)
        self.timings["build_s"] = time.perf_counter() - t
        t = time.perf_counter()
        start_from_day(m, base.day, start_airflow(m, base.day))
        settings = settings_for(self.layout, self.reference(), objective=self.options.objective,
                                smoothing_weight=self.options.smoothing_weight,
                                mixing_airflow_min_Sm3_h_m2=self.options.mixing_airflow_min_Sm3_h_m2,
                                staging=self.options.staging)
        attach_problem(m, self.layout, settings)
        self.timings["initialise_s"] = time.perf_counter() - t
        self.progress.phase("converting the model and building derivatives")
        t = time.perf_counter()
        self.scaling = apply_scaling(m)
        self.timings["conversion_derivatives_s"] = time.perf_counter() - t
        self.m = m

    # --- starts --------------------------------------------------------------------------
    def _restart(self, rung: Rung) -> None:
        m = self.m
        day = self.run_baseline().day
        start_from_day(m, day, start_airflow(m, day, rung.airflow_factor))
        if rung.square_solve:
            self._square_solve()
        self._free_decisions()

    def _square_solve(self) -> None:
        m, b = self.m, self.m.opt
        b.deactivate()  # the model's equations only, airflows fixed at the start
        try:
            r = solve_nlp(m, dict(BASE_OPTIONS, max_iter=300))
            self.attempts.append({"rung": "square solve at the start airflows", "status": r.status.value,
                                  "iterations": r.iterations, "seconds": r.timings.total_s})
        finally:
            b.activate()

    def _free_decisions(self) -> None:
        m, b = self.m, self.m.opt
        for z in b.ZONES:
            for p in m.PERIODS:
                m.airflow_Sm3_h[z, p].unfix()
        for z, on in (b.swing_states or {}).items():  # a swing zone switched off gets no air
            for p in m.PERIODS:
                if not on[p - 1]:
                    m.airflow_Sm3_h[z, p].fix(0.0)
        for p in m.PERIODS:
            b.header_kPa[p].set_value(max(pyo.value(b.zone_pressure_kPa[z, p]) for z in b.ZONES)
                                      + self.layout.header.min_valve_loss_kPa)
            if b.staged:
                b.power_kW[p].set_value(max_power_line_kW(b, p))
        if b.component("peak_kW") is not None and not b.peak_kW.fixed:
            b.peak_kW.set_value(max(pyo.value(b.power_kW[p]) for p in m.PERIODS))

    # --- solving ------------------------------------------------------------------------
    def _ipopt(self, rung: Rung, warm_start=False):
        opts = dict(BASE_OPTIONS)
        opts.update(rung.options)
        opts.update(self.options.ipopt_options)
        if not rung.user_scaling:
            opts["nlp_scaling_method"] = "gradient-based"
        self.progress.label = f"{rung.name}: "
        r = solve_nlp(self.m, opts, callback=self.progress.iteration, warm_start=warm_start)
        self.progress.done()
        self._add_timings(r)
        self.attempts.append({"rung": rung.name, "status": r.status.value, "iterations": r.iterations,
                              "seconds": r.timings.total_s, "message": r.message})
        return r

    def _add_timings(self, r) -> None:
        t = self.timings
        t["conversion_s"] = t.get("conversion_s", 0.0) + r.timings.conversion_s
        t["derivatives_s"] = t.get("derivatives_s", 0.0) + r.timings.derivatives_s
        t["ipopt_s"] = t.get("ipopt_s", 0.0) + r.timings.ipopt_s
        t["iterations"] = t.get("iterations", 0) + r.iterations

    def solve(self):
        """Solve down the retry ladder; returns the first successful result or None."""
        if self.m is None:
            self.build()
        self.progress.phase("optimising")
        infeasible = 0
        for i, rung in enumerate(self.options.ladder):
            if i > 0:
                self.progress.phase(f"retrying: {rung.name}")
                self._restart(rung)
            else:
                self._free_decisions()
            r = self._ipopt(rung)
            if r.ok:
                self.result = r
                return r
            # Ipopt converged to a point of local infeasibility: the limits most likely
            # conflict, and the elastic solve will say which (no more rungs).
            infeasible += r.status.value == "infeasible"
            if infeasible >= INFEASIBLE_STOP:
                break
        self.result = None
        return None

    def resolve(self, warm: bool = True):
        """Solve again from the current point (after moving a limit); ladder on failure."""
        r = self._ipopt(self.options.ladder[0], warm_start=warm)
        if not r.ok:
            return self.solve()
        self.result = r
        return r

    def elastic(self):
        """Elastic solve from the baseline start; returns (result, findings)."""
        self.progress.phase("the limits cannot all be met: elastic solve")
        rung = self.options.ladder[0]
        self._restart(rung)
        _elastic.enter_elastic(self.m)
        r = self._ipopt(Rung("elastic", {"mu_strategy": "adaptive", "max_iter": 3000}))
        found = _elastic.findings(self.m) if r.ok else []
        return r, found

    # --- limits ---------------------------------------------------------------------------
    def set_limit(self, name: str, value: float, zone: str | None = None) -> None:
        """Move a limit: ``nh4_mean``, ``nh4_max``, ``tn_mean`` (mg/L), ``do_min`` (zone, mg/L),
        ``diffusers`` (zone, count)."""
        b = self.m.opt
        if name == "do_min":
            b.do_min_mg_L[zone] = float(value)
        elif name == "diffusers":
            b.diffuser_count[zone] = float(value)
        elif name in ("nh4_mean", "nh4_max", "tn_mean"):
            if not b.component(name).active:
                raise ModelError(f"the layout sets no {name} limit")
            b.component(f"{name}_limit").set_value(float(value))
        else:
            raise ModelError(f"unknown limit {name!r}")

    # --- results ----------------------------------------------------------------------------
    def goal(self) -> float:
        return float(pyo.value(self.m.opt.goal))

    def energy_kWh_per_day(self) -> float:
        return float(pyo.value(self.m.opt.energy_kWh_per_day))

    def schedule_by_zone(self) -> dict:
        m = self.m
        return {z: np.array([float(m.airflow_Sm3_h[z, p].value) for p in m.PERIODS]) for z in m.opt.ZONES}

    def power_by_period(self) -> np.ndarray:
        b = self.m.opt
        return np.array([float(pyo.value(b.power_kW[p])) for p in self.m.PERIODS])

    def figures(self) -> dict:
        """Compliance figures of the optimiser's own day (model values)."""
        m, b = self.m, self.m.opt
        steps = list(m.STEPS)
        nh4 = [pyo.value(m.effluent_nh4_mg_L[t]) for t in steps]
        tn = [pyo.value(m.effluent_tn_mg_L[t]) for t in steps]
        q = [b.effluent_weights[m.period_of_step[t]] for t in steps]
        per = [m.period_of_step[t] - 1 for t in steps]
        do = {z: [pyo.value(m.conc[t, z, "SO"]) for t in steps] for z in m.ZONES}
        w = point_weights(m)
        return day_figures(self.layout, nh4, tn, q, per, do, weights=[w[t] for t in steps])

    def tables(self) -> tuple[pd.DataFrame, pd.DataFrame, pd.DataFrame]:
        m, b = self.m, self.m.opt
        layout = self.layout
        period_h = layout.horizon.period_h
        sched = []
        w = point_weights(m)
        hours = point_hours(m)
        states = b.swing_states or {}
        for p in m.PERIODS:
            steps = [t for t in m.STEPS if m.period_of_step[t] == p]
            wp = np.array([w[t] for t in steps])
            wp = wp / wp.sum()
            for z in b.ZONES:
                q = float(m.airflow_Sm3_h[z, p].value)
                do = np.array([pyo.value(m.conc[t, z, "SO"]) for t in steps])
                sched.append({
                    "period_start_h": (p - 1) * period_h, "period_end_h": p * period_h, "zone": z,
                    "aerated": bool(states[z][p - 1]) if z in states else q > 0.0,
                    "airflow_Sm3_h": q, "airflow_per_diffuser_Sm3_h": q / pyo.value(b.diffuser_count[z]),
                    "do_min_mg_L": float(do.min()), "do_mean_mg_L": float(wp @ do),
                    "nh4_mean_mg_L": float(wp @ np.array([pyo.value(m.conc[t, z, "SNH"]) for t in steps])),
                    "otr_kg_h": float(wp @ np.array([pyo.value(m.otr_kg_h[t, z]) for t in steps])),
                })
        header = pd.DataFrame([{
            "period": p, "pressure_kPa": float(b.header_kPa[p].value),
            "airflow_Sm3_h": float(pyo.value(b.total_airflow_Sm3_h[p])), "power_kW": float(pyo.value(b.power_kW[p])),
        } for p in m.PERIODS])
        rows = []
        for t in m.STEPS:
            p = m.period_of_step[t]
            for z in m.ZONES:
                row = {"time_h": hours[t], "zone": z}
                row.update({c: float(m.conc[t, z, c].value) for c in ASM1_COMPONENTS})
                row["airflow_Sm3_h"] = float(m.airflow_Sm3_h[z, p].value) if z in b.ZONES else 0.0
                row["otr_kg_h"] = float(pyo.value(m.otr_kg_h[t, z])) if z in m.AERATED_ZONES else 0.0
                rows.append(row)
            row = {"time_h": hours[t], "zone": "effluent"}
            row.update({c: float(pyo.value(m.effluent_conc[t, c])) for c in ASM1_COMPONENTS})
            row["tn_mg_L"] = float(pyo.value(m.effluent_tn_mg_L[t]))
            rows.append(row)
        return pd.DataFrame(sched), header, pd.DataFrame(rows)


def _saving(base, value):
    if base is None or value is None or base <= 0:
        return None
    return 100.0 * (base - value) / base


def run_optimization(layout: Layout, options: StudyOptions | None = None, progress: Progress | None = None
                     ) -> StudyResult:
    """The whole study (module notes); never raises for an infeasible or failed solve."""
    t0 = time.perf_counter()
    opts = options or StudyOptions()
    prog = progress or Silent()
    study = DiurnalOptimisation(layout, opts, prog)
    base = study.run_baseline()
    study.build()
    result = study.solve()
    messages = []
    infeasibility = []
    status = "optimal"
    staging = None
    objective = study.m.opt.settings.objective
    if result is not None and study.m.opt.staged:
        staging = run_staging(study, result)
        result = staging.result
        if staging.findings:
            status = "infeasible"
            infeasibility = staging.findings
            messages.extend(f["message"] for f in staging.findings)
    if result is None:
        r, infeasibility = study.elastic()
        if not r.ok:
            status = "failed"
            messages.append(f"the solver failed on every attempt ({r.message})")
        elif infeasibility:
            status = "infeasible"
            messages.extend(f["message"] for f in infeasibility)
        else:
            messages.append("solved through the elastic problem (no limit needed relaxing)")
        study.result = r
        result = r
        _elastic.leave_elastic(study.m)
    elif result.status.value == "acceptable":
        messages.append("Ipopt stopped at its 'acceptable' tolerances")
    fix_slacks(study.m.opt)

    schedule, header, timeseries = study.tables()
    schedule, header = base.add_columns(schedule, header)
    figs = study.figures()
    energy = study.energy_kWh_per_day()
    power = study.power_by_period()
    cost = study.m.opt.air.cost(power)
    blowers_table, dispatch, base_dispatch = None, None, None
    if staging is not None and staging.dispatch is not None:
        dp = staging.dispatch if staging.findings else final_dispatch(study.m, staging.dispatch)
        blowers_table = dispatch_table(layout, dp)
        dispatch = dispatch_summary(layout, dp)
        energy = dispatch["energy_kWh_per_day"]
        cost = dispatch["cost_per_day"]
        dispatch["rounds"] = staging.rounds
        dispatch["converged"] = staging.converged
        dispatch["stopped"] = staging.reason
        dispatch["swing_zones"] = {z: {"aerated_periods": [int(i) + 1 for i in np.flatnonzero(on)],
                                       "switches": int(np.sum(on != np.roll(on, 1)))}
                                   for z, on in (staging.swing_states or {}).items()}
        if status == "optimal" and result is not None:
            breaches = feasibility_check(study.m, dp)
            dispatch["feasibility_breaches"] = breaches
            if breaches:
                status = "unverified"
                messages.append("WARNING: the schedule breaks a machine or grid range: " + "; ".join(breaches))
        bd = day_dispatch(layout, base.day, objective)
        if bd is not None:
            header["baseline_power_kW"] = bd.total_power_kW  # the baseline billed by the same dispatch
            base_dispatch = dispatch_summary(layout, bd)
            base_dispatch["shortfall"] = [f["message"] for f in bd.findings]
            messages.extend(f"baseline: {f['message']}" for f in bd.findings)
    verification = None
    if opts.verify and status != "failed":
        prog.phase("verifying: the schedule re-simulated by the independent simulator")
        t = time.perf_counter()
        verification = verify_schedule(layout, study.schedule_by_zone(), figs, study.m)
        study.timings["verification_s"] = time.perf_counter() - t
        if not verification["verified"]:
            messages.append("WARNING: the re-simulated schedule breaks a limit: " + "; ".join(verification["violations"]))
    marginal = []
    if opts.marginal and status == "optimal" and result is not None and result.ok:
        marginal = marginal_costs(study.m, result, energy_kWh_per_day=energy, cost_per_day=cost)
    for w in base.violations:
        messages.append(f"baseline: {w}")
    if status == "optimal" and verification is not None and not verification["verified"]:
        status = "unverified"
    exit_code = {"optimal": EXIT_OK, "infeasible": EXIT_INFEASIBLE, "unverified": EXIT_UNVERIFIED,
                 "failed": EXIT_FAILURE}[status]
    study.timings["total_s"] = time.perf_counter() - t0
    lim = layout.limits
    base_summary = base.summary()
    if base_dispatch is not None:  # the same dispatch rule bills the baseline
        base_summary["dispatch"] = base_dispatch
        base_summary["energy_kWh_per_day"] = base_dispatch["energy_kWh_per_day"]
        base_summary["cost_per_day"] = base_dispatch["cost_per_day"]
    summary = {
        "status": status,
        "plant": layout.plant.name,
        "layout": layout.path,
        "objective": study.m.opt.settings.objective,
        "currency": layout.tariff.currency if layout.tariff else "",
        "energy_kWh_per_day": energy,
        "cost_per_day": cost,
        "baseline": base_summary,
        "saving_percent": _saving(base_summary["energy_kWh_per_day"], energy),
        "cost_saving_percent": _saving(base_summary["cost_per_day"], cost),
        "dispatch": dispatch,
        "effluent": {k: figs[k] for k in ("nh4_mean_mg_L", "nh4_max_mg_L", "tn_mean_mg_L")},
        "min_do_margin_mg_L": figs["min_do_margin_mg_L"],
        "do_margin_mg_L": figs["do_margin_mg_L"],
        "limits": {"nh4_mean_mg_L": lim.nh4_mean_mg_L, "nh4_max_mg_L": lim.nh4_max_mg_L,
                   "tn_mean_mg_L": lim.tn_mean_mg_L,
                   "do_min_mg_L": {z.id: z.do_min_mg_L for z in layout.zones if z.do_min_mg_L is not None},
                   "do_max_mg_L": {z.id: z.do_max_mg_L for z in layout.zones if z.do_max_mg_L is not None}},
        "verification": verification if verification is not None else {"verified": None, "skipped": True},
        "verified": None if verification is None else verification["verified"],
        "marginal_costs": marginal,
        "infeasibility": infeasibility,
        "smoothing": {"weight": study.m.opt.settings.smoothing_weight,
                      "penalty": float(pyo.value(study.m.opt.smoothing))},
        "solver": {
            "status": None if result is None else result.status.value,
            "message": None if result is None else result.message,
            "iterations": int(study.timings.get("iterations", 0)),
            "attempts": study.attempts,
            "variables": None if result is None else result.n_variables,
            "constraints": None if result is None else result.n_constraints,
            "scaling": study.scaling,
            "timings": {k: v for k, v in study.timings.items() if k != "iterations"},
        },
        "messages": messages,
    }
    return StudyResult(schedule=schedule, header=header, timeseries=timeseries, summary=_jsonable(summary),
                       exit_code=exit_code, study=study, blowers=blowers_table)


def _jsonable(obj):
    """Plain JSON types (numpy scalars to Python, non-finite floats to None)."""
    if isinstance(obj, dict):
        return {str(k): _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_jsonable(v) for v in obj]
    if isinstance(obj, (np.floating, float)):
        v = float(obj)
        return v if np.isfinite(v) else None
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    return obj


__all__ = ["DiurnalOptimisation", "StudyOptions", "StudyResult", "run_optimization"]
