"""The diurnal aeration study: baseline, optimisation, verification, marginal costs, tables.

:func:`run_optimization` is the whole job of ``airtaper optimize``:

1. **baseline** - uniform DO-setpoint control simulated by the independent simulator
   (:mod:`airtaper.optimize.baseline`);
2. **build** - the cyclic model (:func:`airtaper.model.train.build_cyclic_model`),
   started from the baseline (:mod:`airtaper.optimize.attempts`), with the
   decisions, limits and objective attached (:mod:`airtaper.optimize.problem`) and
   scaled (:mod:`airtaper.optimize.gradient_scaling`);
3. **solve** - Ipopt through the bridge, down the retry ladder on failure; when every
   rung fails, the elastic solve (:mod:`airtaper.optimize.elastic`) says which limit
   cannot be met (exit code 3);
4. **verify** - the schedule re-simulated (:mod:`airtaper.optimize.verify`; exit
   code 4 when it breaks a limit beyond the tolerances);
5. **marginal costs** from the duals (:mod:`airtaper.optimize.marginal`);
6. the tables and the summary (:mod:`airtaper.optimize.results`) for
   :func:`airtaper.report.study_files.write_study_outputs`.

:class:`DiurnalOptimisation` keeps the built model and its
:class:`~airtaper.optimize.problem.Problem` (what the optimiser keeps beside the Pyomo
block: settings, blowers, swing states) so that limits can be moved and the problem
re-solved warm (tests, sensitivity studies).
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd
import pyomo.environ as pyo

from airtaper.errors import EXIT_FAILURE, EXIT_INFEASIBLE, EXIT_OK, EXIT_UNVERIFIED, ModelError
from airtaper.layout.types import Layout
from airtaper.model.train import build_cyclic_model
from airtaper.plant import ResolvedPlant, resolve_plant
from airtaper.optimize import elastic as _elastic
from airtaper.optimize.backoff import (hold_do, refined_first_rung, refined_options, refined_steps_per_period,
                                      still_converging)
from airtaper.optimize.baseline import Baseline, complying_baseline, run_baseline
from airtaper.optimize.compliance import day_figures
from airtaper.optimize.attempts import (BASE_OPTIONS, ELASTIC_RESERVE_FRACTION, LADDER, SOLVE_BUDGET_S, Rung,
                                       SolveBudget, StallWatch, start_airflow, start_from_day)
from airtaper.optimize.marginal import marginal_costs
from airtaper.optimize.problem import (Problem, attach_problem, fix_slacks, max_power_line_kW, point_weights,
                                      relax_staging, settings_for)
from airtaper.optimize.prescreen import outside_tested_range, prescreen
from airtaper.optimize.progress import Progress, Silent
from airtaper.optimize.results import (BaselineSummary, DispatchSummary, EffluentFigures, Limits, Smoothing,
                                      SolverSummary, StudySummary, VerificationSummary, empty_tables, study_tables)
from airtaper.optimize.gradient_scaling import apply_scaling
from airtaper.optimize.staging import (bill_day_by_dispatch, dispatch_summary, dispatch_table, feasibility_check,
                                       final_dispatch, redispatch, run_staging)
from airtaper.optimize.simday import SimDay
from airtaper.optimize.verify import verify_day
from airtaper.solve import solve_nlp

#: Rungs ending in "locally infeasible" after which the ladder stops and the elastic
#: solve takes over. One: Ipopt's infeasibility verdict is usually right, and when it is
#: not the elastic solve finds every slack at zero and its schedule is the answer.
INFEASIBLE_STOP = 1


@dataclass
class StudyOptions:
    """Choices of ``airtaper optimize`` (None: the plant's value)."""

    objective: str | None = None  # "energy" or "cost"
    smoothing_weight: float | None = None
    mixing_airflow_min_Sm3_h_m2: float | None = None
    baseline_do_setpoint_mg_L: float | None = None
    scheme: str | None = None  # time scheme of the cyclic model (None: the model's default)
    steps_per_period: int | None = None  # None: see model_steps_per_period
    verify: bool = True
    hold_do: bool = True  # back-off rounds so the DO minimum holds in continuous time (optimize/backoff.py)
    complying_baseline: bool = True  # when the baseline breaks a limit, search the lowest complying setpoint
    marginal: bool = True
    prescreen: bool = True  # equipment bounds and a full-air day before anything else (optimize/prescreen.py)
    staging: bool = True  # False: blowers as one machine, swing zones relaxed (the comparison in benchmarks/)
    ipopt_options: dict = field(default_factory=dict)
    ladder: tuple[Rung, ...] = LADDER
    solve_budget_s: float = SOLVE_BUDGET_S  # CPU seconds of all Ipopt solves (optimize/attempts.py)
    # the study solved again on finer steps (optimize/backoff.py): a capped first solve, then the elastic solve
    refined: bool = False


@dataclass
class StudyResult:
    schedule: pd.DataFrame
    header: pd.DataFrame
    timeseries: pd.DataFrame
    summary: dict
    exit_code: int
    study: "DiurnalOptimisation" = field(repr=False, default=None)
    blowers: pd.DataFrame | None = None  # blowers.csv: one row per period and blower (staged layouts)


def model_steps_per_period(plant: ResolvedPlant | Layout, options: StudyOptions) -> int:
    """Integration steps per period of the optimisation model.

    The layout's ``steps_per_period`` counts time points per period (backward Euler:
    one point per step). The model's default 2-point Radau IIA scheme (order 3) puts
    two points in each step, so the optimiser takes half as many steps, keeping the
    number of points (and the problem size) while raising the order from 1 to 3; the
    verification against the independent simulator checks the accuracy. Reads ``plant.horizon`` only
    (a layout's is the same).
    """
    if options.steps_per_period is not None:
        return int(options.steps_per_period)
    spp = plant.horizon.steps_per_period
    scheme = options.scheme or "radau2"
    points = int(scheme[-1]) if scheme.startswith("radau") else 1
    return max(1, spp // points)


class DiurnalOptimisation:
    """A built optimisation of one plant (a layout is resolved first); see the module notes."""

    def __init__(self, plant: ResolvedPlant | Layout, options: StudyOptions | None = None,
                 progress: Progress | None = None, baseline: Baseline | None = None, start: SimDay | None = None,
                 elastic_reserve: float = 0.0):
        """``elastic_reserve``: share of the solve budget kept for :meth:`elastic` until
        ``self.budget.release()`` (:func:`run_optimization` keeps
        :data:`~airtaper.optimize.attempts.ELASTIC_RESERVE_FRACTION`; other users, none)."""
        self.plant = resolve_plant(plant)
        self.start = start  # a simulated day to start the first solve from (None: the baseline's)
        self.options = options or StudyOptions()
        self.progress = progress or Silent()
        self.timings: dict[str, float] = {}
        self.attempts: list[dict] = []
        self.result = None
        self.baseline = baseline
        self.m = None
        self.problem: Problem | None = None  # set by build()
        self.budget = SolveBudget(self.options.solve_budget_s, reserve_fraction=elastic_reserve)
        self.stalled: dict | None = None  # the attempt the stall rule stopped (optimize/attempts.py), if any

    # --- setup ---------------------------------------------------------------------------
    def run_baseline(self) -> Baseline:
        if self.baseline is None:
            self.progress.phase("baseline: uniform DO control, independent simulator")
            t = time.perf_counter()
            self.baseline = run_baseline(self.plant, self.options.baseline_do_setpoint_mg_L)
            self.timings["baseline_s"] = time.perf_counter() - t
        return self.baseline

    def reference(self) -> float:
        base = self.run_baseline()
        objective = self.options.objective or self.plant.operation.objective
        value = base.cost_per_day if objective == "cost" else base.energy_kWh_per_day
        return float(value) if value and value > 0 else 1.0

    def build(self, diffuser_count=None) -> None:
        """Build the model, start it from the baseline, attach the problem and scale it.

        ``diffuser_count``: a count Var shared with other models (see
        :func:`airtaper.model.train.attach_aeration`).
        """
        base = self.run_baseline()
        self.progress.phase("building the cyclic model")
        t = time.perf_counter()
        kwargs = {"steps_per_period": model_steps_per_period(self.plant, self.options)}
        if self.options.scheme is not None:
            kwargs["scheme"] = self.options.scheme
        m = build_cyclic_model(self.plant, diffuser_count=diffuser_count, **kwargs)
        self.timings["build_s"] = time.perf_counter() - t
        t = time.perf_counter()
        day = base.day if self.start is None else self.start
        start_from_day(m, day, start_airflow(m, day))
        settings = settings_for(self.plant, self.reference(), objective=self.options.objective,
                                smoothing_weight=self.options.smoothing_weight,
                                mixing_airflow_min_Sm3_h_m2=self.options.mixing_airflow_min_Sm3_h_m2,
                                staging=self.options.staging)
        problem = attach_problem(m, settings)
        self.timings["initialise_s"] = time.perf_counter() - t
        self.progress.phase("converting the model and building derivatives")
        t = time.perf_counter()
        self.scaling = apply_scaling(m)
        self.timings["conversion_derivatives_s"] = time.perf_counter() - t
        self.m = m
        self.problem = problem

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
        for z, on in (self.problem.swing_states or {}).items():  # a swing zone switched off gets no air
            for p in m.PERIODS:
                if not on[p - 1]:
                    m.airflow_Sm3_h[z, p].fix(0.0)
        for p in m.PERIODS:
            b.header_gauge_kPa[p].set_value(max(pyo.value(b.zone_pressure_gauge_kPa[z, p]) for z in b.ZONES)
                                      + self.plant.air.header.min_valve_loss_kPa)
            if self.problem.staged:
                b.power_kW[p].set_value(max_power_line_kW(b, p))
        if b.component("peak_kW") is not None and not b.peak_kW.fixed:
            b.peak_kW.set_value(max(pyo.value(b.power_kW[p]) for p in m.PERIODS))

    # --- solving ------------------------------------------------------------------------
    def _ipopt(self, rung: Rung, warm_start=False, elastic: bool = False):
        """One Ipopt solve with ``rung``'s options, charged to the budget; every solve but the elastic one
        (``elastic``: it may spend the budget's reserve) is watched by the stall rule (optimize/attempts.py)."""
        opts = dict(BASE_OPTIONS)
        opts.update(rung.options)
        opts.update(self.budget.options(elastic=elastic))
        opts.update(self.options.ipopt_options)
        if not rung.user_scaling:
            opts["nlp_scaling_method"] = "gradient-based"
        self.progress.label = f"{rung.name}: "
        watch = None if elastic else StallWatch()

        def callback(info) -> bool:
            shown = self.progress.iteration(info)
            return (watch is None or watch(info)) and shown is not False

        with self.budget.charging():  # the budget counts the solves' own CPU time (optimize/attempts.py)
            r = solve_nlp(self.m, opts, callback=callback, warm_start=warm_start)
        self.progress.done()
        self._add_timings(r)
        attempt = {"rung": rung.name, "status": r.status.value, "iterations": r.iterations,
                   "seconds": r.timings.total_s, "message": r.message}
        if watch is not None and watch.stalled:
            attempt.update(status="stalled", message=watch.message())
            self.stalled = attempt
        elif r.ok and not elastic:  # a later solve settled (a swing pattern after the all-day one stalled)
            self.stalled = None
        self.attempts.append(attempt)
        return r

    def _add_timings(self, r) -> None:
        t = self.timings
        t["conversion_s"] = t.get("conversion_s", 0.0) + r.timings.conversion_s
        t["derivatives_s"] = t.get("derivatives_s", 0.0) + r.timings.derivatives_s
        t["ipopt_s"] = t.get("ipopt_s", 0.0) + r.timings.ipopt_s
        t["ipopt_cpu_s"] = t.get("ipopt_cpu_s", 0.0) + r.timings.ipopt_cpu_s
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
            # a stalled attempt (the stall rule, optimize/attempts.py) ends the ladder too: the elastic solve
            # says what cannot be met, with the budget's reserve
            if infeasible >= INFEASIBLE_STOP or self.attempts[-1]["status"] == "stalled" or self.budget.exhausted:
                break
        self.result = None
        return None

    def resolve(self, warm: bool = True, name: str | None = None):
        """Solve again from the current point (after moving a limit); ladder on failure.

        ``name``: what the attempt is called in the summary and messages (None: the first rung's name)."""
        rung = self.options.ladder[0]
        r = self._ipopt(rung if name is None else replace(rung, name=name), warm_start=warm)
        if self.attempts[-1]["status"] == "stalled":  # the stall rule: no ladder, the elastic solve says why
            return r
        if not r.ok:
            return self.solve()
        self.result = r
        return r

    def resolve_once(self, rung: Rung, warm=True):
        """One warm solve from the current point with ``rung`` (no ladder); the result (kept when it solved).

        ``warm``: True, the multipliers of the last solve; a solver result, its multipliers."""
        r = self._ipopt(rung, warm_start=warm)
        if r.ok:
            self.result = r
        return r

    def elastic(self):
        """Elastic solve from the baseline start; returns (result, findings). (Started from the refined study's
        coarse schedule instead, the demo with B3 out gave the same findings in 71 iterations against 40.)"""
        self.progress.phase("the limits cannot all be met: elastic solve")
        rung = self.options.ladder[0]
        self._restart(rung)
        _elastic.enter_elastic(self.m)
        r = self._ipopt(Rung("elastic", {"mu_strategy": "adaptive", "max_iter": 3000}), elastic=True)
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
            self.m.diffuser_count[zone] = float(value)
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
        m = self.m
        steps = list(m.STEPS)
        nh4 = [pyo.value(m.effluent_nh4_mg_L[t]) for t in steps]
        tn = [pyo.value(m.effluent_tn_mg_L[t]) for t in steps]
        q = [self.problem.effluent_weights[m.period_of_step[t]] for t in steps]
        per = [m.period_of_step[t] - 1 for t in steps]
        do = {z: [pyo.value(m.conc[t, z, "SO"]) for t in steps] for z in m.ZONES}
        w = point_weights(m)
        return day_figures(self.plant, nh4, tn, q, per, do, weights=[w[t] for t in steps])


def _saving(base, value):
    if base is None or value is None or base <= 0:
        return None
    return 100.0 * (base - value) / base


def saving_figures(base: Baseline, complying: Baseline | None, energy: float, cost, status: str,
                   complying_dispatch: DispatchSummary | None = None) -> dict:
    """The summary's saving entries, and notes for the console.

    No saving for a run whose limits cannot all be met (or that failed). When the
    uniform-DO baseline breaks a limit the saving against it is kept, marked as such
    (``baseline_compliant`` False), beside the saving against the lowest uniform
    setpoint that complies (``complying_baseline``, with ``complying_dispatch``: its day billed
    by the dispatch rule), when one was found.
    """
    out = {"saving_percent": None, "cost_saving_percent": None, "baseline_compliant": not base.violations,
           "complying_baseline": None, "notes": []}
    if status not in ("optimal", "unverified"):
        out["notes"].append("no saving is given: the schedule does not meet the limits")
        return out
    out["saving_percent"] = _saving(base.energy_kWh_per_day, energy)
    out["cost_saving_percent"] = _saving(base.cost_per_day, cost)
    if base.violations:
        sp = ", ".join(f"{v:g}" for v in sorted(set(base.setpoints_mg_L.values())))
        out["notes"].append(f"the saving of {out['saving_percent']:.1f} % is against a uniform DO baseline "
                            f"({sp} mg/L) that breaks a limit")
        if complying is not None:
            c = BaselineSummary.from_dict(complying.summary())
            c.saving_percent = _saving(complying.energy_kWh_per_day, energy)
            c.cost_saving_percent = _saving(complying.cost_per_day, cost)
            if complying_dispatch is not None:
                c.dispatch = complying_dispatch
            out["complying_baseline"] = c
            out["notes"].append(f"saving {c.saving_percent:.1f} % against the lowest uniform DO setpoint that "
                                f"meets the limits ({complying.setpoint_mg_L:.2f} mg/L, "
                                f"{complying.energy_kWh_per_day:,.1f} kWh/d)")
        else:
            out["notes"].append("no uniform DO setpoint meets the limits: no complying baseline to compare with")
    return out


def run_optimization(plant: ResolvedPlant | Layout, options: StudyOptions | None = None,
                     progress: Progress | None = None, baseline: Baseline | None = None,
                     start: SimDay | None = None, known: _elastic.KnownSchedule | None = None) -> StudyResult:
    """The whole study of a plant (module notes; a layout is resolved first); never raises for an infeasible or
    failed solve.

    ``baseline``: the uniform-DO baseline when it is already simulated (the same options); ``start``: a
    simulated day to start the optimiser from instead of the baseline's (:func:`_solve_refined`); ``known``: a
    schedule a converged solve gave, re-simulated, that the elastic solve's findings are checked against
    (:func:`~airtaper.optimize.elastic.check_findings`).
    """
    t0 = time.perf_counter()
    plant = resolve_plant(plant)
    opts = options or StudyOptions()
    prog = progress or Silent()
    screen = None
    if opts.prescreen:
        prog.phase("pre-screen: equipment bounds and every grid at full air")
        screen = prescreen(plant)
        if not screen["feasible"]:
            return _screened_out(plant, screen, time.perf_counter() - t0)
    study = DiurnalOptimisation(plant, opts, prog, baseline=baseline, start=start,
                                elastic_reserve=ELASTIC_RESERVE_FRACTION)
    base = study.run_baseline()
    study.build()
    # the refined study (optimize/backoff.py): capped solves from the coarse schedule, no retry ladder
    result = _solve_refined_first(study) if opts.refined else study.solve()
    if result is not None and not study.problem.staged:  # staged: the relaxed solve is no schedule yet
        study.budget.release()  # a schedule exists: the elastic reserve is free (optimize/attempts.py)
    messages = [] if screen is None or not screen["note"] else [f"pre-screen: {screen['note']}"]
    infeasibility = []
    status = "optimal"
    staging = None
    problem = study.problem
    objective = problem.objective
    if result is not None and problem.staged:
        staging = run_staging(study, result)
        result = staging.result
        if result is not None and result.ok:  # the swing states and machines are settled: a schedule exists
            study.budget.release()
        if staging.findings:
            status = "infeasible"
            infeasibility = staging.findings
            messages.extend(f["message"] for f in staging.findings)
    budget_ended = False
    if result is None and study.budget.spent_in_full:  # not even the elastic reserve is left
        status = "failed"
        budget_ended = True
        messages.append(study.budget.message(study.attempts))
    elif result is None:
        if study.stalled is not None:
            messages.append(f"the optimiser did not settle ({study.stalled['rung']}: {study.stalled['message']}); "
                            "the elastic solve says what cannot be met")
        elif opts.refined:
            messages.append(f"on the finer model steps the solve from the coarse schedule did not converge "
                            f"({study.attempts[-1]['iterations']} iterations, {study.attempts[-1]['status']}): "
                            "the elastic solve says which limit gives")
        r, infeasibility = study.elastic()
        infeasibility, dropped = _elastic.check_findings(plant, infeasibility, known)
        if dropped:  # a local result of the elastic solve: a verified schedule meets those limits
            messages.append(f"the elastic solve's findings on the {_elastic.limit_names(dropped)} are left out: "
                            f"{known.label} meets those limits and every other")
        if dropped and not infeasibility:
            status = "failed"
            messages.append(f"the elastic solve found no limit that {known.label} does not meet")
        elif not r.ok and study.budget.spent_in_full:
            status = "failed"
            budget_ended = True
            messages.append(study.budget.message(study.attempts))
        elif not r.ok:
            status = "failed"
            messages.append(f"the solver failed on every attempt ({r.message})")
        elif infeasibility:
            status = "infeasible"
            messages.extend(f["message"] for f in infeasibility)
            trade = _elastic.trade_message(infeasibility, known)
            if trade is not None:
                messages.append(trade)
        else:
            messages.append("solved through the elastic problem (no limit needed relaxing)")
        study.result = r
        result = r
        _elastic.leave_elastic(study.m)
    elif result.status.value == "acceptable":
        messages.append("Ipopt stopped at its 'acceptable' tolerances")
    fix_slacks(study.m.opt)

    verification = None
    hold = None
    if opts.verify and status != "failed":
        prog.phase("verifying: the schedule re-simulated by the independent simulator")
        t = time.perf_counter()

        # the last re-simulated day: when it did not repeat, the next back-off round's re-simulation continues from
        # it (optimize/verify.py, CHAINED_MAX_DAYS); when it did, from the model's state, which holds the new
        # schedule's slow states (the demo: 1 day from the model, 2-3 from the day before)
        days: list = []

        def verify():
            chain = days[-1] if days and not days[-1].converged else None
            ver, day = verify_day(plant, study.schedule_by_zone(), study.figures(), study.m, problem.swing_states,
                                  start_day=chain)
            days[:] = [day]
            return ver, day

        if status == "optimal" and opts.hold_do:
            staged = staging is not None and staging.dispatch is not None and not staging.findings
            coarse = refined_steps_per_period(plant.period_h, model_steps_per_period(plant, opts))
            hold = hold_do(study, verify, prog, relax=(lambda: relax_staging(problem)) if staged else None,
                           coarse=coarse is not None)
            coarse_day = hold.pop("day")  # the last re-simulated day: the refined study's start
            verification = hold["verification"]
            result = study.result
            if hold["resolve_failed"]:
                messages.append("the DO back-off could not be applied in full: the re-solve failed")
            elif hold["budget_ended"]:
                messages.append(f"DO back-off ended after {hold['rounds']} rounds: {hold['stop_reason']}"
                                + ("; the last verified schedule is kept" if verification["verified"] else ""))
            elif hold["stalled"] and not hold["refine"]:
                messages.append(f"the DO back-off stopped after {hold['rounds']} rounds: {hold['stop_reason']}")
            if hold["max_excursions_mg_L"]:
                messages.append("the DO maximum gave way to the minimum (both could not be backed off at once): "
                                "the re-simulated DO is above the maximum by " + ", ".join(
                                    f"{v:.3f} mg/L in {k.replace('/', ' period ')}"
                                    for k, v in hold["max_excursions_mg_L"].items()))
        else:
            verification = verify()[0]
        study.timings["verification_s"] = time.perf_counter() - t
        fine = None
        if hold is not None and hold["refine"]:  # model steps too long for the DO within a period (backoff.py)
            period_h, coarse = plant.period_h, model_steps_per_period(plant, opts)
            finer = refined_steps_per_period(period_h, coarse)
            step = period_h / coarse
            known = _elastic.KnownSchedule(f"the schedule solved on {step:g}-hour model steps", coarse_day,
                                           bool(verification["verified"]), list(verification["violations"]))
            fine = _solve_refined(plant, opts, prog, base, coarse_day, finer, step, messages, known)
        if fine is not None:
            if screen is not None:  # the pre-screen ran once, for both
                from airtaper.optimize.results import jsonable

                fine.summary["prescreen"] = jsonable(screen)
                if screen["note"]:
                    fine.summary["messages"].insert(0, f"pre-screen: {screen['note']}")
            fine.summary["messages"].insert(0, f"solved on {period_h / finer:g}-hour model steps: on "
                                               f"{step:g}-hour steps the back-off could not hold the DO range ("
                                               + "; ".join([hold["refine_reason"], *verification["violations"]])
                                               + ")")
            if fine.summary.get("do_hold") is not None:
                fine.summary["do_hold"]["coarse_steps_per_period"] = coarse
                fine.summary["do_hold"]["coarse_seconds"] = time.perf_counter() - t0
            return fine
        if not verification["verified"]:
            messages.append("WARNING: the re-simulated schedule breaks a limit: " + "; ".join(verification["violations"]))
    blowers_table, dispatch, base_dispatch, complying_dispatch = None, None, None, None
    redispatched = False
    if staging is not None and staging.dispatch is not None and not staging.findings and result is not None \
            and status == "optimal":
        # the last re-solves moved the airflow after the machines were chosen: the cheapest machines for it
        staging.dispatch, redispatched = redispatch(problem, staging.dispatch)
    schedule, header, timeseries = study_tables(study)
    schedule, header = base.add_columns(schedule, header)
    figs = study.figures()
    energy = study.energy_kWh_per_day()
    power = study.power_by_period()
    cost = plant.air.cost(power)
    if staging is not None and staging.dispatch is not None:
        dp = staging.dispatch if staging.findings else final_dispatch(problem, staging.dispatch)
        blowers_table = dispatch_table(plant, dp)
        dispatch = DispatchSummary.from_dict(dispatch_summary(plant, dp))
        energy = dispatch.energy_kWh_per_day
        cost = dispatch.cost_per_day
        dispatch.rounds = staging.rounds
        dispatch.converged = staging.converged
        dispatch.stopped = staging.reason
        dispatch.redispatched_at_final_schedule = redispatched
        dispatch.swing_zones = {z: {"aerated_periods": [int(i) + 1 for i in np.flatnonzero(on)],
                                    "switches": int(np.sum(on != np.roll(on, 1)))}
                                for z, on in (staging.swing_states or {}).items()}
        if status == "optimal" and result is not None:
            breaches = feasibility_check(problem, dp)
            dispatch.feasibility_breaches = breaches
            if breaches:
                status = "unverified"
                messages.append("WARNING: the schedule breaks a machine or grid range: " + "; ".join(breaches))
        bd = bill_day_by_dispatch(plant, base.day, objective)
        if bd is not None:  # the baseline billed by the same dispatch rule: like with like
            header["baseline_power_kW"] = bd.total_power_kW
            base_dispatch = DispatchSummary.from_dict(dispatch_summary(plant, bd))
            base_dispatch.shortfall = [f["message"] for f in bd.findings]
            messages.extend(f"baseline: {f['message']}" for f in bd.findings)
    marginal = []
    if opts.marginal and status == "optimal" and result is not None and result.ok:
        marginal = marginal_costs(problem, result, energy_kWh_per_day=energy, cost_per_day=cost)
    for w in base.violations:
        messages.append(f"baseline: {w}")
    for short in base.day.setpoint_shortfalls:
        messages.append(f"baseline: {short['message']}")
    if status == "optimal" and verification is not None and not verification["verified"]:
        status = "unverified"
    complying = None
    if base.violations and status in ("optimal", "unverified") and opts.complying_baseline:
        prog.phase("the uniform-DO baseline breaks a limit: finding the lowest uniform setpoint that complies")
        t = time.perf_counter()
        complying = complying_baseline(plant, base)
        if complying is not None and base_dispatch is not None:
            # billed by the same dispatch rule as the baseline and the optimum
            cd = bill_day_by_dispatch(plant, complying.day, objective)
            if cd is not None:
                complying_dispatch = DispatchSummary.from_dict(dispatch_summary(plant, cd))
        study.timings["complying_baseline_s"] = time.perf_counter() - t
    savings = saving_figures(base, complying, energy, cost, status, complying_dispatch)
    messages.extend(savings.pop("notes"))
    periods = np.arange(plant.n_periods)
    untested = outside_tested_range(plant, study.schedule_by_zone(), periods,
                                    "optimum" if status in ("optimal", "unverified") else "elastic solution") + \
        outside_tested_range(plant, _node_airflow(plant, base.day), base.day.node_period, "baseline")
    messages.extend(u["message"] for u in untested)
    exit_code = {"optimal": EXIT_OK, "infeasible": EXIT_INFEASIBLE, "unverified": EXIT_UNVERIFIED,
                 "failed": EXIT_INFEASIBLE if budget_ended else EXIT_FAILURE}[status]
    study.timings["total_s"] = time.perf_counter() - t0
    summary = StudySummary(
        status=status,
        plant=plant.name,
        layout=plant.path,
        objective=objective,
        currency=plant.tariff.currency if plant.tariff else "",
        energy_kWh_per_day=energy,
        cost_per_day=cost,
        baseline=BaselineSummary.from_dict(
            dict(base.summary(), **({} if base_dispatch is None else {"dispatch": base_dispatch}))),
        **savings,
        dispatch=dispatch,
        effluent=EffluentFigures.of(figs),
        # the re-simulated day's margins (continuous time) when verified, else the optimiser's
        min_do_margin_mg_L=figs["min_do_margin_mg_L"] if verification is None
        else verification["min_do_margin_mg_L"],
        do_margin_mg_L=figs["do_margin_mg_L"] if verification is None else verification["do_margin_mg_L"],
        optimiser_min_do_margin_mg_L=figs["min_do_margin_mg_L"],
        do_hold=None if hold is None else {k: v for k, v in hold.items() if k != "verification"},
        limits=Limits.of_plant(plant),
        verification=VerificationSummary.from_dict(verification) if verification is not None
        else VerificationSummary(verified=None, skipped=True),
        verified=None if verification is None else verification["verified"],
        marginal_costs=marginal,
        infeasibility=infeasibility,
        prescreen=screen,
        outside_tested_range=untested,
        smoothing=Smoothing(problem.settings.smoothing_weight, float(pyo.value(study.m.opt.smoothing))),
        solver=SolverSummary(
            status=None if result is None else result.status.value,
            message=None if result is None else result.message,
            iterations=int(study.timings.get("iterations", 0)),
            attempts=study.attempts,
            variables=None if result is None else result.n_variables,
            constraints=None if result is None else result.n_constraints,
            scaling=study.scaling,
            timings={k: v for k, v in study.timings.items() if k != "iterations"},
        ),
        messages=messages,
    )
    return StudyResult(schedule=schedule, header=header, timeseries=timeseries, summary=summary.to_dict(),
                       exit_code=exit_code, study=study, blowers=blowers_table)


def _solve_refined_first(study: DiurnalOptimisation):
    """The refined study's first solve (optimize/backoff.py, :data:`~airtaper.optimize.backoff.REFINED_MAX_ITER`):
    capped, and when it stops at its cap while still converging (dual infeasibility below
    :data:`~airtaper.optimize.backoff.REFINED_DIVERGING_DUAL`) continued once from where it stopped, warm, with the
    same cap. No retry ladder: the result, or None (the elastic solve follows)."""
    study.progress.phase("optimising")
    study._free_decisions()
    r = study._ipopt(refined_first_rung(study.options.ladder[0]))
    if not r.ok and still_converging(r) and not study.budget.exhausted:
        r = study._ipopt(refined_first_rung(study.options.ladder[0], continued=True), warm_start=r)
    study.result = r if r.ok else None
    return study.result


def _solve_refined(plant: ResolvedPlant, opts: StudyOptions, prog, base: Baseline, coarse_day: SimDay, finer: int,
                   step_h: float, messages: list, known: _elastic.KnownSchedule) -> StudyResult | None:
    """The study solved again on ``finer`` steps per period (optimize/backoff.py, "Coarse model steps").

    Started from the coarse schedule's re-simulated day (its airflows and the simulator's states at every
    finer time point, :func:`~airtaper.optimize.attempts.start_from_day`) with a budget of its own
    (:func:`~airtaper.optimize.backoff.refined_options`); the elastic solve's findings are checked against
    the coarse schedule (``known``). None (and a message) when it gives no schedule, or when it finds the
    limits cannot be met although the coarse schedule was verified (its findings are a local result).
    """
    period_h = plant.period_h
    prog.phase(f"the back-off could not hold the DO range on {step_h:g}-hour model steps: "
               f"solving again on {period_h / finer:g}-hour steps, from the re-simulated schedule")
    fine = run_optimization(plant, refined_options(opts, finer), prog, base, start=coarse_day, known=known)
    status = fine.summary["status"]
    if status == "failed" or (status == "infeasible" and known.verified):
        # no answer there, or findings a verified schedule contradicts: keep the coarse result, and say why
        if status == "failed":
            why = "; ".join(fine.summary["messages"][:1])
        else:
            found = "; ".join(f["message"] for f in fine.summary["infeasibility"])
            why = (f"its elastic solve's findings ({found}) do not hold against {known.label}, which the simulator "
                   "verified")
        messages.append(f"solving again on {period_h / finer:g}-hour model steps gave no schedule: {why}")
        return None
    return fine


def _node_airflow(plant: ResolvedPlant, day) -> dict:
    """Zone id -> airflow at the simulated day's quadrature nodes."""
    return {z.id: day.node_airflow[:, i] for i, z in enumerate(plant.zones)}


def _screened_out(plant: ResolvedPlant, screen: dict, seconds: float) -> StudyResult:
    """The result of a run the pre-screen stops: no schedule, the findings, exit code 3."""
    schedule, header, timeseries = empty_tables()
    summary = StudySummary(
        status="infeasible",
        plant=plant.name,
        layout=plant.path,
        objective=plant.operation.objective,
        currency=plant.tariff.currency if plant.tariff else "",
        limits=Limits.of_plant(plant),
        infeasibility=screen["findings"],
        prescreen=screen,
        solver=SolverSummary(status=None, timings={"prescreen_s": screen["seconds"], "total_s": seconds}),
        messages=["the pre-screen shows the limits cannot all be met (no optimisation was run): "
                  + f["message"] for f in screen["findings"]] + ["no saving is given: the limits cannot be met"],
    )
    return StudyResult(schedule=schedule, header=header, timeseries=timeseries, summary=summary.to_dict(),
                       exit_code=EXIT_INFEASIBLE)


__all__ = ["DiurnalOptimisation", "StudyOptions", "StudyResult", "run_optimization"]
