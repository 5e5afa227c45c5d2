"""Diffuser-grid design over load days: ``airtaper design``.

The question: how many diffusers should each zone get? More diffusers lower the
airflow per diffuser and raise the transfer efficiency (the SOTE curves), which saves
energy every day of the year but costs money once; the grid must also carry the peak
day's oxygen demand, turn down on the minimum day and keep the mixing minimum.

Relaxed problem (one NLP)
    One cyclic model per load day (:func:`airtaper.layout.loaddays.day_layout`), each
    with its own schedule, limits and objective terms exactly as ``optimize`` builds them
    (:class:`~airtaper.optimize.diurnal.DiurnalOptimisation`), hung as sub-blocks of one
    Pyomo model. The diffuser count of every diffused zone is one continuous variable
    ``count[z]`` shared by every day (the days couple only through it: the problem grows
    linearly with the number of days). Objective::

        (CRF x capital(count) + sum_d w_d x cost_d) / R + sum_d (w_d / W) x s x smoothing_d

    with ``capital = sum_z (cost_per_diffuser x count_z + cost_per_zone)``, ``CRF`` the
    capital recovery factor, ``w_d`` the days per year of day ``d`` (``W`` their sum),
    ``cost_d`` the day's energy cost with its share of the demand charge (the tariff's
    cost objective), ``R`` the annual cost of the baselines (a normaliser, so the
    objective is about 1) and ``s`` the layout's smoothing weight. The blowers count as one
    machine at the aggregate efficiency here (staging is a discrete choice per day that
    does not change the grid question); swing zones are relaxed.

    Each count stays inside the density range of its diffuser type's clean-water tests
    (where the SOTE fit interpolates), at most the practical maximum density, in whole
    multiples of the zone's ``count_step``: :func:`count_range`.

Whole counts (a small integer search)
    From the relaxed optimum rounded to the nearest step, each zone is moved one step up
    and one step down, every candidate re-solved (the counts fixed, the days' schedules
    free, warm from the relaxed solution); the best improving move is taken until none
    improves (when the rounded grid fails a day's limits, the search starts from every count rounded up, then
    down). A candidate the warm start cannot solve is solved once more from every day's baseline start. Every
    candidate and its annual cost are kept (``candidates``).

Verification and economics
    The chosen grid's schedule of every day is re-simulated by the independent simulator
    (:func:`airtaper.optimize.verify.verify_day`). The layout's current grid is evaluated
    the same way (counts fixed) for the comparison: payback = extra capital / annual
    saving, net present value of the saving over the grid's life at the interest rate
    minus the extra capital (capital of a grid = the cost of installing it new).
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import pyomo.environ as pyo

from airtaper.errors import EXIT_FAILURE, EXIT_INFEASIBLE, EXIT_OK, EXIT_UNVERIFIED, ModelError
from airtaper.layout import defaults as D
from airtaper.layout.loaddays import day_layout, layout_days, with_grid_counts
from airtaper.layout.types import Layout
from airtaper.optimize.attempts import BASE_OPTIONS, LADDER
from airtaper.optimize.diurnal import DiurnalOptimisation, StudyOptions
from airtaper.optimize.horizon import with_periods
from airtaper.optimize.progress import Progress, Silent
from airtaper.optimize.results import jsonable, study_tables
from airtaper.optimize.verify import verify_day
from airtaper.solve import solve_nlp

#: Relative closeness to a bound at which a zone's airflow counts as held by it (binding).
BINDING_TOLERANCE = 2e-3


# --- economics (pure) ---------------------------------------------------------------------
def capital_recovery_factor(interest_rate: float, life_years: float) -> float:
    """Equal yearly payment per unit of capital, 1/year: ``i (1 + i)^n / ((1 + i)^n - 1)``; ``1 / n`` at ``i = 0``.

    The uniform-series capital recovery factor of engineering economics (Grant, Ireson
    and Leavenworth, Principles of Engineering Economy, Wiley; any engineering-economics
    text).
    """
    if interest_rate == 0.0:
        return 1.0 / life_years
    g = (1.0 + interest_rate) ** life_years
    return interest_rate * g / (g - 1.0)


def net_present_value(extra_capital: float, annual_saving: float, interest_rate: float, life_years: float) -> float:
    """Present value of ``annual_saving`` each year over the life, minus ``extra_capital`` spent now."""
    return annual_saving / capital_recovery_factor(interest_rate, life_years) - extra_capital


def simple_payback_years(extra_capital: float, annual_saving: float) -> float | None:
    """Years for the saving to repay the extra capital (None when nothing is saved; 0 when nothing is spent)."""
    if extra_capital <= 0.0:
        return 0.0
    if annual_saving <= 0.0:
        return None
    return extra_capital / annual_saving


def grid_capital(layout: Layout, counts: dict[str, float]) -> float:
    """Capital of installing the grids ``counts`` (zone -> diffusers) new, in the tariff's currency."""
    cap = layout.capital
    return sum(cap.cost_per_diffuser * float(n) + cap.cost_per_zone for n in counts.values())


# --- the design range of a zone -------------------------------------------------------------
def count_range(layout: Layout, zone) -> tuple[int, int]:
    """(lowest, highest) count a design may give ``zone``: whole steps within the tested densities.

    The density range is that of the diffuser type's clean-water test points (the SOTE
    fit interpolates there), capped at the practical maximum density; when not one whole
    step fits inside it, the range widens to one step up to the practical maximum.
    """
    step = zone.grid.count_step
    dtype = layout.diffuser_type(zone.grid.type_id)
    per = 100.0 * dtype.membrane_area_m2 / zone.area_m2  # density of one diffuser, percent
    dens = [p.density_percent for p in dtype.sote_points]
    top = min(max(dens), D.DENSITY_MAX_PERCENT)
    lo = max(step, step * math.ceil(min(dens) / per / step - 1e-9))
    hi = step * math.floor(top / per / step + 1e-9)
    if hi < lo:
        lo, hi = step, max(step, step * math.floor(D.DENSITY_MAX_PERCENT / per / step + 1e-9))
    return int(lo), int(hi)


@dataclass
class DesignOptions:
    """Choices of a design (None: the layout's value)."""

    n_periods: int | None = None  # design on another diurnal grid (optimize.horizon.with_periods)
    steps_per_period: int | None = None
    verify: bool = True
    max_moves: int = 20  # improving moves of the whole-count search at most
    ipopt_options: dict = field(default_factory=dict)


@dataclass
class Candidate:
    counts: dict[str, int]
    annual_cost: float | None  # None: a day's limits cannot be met (or the solve failed)
    status: str
    seconds: float


class GridDesign:
    """The design problem of one layout over its load days (module notes)."""

    def __init__(self, layout: Layout, options: DesignOptions | None = None, progress: Progress | None = None):
        if layout.capital is None or layout.tariff is None:
            raise ModelError("a design needs the layout's [capital] costs and [tariff]")
        self.options = options or DesignOptions()
        if self.options.n_periods is not None and self.options.n_periods != layout.horizon.n_periods:
            layout = with_periods(layout, self.options.n_periods)
        self.layout = layout
        self.progress = progress or Silent()
        self.days = layout_days(layout)
        self.zones = [z for z in layout.zones if z.has_diffusers]
        if not self.zones:
            raise ModelError("the layout has no diffuser grids to design")
        self.ids = [z.id for z in self.zones]
        self.ranges = {z.id: count_range(layout, z) for z in self.zones}
        self.current = {z.id: z.grid.count for z in self.zones}
        self.crf = capital_recovery_factor(layout.capital.interest_rate, layout.capital.life_years)
        self.studies: list[DiurnalOptimisation] = []
        self.model = None
        self.timings: dict[str, float] = {}
        self.candidates: list[Candidate] = []
        self._states: dict[tuple, list] = {}
        self.relaxed: dict[str, float] | None = None
        self.relaxed_result = None

    # --- building ---------------------------------------------------------------------------
    def build(self) -> None:
        t0 = time.perf_counter()
        M = pyo.ConcreteModel(name="design")
        M.ZONES = pyo.Set(initialize=self.ids, ordered=True)
        M.count = pyo.Var(M.ZONES, bounds=lambda M, z: self.ranges[z],
                          initialize=lambda M, z: float(min(max(self.current[z], self.ranges[z][0]),
                                                            self.ranges[z][1])))
        opts = StudyOptions(objective="cost", staging=False, steps_per_period=self.options.steps_per_period)
        total_w = sum(d.days_per_year for d in self.days)
        for i, day in enumerate(self.days, start=1):
            self.progress.phase(f"load day {day.id}: baseline and model ({i} of {len(self.days)})")
            st = DiurnalOptimisation(day_layout(self.layout, day), opts, self.progress)
            st.build(diffuser_count=M.count)
            st.m.opt.objective.deactivate()
            M.add_component(f"day_{i}", st.m)
            self.studies.append(st)
        cap = self.layout.capital
        M.capital = pyo.Expression(expr=sum(cap.cost_per_diffuser * M.count[z] + cap.cost_per_zone for z in self.ids))
        M.energy_cost_per_year = pyo.Expression(expr=sum(d.days_per_year * st.m.opt.goal
                                                         for d, st in zip(self.days, self.studies)))
        self.reference = sum(d.days_per_year * st.problem.reference for d, st in zip(self.days, self.studies)) \
            + self.crf * grid_capital(self.layout, self.current)
        M.annual_cost = pyo.Expression(expr=self.crf * M.capital + M.energy_cost_per_year)
        M.objective = pyo.Objective(expr=M.annual_cost / self.reference + sum(
            d.days_per_year / total_w * st.m.opt.smoothing_weight * st.m.opt.smoothing
            for d, st in zip(self.days, self.studies)), sense=pyo.minimize)
        # scaling: the days' own factors (on their blocks), the counts by their size, the objective by the
        # smallest of the days' objective factors (each day's objective had the same form)
        M.scaling_factor = pyo.Suffix(direction=pyo.Suffix.EXPORT)
        for z in self.ids:
            M.scaling_factor[M.count[z]] = 1.0 / max(self.ranges[z][1], 1.0)
        factors = [st.m.scaling_factor[st.m.opt.objective] for st in self.studies
                   if st.m.opt.objective in st.m.scaling_factor]
        M.scaling_factor[M.objective] = float(min(factors)) if factors else 1.0
        self.model = M
        self.timings["build_s"] = time.perf_counter() - t0

    # --- solving ----------------------------------------------------------------------------
    def _solve(self, rung_options: dict, warm: bool = False):
        opts = dict(BASE_OPTIONS)
        opts.update(rung_options)
        opts.update(self.options.ipopt_options)
        r = solve_nlp(self.model, opts, callback=self.progress.iteration, warm_start=warm)
        self.progress.done()
        for key, value in (("ipopt_s", r.timings.ipopt_s), ("conversion_s", r.timings.conversion_s),
                           ("derivatives_s", r.timings.derivatives_s)):
            self.timings[key] = self.timings.get(key, 0.0) + value
        self.timings["iterations"] = self.timings.get("iterations", 0) + r.iterations
        return r

    def solve_relaxed(self):
        """The relaxed design (counts continuous); returns the solver result (``ok`` or not)."""
        if self.model is None:
            self.build()
        M = self.model
        for z in self.ids:
            M.count[z].unfix()
        self.progress.phase("the relaxed design: every load day's schedule and the shared diffuser counts")
        r = None
        for k, rung in enumerate(LADDER[:3]):
            for st in self.studies:
                if k == 0:
                    st._free_decisions()
                else:
                    st._restart(rung)
            r = self._solve(rung.options)
            if r.ok or r.status.value == "infeasible":
                break
        self.relaxed_result = r
        if r.ok:
            # within the range (Ipopt may end a hair outside a bound, inside its tolerance)
            self.relaxed = {z: min(max(float(M.count[z].value), self.ranges[z][0]), self.ranges[z][1])
                            for z in self.ids}
            self._relaxed_state = self._snapshot()
        return r

    def _snapshot(self) -> list:
        return [(v, v.value) for v in self.model.component_data_objects(pyo.Var, descend_into=True)]

    def _restore(self, state: list) -> None:
        for v, val in state:
            if not v.fixed:
                v.set_value(val, skip_validation=True)

    def evaluate(self, counts: dict[str, int]) -> Candidate:
        """Annual cost of the grid ``counts`` with every day's schedule optimised (counts fixed)."""
        key = tuple(int(counts[z]) for z in self.ids)
        for c in self.candidates:
            if tuple(c.counts[z] for z in self.ids) == key:
                return c
        if self.model is None:
            self.build()
        M = self.model
        t0 = time.perf_counter()
        self._fix_counts(counts)
        if getattr(self, "_relaxed_state", None) is not None:
            self._restore(self._relaxed_state)
        else:
            for st in self.studies:
                st._free_decisions()
        self.progress.phase("grid " + ", ".join(f"{z} {counts[z]}" for z in self.ids))
        r = self._solve(LADDER[0].options)
        if not r.ok:  # not from the relaxed design's point: once more from every day's baseline start
            for st in self.studies:
                st._restart(LADDER[1])
            r = self._solve(LADDER[1].options)
        value = float(pyo.value(M.annual_cost)) if r.ok else None
        cand = Candidate({z: int(counts[z]) for z in self.ids}, value, r.status.value, time.perf_counter() - t0)
        self.candidates.append(cand)
        if r.ok:
            self._states[key] = self._snapshot()
        return cand

    def load(self, counts: dict[str, int]) -> None:
        """Put the solved state of an evaluated grid back into the model."""
        key = tuple(int(counts[z]) for z in self.ids)
        self._fix_counts(counts)
        self._restore(self._states[key])

    def _fix_counts(self, counts: dict[str, int]) -> None:
        """Fix the counts (the current grid may lie outside the design range: no bound check)."""
        for z in self.ids:
            self.model.count[z].set_value(float(counts[z]), skip_validation=True)
            self.model.count[z].fix()

    def _nearest(self) -> dict[str, int]:
        out = {}
        for z in self.zones:
            step = z.grid.count_step
            lo, hi = self.ranges[z.id]
            out[z.id] = int(min(max(step * round(self.relaxed[z.id] / step), lo), hi))
        return out

    def search(self) -> Candidate | None:
        """Whole counts by the neighbour search from the rounded relaxed optimum (module notes)."""
        if self.relaxed is None:
            raise ModelError("solve the relaxed design first")
        best = self.evaluate(self._nearest())
        for rounding in (math.ceil, math.floor):  # when the nearest grid fails a day: every count up, then down
            if best.annual_cost is not None:
                break
            steps = {z.id: z.grid.count_step * rounding(self.relaxed[z.id] / z.grid.count_step) for z in self.zones}
            best = self.evaluate({z: int(min(max(n, self.ranges[z][0]), self.ranges[z][1])) for z, n in steps.items()})
        if best.annual_cost is None:
            return None
        for _ in range(self.options.max_moves):
            moves = []
            for z in self.zones:
                for sign in (1, -1):
                    n = best.counts[z.id] + sign * z.grid.count_step
                    if self.ranges[z.id][0] <= n <= self.ranges[z.id][1]:
                        moves.append(dict(best.counts, **{z.id: n}))
            tried = [self.evaluate(c) for c in moves]
            better = [c for c in tried if c.annual_cost is not None and c.annual_cost < best.annual_cost - 1e-9 * abs(
                best.annual_cost)]
            if not better:
                break
            best = min(better, key=lambda c: c.annual_cost)
        return best

    # --- results of the solved state -----------------------------------------------------------
    def day_figures(self) -> list[dict]:
        """Per load day at the model's current state: energy, cost, effluent, schedule."""
        out = []
        for day, st in zip(self.days, self.studies):
            out.append({"day": day, "study": st, "energy_kWh_per_day": st.energy_kWh_per_day(),
                        "cost_per_day": float(pyo.value(st.m.opt.goal)), "figures": st.figures(),
                        "schedule": st.schedule_by_zone()})
        return out

    def binding(self, counts: dict[str, int]) -> dict[str, list[str]]:
        """What holds each zone's grid at the current state: the days and limits its airflow sits on."""
        out: dict[str, list[str]] = {}
        for z in self.zones:
            reasons = []
            lo, hi = self.ranges[z.id]
            dtype = self.layout.diffuser_type(z.grid.type_id)
            n = counts[z.id]
            for day, st in zip(self.days, self.studies):
                q = st.schedule_by_zone()[z.id]
                mix = st.problem.settings.mixing_airflow_min_Sm3_h_m2[z.id] * z.area_m2
                tol = BINDING_TOLERANCE
                if np.any(q >= n * dtype.airflow_max_Sm3_h * (1 - tol)):
                    reasons.append(f"{day.id}: transfer (air per diffuser at its maximum)")
                if z.valve_capacity_Sm3_h is not None and np.any(q >= z.valve_capacity_Sm3_h * (1 - tol)):
                    reasons.append(f"{day.id}: valve capacity")
                floor = n * dtype.airflow_min_Sm3_h
                if floor >= mix and np.any(q <= floor * (1 + tol)):
                    reasons.append(f"{day.id}: turndown (air per diffuser at its minimum)")
                elif mix > floor and np.any(q <= mix * (1 + tol)):
                    reasons.append(f"{day.id}: mixing minimum")
            if n <= lo:
                reasons.append(f"lowest count of the tested density range ({lo})")
            if n >= hi:
                reasons.append(f"highest count of the tested density range ({hi})")
            out[z.id] = reasons or ["energy against capital (no limit holds it)"]
        return out

    def verify(self, counts: dict[str, int]) -> list[dict]:
        """Every day's schedule on the grid ``counts`` re-simulated by the independent simulator."""
        out = []
        for day, st in zip(self.days, self.studies):
            self.progress.phase(f"verifying load day {day.id}: the schedule re-simulated")
            lay = with_grid_counts(st.layout, counts)
            ver, _sim = verify_day(lay, st.schedule_by_zone(), st.figures(), st.m)
            out.append(ver)
        return out


@dataclass
class DesignResult:
    zones: pd.DataFrame  # design.csv: one row per diffused zone
    days: pd.DataFrame  # load_days.csv: one row per load day, designed and current grid
    schedule: pd.DataFrame  # schedule.csv: one row per load day, period and zone on the designed grid
    candidates: pd.DataFrame  # candidates.csv: every whole-count grid evaluated
    summary: dict
    exit_code: int
    layout: Layout  # the layout with the designed grid (the current one when no design was found)
    design: GridDesign | None = None


def _day_rows(g: GridDesign, label: str) -> dict[str, dict]:
    rows = {}
    for f in g.day_figures():
        d = f["day"]
        rows[d.id] = {f"energy_kWh_per_day_{label}": f["energy_kWh_per_day"],
                      f"cost_per_day_{label}": f["cost_per_day"],
                      f"nh4_mean_mg_L_{label}": f["figures"]["nh4_mean_mg_L"],
                      f"tn_mean_mg_L_{label}": f["figures"]["tn_mean_mg_L"]}
    return rows


def _annual(g: GridDesign, rows: dict, label: str, what: str) -> float:
    return sum(d.days_per_year * rows[d.id][f"{what}_{label}"] for d in g.days)


def run_design(layout: Layout, options: DesignOptions | None = None, progress: Progress | None = None
               ) -> DesignResult:
    """The whole design (module notes): relaxed NLP, whole counts, verification, economics; never raises for an
    infeasible or failed solve (the exit code says it)."""
    t0 = time.perf_counter()
    g = GridDesign(layout, options, progress)
    lay = g.layout
    cap = lay.capital
    messages: list[str] = []
    g.build()
    r = g.solve_relaxed()
    base = {"plant": lay.plant.name, "layout": lay.path, "currency": lay.tariff.currency,
            "load_days": [{"id": d.id, "days_per_year": d.days_per_year} for d in g.days],
            "capital_inputs": {"cost_per_diffuser": cap.cost_per_diffuser, "cost_per_zone": cap.cost_per_zone,
                               "interest_rate": cap.interest_rate, "life_years": cap.life_years,
                               "capital_recovery_factor": g.crf},
            "count_ranges": {z: {"lowest": lo, "highest": hi} for z, (lo, hi) in g.ranges.items()}}
    if not r.ok:
        status = "infeasible" if r.status.value == "infeasible" else "failed"
        messages.append("no grid in the design ranges meets every load day's limits" if status == "infeasible"
                        else f"the relaxed design failed ({r.message})")
        return _no_design(g, base, status, messages, t0)
    current = g.evaluate(g.current)
    current_rows = _day_rows(g, "current") if current.annual_cost is not None else None
    if current_rows is None:
        messages.append("the current grid cannot meet every load day's limits: no payback against it")
    best = g.search()
    if best is None:
        messages.append("no whole-count grid near the relaxed design meets every load day's limits")
        return _no_design(g, base, "infeasible", messages, t0)
    g.load(best.counts)
    design_rows = _day_rows(g, "design")
    binding = g.binding(best.counts)
    verification = g.verify(best.counts) if g.options.verify else None
    designed = with_grid_counts(lay, best.counts)

    zones = []
    for z in g.zones:
        zones.append({"zone": z.id, "count_current": g.current[z.id], "count_relaxed": g.relaxed[z.id],
                      "count_design": best.counts[z.id], "count_step": z.grid.count_step,
                      "count_lowest": g.ranges[z.id][0], "count_highest": g.ranges[z.id][1],
                      "density_current_percent": density_percent(lay, z, g.current[z.id]),
                      "density_design_percent": density_percent(lay, z, best.counts[z.id]),
                      "binding": "; ".join(binding[z.id])})
    days = []
    for i, (d, st) in enumerate(zip(g.days, g.studies)):
        row = {"load_day": d.id, "days_per_year": d.days_per_year, **design_rows[d.id]}
        if current_rows is not None:
            row.update(current_rows[d.id])
        if verification is not None:
            v = verification[i]
            row.update({"verified": v["verified"], "min_do_margin_mg_L": v["min_do_margin_mg_L"],
                        "violations": "; ".join(v["violations"])})
        days.append(row)
    sched = []
    for d, st in zip(g.days, g.studies):
        table, _header, _ts = study_tables(st)
        table.insert(0, "load_day", d.id)
        sched.append(table[["load_day", "period_start_h", "period_end_h", "zone", "airflow_Sm3_h",
                            "airflow_per_diffuser_Sm3_h", "do_min_mg_L", "do_mean_mg_L", "nh4_mean_mg_L",
                            "otr_kg_h"]])
    schedule = pd.concat(sched, ignore_index=True)
    candidates = pd.DataFrame([{**{f"count_{z}": c.counts[z] for z in g.ids}, "annual_cost": c.annual_cost,
                                "status": c.status, "seconds": c.seconds} for c in g.candidates])

    def totals(rows, label, counts):
        capital = grid_capital(lay, counts)
        energy_cost = _annual(g, rows, label, "cost_per_day")
        return {"counts": dict(counts), "capital": capital, "capital_per_year": g.crf * capital,
                "energy_kWh_per_year": _annual(g, rows, label, "energy_kWh_per_day"),
                "energy_cost_per_year": energy_cost, "annual_cost": g.crf * capital + energy_cost,
                "diffusers": int(sum(counts.values()))}

    design_tot = totals(design_rows, "design", best.counts)
    design_tot["relaxed_counts"] = dict(g.relaxed)
    current_tot = totals(current_rows, "current", g.current) if current_rows is not None else None
    comparison = None
    if current_tot is not None:
        extra = design_tot["capital"] - current_tot["capital"]
        saving = current_tot["energy_cost_per_year"] - design_tot["energy_cost_per_year"]
        comparison = {"extra_capital": extra, "energy_saving_per_year": saving,
                      "energy_saving_kWh_per_year": current_tot["energy_kWh_per_year"]
                      - design_tot["energy_kWh_per_year"],
                      "payback_years": simple_payback_years(extra, saving),
                      "net_present_value": net_present_value(extra, saving, cap.interest_rate, cap.life_years)}
    verified = None if verification is None else all(v["verified"] for v in verification)
    status = "optimal" if verified is not False else "unverified"
    if verified is False:
        bad = [d.id for d, v in zip(g.days, verification) if not v["verified"]]
        messages.append("WARNING: the re-simulated schedule breaks a limit on load day(s) " + ", ".join(bad))
    g.timings["total_s"] = time.perf_counter() - t0
    summary = {**base, "status": status, "design": design_tot, "current": current_tot, "comparison": comparison,
               "binding": binding, "verified": verified, "candidates_evaluated": len(g.candidates),
               "solver": {"relaxed_status": r.status.value, "relaxed_iterations": r.iterations,
                          "variables": r.n_variables, "constraints": r.n_constraints,
                          "iterations": int(g.timings.get("iterations", 0)),
                          "timings": {k: v for k, v in g.timings.items() if k != "iterations"}},
               "messages": messages}
    code = EXIT_OK if status == "optimal" else EXIT_UNVERIFIED
    return DesignResult(pd.DataFrame(zones), pd.DataFrame(days), schedule, candidates, jsonable(summary), code,
                        designed, g)


def _no_design(g: GridDesign, base: dict, status: str, messages: list[str], t0: float) -> DesignResult:
    g.timings["total_s"] = time.perf_counter() - t0
    summary = {**base, "status": status, "design": None, "current": None, "comparison": None, "binding": None,
               "verified": None, "candidates_evaluated": len(g.candidates),
               "solver": {"iterations": int(g.timings.get("iterations", 0)),
                          "timings": {k: v for k, v in g.timings.items() if k != "iterations"}},
               "messages": messages}
    code = EXIT_INFEASIBLE if status == "infeasible" else EXIT_FAILURE
    candidates = pd.DataFrame([{**{f"count_{z}": c.counts[z] for z in g.ids}, "annual_cost": c.annual_cost,
                                "status": c.status, "seconds": c.seconds} for c in g.candidates])
    return DesignResult(pd.DataFrame(), pd.DataFrame(), pd.DataFrame(), candidates, jsonable(summary), code,
                        g.layout, g)


def density_percent(layout: Layout, zone, count: float) -> float:
    """Membrane area of ``count`` diffusers over the zone's floor, percent."""
    return 100.0 * float(count) * layout.diffuser_type(zone.grid.type_id).membrane_area_m2 / zone.area_m2


__all__ = ["Candidate", "DesignOptions", "DesignResult", "GridDesign", "run_design", "capital_recovery_factor",
           "count_range", "density_percent",
           "grid_capital", "net_present_value", "simple_payback_years"]
