"""Diffuser-grid design over load days: ``airtaper design``.

The question: how many diffusers should each zone get? More diffusers lower the
airflow per diffuser and raise the transfer efficiency (the SOTE curves), which saves
energy every day of the year but costs money once; the grid must also carry the peak
day's oxygen demand, turn down on the minimum day and keep the mixing minimum.

Objective (money per year)::

    A(n) = CRF x capital(n) + sum_d w_d x J_d(n)

with ``capital = sum_z (cost_per_diffuser x n_z + cost_per_zone)``, ``CRF`` the capital
recovery factor, ``w_d`` the days per year of load day ``d`` (:func:`airtaper.layout.loaddays.day_layout`)
and ``J_d(n)`` the optimum of day ``d``'s own problem on the grid ``n``, exactly as
``optimize`` builds it (:class:`~airtaper.optimize.diurnal.DiurnalOptimisation`, the
tariff's cost objective: energy cost with its share of the demand charge, plus the
layout's small smoothing term in money). The blowers count as one machine at the
aggregate efficiency here (staging is a discrete choice per day that does not change the
grid question); swing zones are relaxed.

Pre-screen and periods
    Before the search every load day is screened on the layout's own periods for limits no grid of the design
    ranges can meet (:meth:`GridDesign.prescreen`; exit 3 naming the day). A design on fewer periods than the
    layout's searches the days whose basis is ``minimum_day`` (``DesignOptions.own_period_days``) on the layout's
    own periods and steps all the same: the coarse periods average the night's low flow away.

Decomposition
    The days couple only through the counts, so for given counts each day is its own
    solve (the counts are the day model's mutable Param ``diffuser_count``), warm from
    that day's solution on the nearest grid solved before, with at most
    ``DesignOptions.max_iter`` iterations and one retry from the day's baseline start (a day
    not solved so counts as not met on that grid). A start that breaks a limit (the
    minimum day's DO maximum at the grid's turndown, a grid too small for the start's
    airflow) is solved by two phases: without those limits, then the least they can be
    broken by; a grid that cannot meet them fails the day at once, with the limit and
    its least excess (:meth:`GridDesign._two_phase`). The solve's duals give the
    day's sensitivity ``dJ_d/dn_z`` (envelope theorem,
    :func:`airtaper.optimize.marginal.parameter_sensitivity`), so every evaluated grid
    comes with the gradient ``dA/dn_z = CRF x cost_per_diffuser + sum_d w_d dJ_d/dn_z``.
    The work grows linearly with the days (one solve per day per grid), and the days of
    one grid are independent (they could run in parallel; here they run in turn, each
    keeping its model for the next grid's warm start).

Continuous search
    A projected quasi-Newton search (BFGS curvature from the gradients, a box of the
    design ranges, backtracking on a failed day or too little decrease) over real counts,
    from the current grid (or the bottom, top or middle of the ranges when the current grid
    fails a day; when two failed grids each meet the day the other fails, a bisection on the
    segment between them; when none of these meets every day, a restoration by steps on the
    failed days' linearised least excesses that remember every day, :meth:`GridDesign._restore`),
    until a step moves less than half a count step.

Whole counts (a small integer search)
    From the continuous optimum rounded to the nearest step (when that grid fails a day: every
    count up, every count down, then the other corners of the box of whole steps around it,
    nearest first; :meth:`GridDesign._roundings`), each zone is moved one step in the direction its gradient says lowers the
    annual cost, the most promising first, and the first move that lowers it is taken,
    until none does. A move the gradient says raises the cost is not tried: the annual
    cost lies above its tangent where it is convex in the count (diminishing returns of
    the transfer efficiency, the turndown floor rising linearly); the tests check the
    result against exhaustive enumeration on a small case. Each count stays inside the
    density range of its diffuser type's clean-water tests (where the SOTE fit
    interpolates), at most the practical maximum density, in whole multiples of the zone's
    ``count_step`` (:func:`count_range`). Every grid evaluated is kept (``candidates``).

What holds each zone
    From the duals of every day's solve on the chosen grid: the annual value of 0.1 mg/L
    of the zone's DO minimum or of 1 % of an airflow limit (transfer: the DO minimum, the
    air per diffuser at its maximum, the valve; turndown: the air per diffuser at its
    minimum; mixing: the mixing minimum), beside each day's value of one more diffuser.

Verification and economics
    The chosen grid's schedule of every day is held inside its DO range by ``optimize``'s
    back-off, with its rule for coarse model steps, and solved again on finer steps for that
    grid where the rounds cannot hold it (:meth:`GridDesign.verify`); the schedule reported is
    the one re-simulated by the independent simulator
    (:func:`airtaper.optimize.verify.verify_day`). The layout's current grid is evaluated
    the same way (counts fixed) for the comparison: payback = extra capital / annual
    saving, net present value of the saving over the grid's life at the interest rate
    minus the extra capital (capital of a grid = the cost of installing it new). A current
    grid that cannot meet a load day is compared on the days it meets, the same days on
    both sides, and the day and limit it breaks are named: a grid that breaks a limit on a
    day has no energy cost there to save from (its operation would be a different plant's),
    and leaving the day out of both sides states what the retrofit saves where both grids
    run within the limits.
"""

from __future__ import annotations

import itertools
import math
import time
from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd
import pyomo.environ as pyo

from airtaper.errors import EXIT_FAILURE, EXIT_INFEASIBLE, EXIT_OK, EXIT_UNVERIFIED, ModelError
from airtaper.layout.loaddays import day_layout, layout_days, with_grid_counts
from airtaper.layout.types import Layout
from airtaper.optimize.attempts import LADDER
from airtaper.optimize.backoff import hold_do, refined_steps_per_period
from airtaper.optimize.diurnal import DiurnalOptimisation, StudyOptions, model_steps_per_period
from airtaper.optimize.elastic import REPORT_THRESHOLD
from airtaper.optimize.horizon import with_periods
from airtaper.optimize.marginal import STEP_mg_L, limit_derivative, parameter_sensitivity
from airtaper.optimize.prescreen import count_range_findings
from airtaper.optimize.problem import LIMIT_GROUPS
from airtaper.optimize.progress import Progress, Silent
from airtaper.optimize.results import jsonable, study_tables
from airtaper.optimize.verify import verify_day
from airtaper.plant import ResolvedPlant, resolve_plant, with_diffuser_counts
from airtaper.solve.highs import solve_milp

#: A day's limit binds a zone when 0.1 mg/L (DO) or 1 % (airflow) of it is worth more than this share of the day's
#: annual cost (an interior-point dual of a limit that does not bind is many orders smaller). Common practice
#: (no source).
BINDING_SHARE = 1e-5

#: A day is started from its solution on a solved grid at most this many count steps away (summed over the zones:
#: the whole-count search's moves are one step); from further away, from its baseline start by the two phases
#: (:meth:`GridDesign._two_phase`). On the demo's minimum day a warm start from a grid 10 steps away in one zone
#: crawled (dual infeasibility 1e13 by iteration 30, 250 iterations without a verdict), its baseline start by the
#: two phases settles in about 50 iterations on every grid tried. Common practice (no source).
WARM_STEPS = 2.0

#: The restoration's step aims up to this many times as far as the linearised excesses say (they flatten towards
#: zero: a step to exactly zero falls short; on the demo a step aimed 1.5 times removed about half the excess), as
#: far as the other days' linearisations allow (:meth:`GridDesign._restoration_step`). Common practice (no source).
RESTORE_AIM = 1.5

#: A day's start breaks a limit when it leaves it by more than this share of the bound (at least of 1: mg/L, Sm3/h,
#: kPa): the day is then solved by two phases (:meth:`GridDesign._two_phase`). Common practice (no source): far
#: below the verification's tolerances, far above Ipopt's.
PHASE_ONE_TOLERANCE = 1e-3


def _bound(c) -> float:
    """The bound of a one-sided limit (the upper one where both are given)."""
    return float(pyo.value(c.upper) if c.has_ub() else pyo.value(c.lower))


def _excess(c) -> float:
    """How far a constraint's current point breaks its bounds, in the constraint's units (0 when met)."""
    body = pyo.value(c.body, exception=False)
    if body is None:
        return 0.0
    low = pyo.value(c.lower) - body if c.has_lb() else 0.0
    high = body - pyo.value(c.upper) if c.has_ub() else 0.0
    return max(low, high, 0.0)


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
    """Years for the saving to repay the extra capital; 0 when nothing more is spent and nothing is lost a year;
    None when there is no payback: more spent and nothing saved, or less spent and more paid every year (the
    reverse trade: the capital saved once is eaten by the running cost, :func:`payback_text` says it)."""
    if extra_capital <= 0.0:
        return 0.0 if annual_saving >= 0.0 else None
    if annual_saving <= 0.0:
        return None
    return extra_capital / annual_saving


def payback_text(extra_capital: float, annual_saving: float) -> str:
    """The payback of :func:`simple_payback_years` in words, saying why there is none."""
    years = simple_payback_years(extra_capital, annual_saving)
    if years is not None:
        return "none needed: no extra capital and no extra running cost" if years == 0.0 else f"{years:.1f} years"
    if extra_capital <= 0.0:
        return ("no payback: the design is cheaper to build but dearer to run (the capital saved once is spent again "
                "on energy, the net present value says how soon)")
    return "no payback: the design costs more to build and saves nothing a year"


def grid_capital(capital, counts: dict[str, float]) -> float:
    """Capital of installing the grids ``counts`` (zone -> diffusers) new, in the tariff's currency.

    ``capital``: the plant's capital costs (:attr:`airtaper.plant.ResolvedPlant.capital`).
    """
    return sum(capital.cost_per_diffuser * float(n) + capital.cost_per_zone for n in counts.values())


@dataclass
class DesignOptions:
    """Choices of a design (None: the layout's value)."""

    n_periods: int | None = None  # design on another diurnal grid (optimize.horizon.with_periods)
    steps_per_period: int | None = None
    verify: bool = True
    # the chosen grid's day schedules held inside their DO ranges between the model's time points before they are
    # verified (the back-off rounds of ``optimize``, GridDesign.verify)
    hold_do: bool = True
    # a design on other periods than the layout's (``n_periods``): the chosen grid's days are solved again on the
    # layout's own periods, counts fixed, and those schedules held and verified (GridDesign.verify)
    verify_layout_periods: bool = True
    max_moves: int = 20  # improving moves of the whole-count search at most
    # whole-count grids tried around the continuous optimum for one meeting every day (GridDesign._roundings).
    # Common practice (no source): 8 of the 32 corners of five zones' boxes, the nearest ones.
    max_roundings: int = 8
    max_continuous: int = 12  # grids evaluated by the continuous search at most
    # Ipopt iterations of a day's solve on a grid (and of its one retry from the baseline start); a day not solved
    # within them counts as not met on that grid. Common practice (no source): a warm day converges in tens.
    max_iter: int = 200
    ipopt_options: dict = field(default_factory=dict)
    # a design on fewer periods than the layout's (``n_periods``): the load days (ids) designed on the layout's own
    # periods and steps all the same; None: the days whose basis is "minimum_day". The coarse periods average the
    # night's low flow and load with the hours around them: on the demo's six 4-hour periods the minimum day's grid
    # met Z6's DO maximum that the same grid broke by 0.29 mg/L at the least on the layout's 24 hourly periods.
    own_period_days: tuple[str, ...] | None = None
    # before the search, every load day screened for limits no grid of the design ranges can meet
    # (:func:`airtaper.optimize.prescreen.count_range_findings`); a day that fails ends the design (exit 3)
    prescreen: bool = True


@dataclass
class DaySolve:
    """One load day solved on one grid (module notes)."""

    status: str
    goal: float | None = None  # the day's cost (energy cost and its share of the demand charge)
    objective: float | None = None  # the day's own objective in money: goal + reference x smoothing term
    gradient: np.ndarray | None = None  # d objective / d count of every zone, money per diffuser
    state: np.ndarray | None = None  # the day's variable values at the solution
    ipopt_s: float = 0.0
    iterations: int = 0
    reason: str | None = None  # why the grid cannot meet the day (the limit and its least excess), when known
    excess: float | None = None  # the least sum of the broken limits' slacks (phase two), when the day failed so
    excess_gradient: np.ndarray | None = None  # its derivative by the count of every zone, per diffuser

    @property
    def ok(self) -> bool:
        return self.goal is not None


@dataclass
class Candidate:
    counts: dict[str, float]  # whole counts (int) for a whole-count grid, floats for the continuous search
    annual_cost: float | None  # CRF x capital + weighted day costs; None: a day's limits cannot be met
    status: str
    seconds: float
    objective: float | None = None  # what the search minimises: CRF x capital + weighted day objectives
    gradient: dict[str, float] | None = None  # d objective / d count, money per year per diffuser
    whole: bool = True
    failed_day: str | None = None  # the load day whose limits the grid cannot meet (or whose solve failed)
    reason: str | None = None  # the limit that day cannot meet on the grid and its least excess, when known
    excess: float | None = None  # that day's least excess (the sum of the broken limits' slacks), when known


class GridDesign:
    """The decomposed design of one layout over its load days (module notes)."""

    def __init__(self, layout: ResolvedPlant | Layout, options: DesignOptions | None = None,
                 progress: Progress | None = None):
        if isinstance(layout, ResolvedPlant):  # its input: each load day's and each grid's plant is made from it
            layout = layout.layout
        self.options = options or DesignOptions()
        source = layout
        if self.options.n_periods is not None and self.options.n_periods != layout.horizon.n_periods:
            layout = with_periods(layout, self.options.n_periods)
        self.source = source  # the layout on its own periods: the chosen grid's days are verified there
        self.layout = layout  # the boundary: each load day's layout and a grid's counts are set on it, then resolved
        self.plant = resolve_plant(layout)
        if self.plant.capital is None or self.plant.tariff is None:
            raise ModelError("a design needs the layout's [capital] costs and [tariff]")
        self.progress = progress or Silent()
        self.days = layout_days(layout)
        self.source_days = layout_days(source)  # the same days with their per-period values on the layout's periods
        # the days designed on the layout's own periods (DesignOptions.own_period_days)
        self.own_periods: set[str] = set()
        if source is not layout:
            wanted = self.options.own_period_days
            ids = [d.id for d in self.days]
            if wanted is None:
                wanted = [d.id for d in self.days if d.basis == "minimum_day"]
            unknown = [d for d in wanted if d not in ids]
            if unknown:
                raise ModelError(f"own_period_days: no load day {unknown[0]!r} (the layout's days: {', '.join(ids)})")
            self.own_periods = set(wanted)
        self.zones = list(self.plant.diffused)  # DiffusedZone: type, count step, design count range
        if not self.zones:
            raise ModelError("the layout has no diffuser grids to design")
        self.capital = self.plant.capital
        self.ids = [z.id for z in self.zones]
        self.steps = np.array([float(z.count_step) for z in self.zones])
        self.ranges = {z.id: z.count_range for z in self.zones}
        self.current = {d.id: d.diffusers for d in self.plant.diffused}
        self.crf = capital_recovery_factor(self.capital.interest_rate, self.capital.life_years)
        self.studies: list[DiurnalOptimisation] = []
        self._vars: list[list] = []
        self.timings: dict[str, float] = {}
        self.candidates: list[Candidate] = []
        self._solved: dict[tuple, list[DaySolve]] = {}  # grid key -> every day's solve
        self._failures = [0] * len(self.days)  # grids each day could not be solved on
        self._started: set[int] = set()  # days solved once (their model no longer holds the baseline start)
        self.relaxed: dict[str, float] | None = None  # the continuous optimum
        self.relaxed_candidate: Candidate | None = None
        self.day_results: list | None = None  # the days' solver results at the loaded grid (duals)
        self.notes: list[str] = []  # what the verification did beyond the back-off (the summary's messages)
        self.refined: dict[str, str] = {}  # load day -> where it was solved again (finer steps, the layout's periods)

    # --- building ---------------------------------------------------------------------------
    def build(self) -> None:
        """One study per load day, each with its own model and its counts as the model's Param."""
        t0 = time.perf_counter()
        opts = StudyOptions(objective="cost", staging=False, steps_per_period=self.options.steps_per_period,
                            ipopt_options=dict(self.options.ipopt_options))
        for i, (day, own) in enumerate(zip(self.days, self.source_days), start=1):
            self.progress.phase(f"load day {day.id}: baseline and model ({i} of {len(self.days)})")
            if day.id in self.own_periods:  # the layout's own periods and steps (DesignOptions.own_period_days)
                st = DiurnalOptimisation(day_layout(self.source, own), replace(opts, steps_per_period=None),
                                         self.progress)
            else:
                st = DiurnalOptimisation(day_layout(self.layout, day), opts, self.progress)
            st.build()
            self.studies.append(st)
            self._vars.append(self._variables(st))
        self.timings["build_s"] = time.perf_counter() - t0

    @staticmethod
    def _variables(st) -> list:
        """Every variable of a day's model, in the order of its saved states (:attr:`DaySolve.state`)."""
        return list(st.m.component_data_objects(pyo.Var, descend_into=True))

    def _replace_study(self, i: int, st) -> None:
        """Day ``i``'s study replaced by one solved again (finer steps, the layout's periods): its variables too,
        so no later warm start or :meth:`load` writes a state into the old model's variables."""
        self.studies[i] = st
        self._vars[i] = self._variables(st)
        for solves in self._solved.values():  # states of the old model: not a start for the new one
            if len(solves) > i and solves[i].state is not None:
                solves[i] = replace(solves[i], state=None)

    def prescreen(self) -> dict:
        """Every load day screened on the layout's own periods for limits no grid of the design ranges can meet
        (:func:`airtaper.optimize.prescreen.count_range_findings`): ``{"feasible", "seconds", "days": {day id:
        {"feasible", "findings", "seconds", "note"}}}``."""
        t0 = time.perf_counter()
        lowest = {z: lo for z, (lo, _hi) in self.ranges.items()}
        highest = {z: hi for z, (_lo, hi) in self.ranges.items()}
        days = {}
        for day in self.source_days:
            self.progress.phase(f"load day {day.id}: pre-screen of the design ranges")
            days[day.id] = count_range_findings(resolve_plant(day_layout(self.source, day)), lowest, highest)
        out = {"feasible": all(d["feasible"] for d in days.values()), "seconds": time.perf_counter() - t0,
               "days": days}
        self.timings["prescreen_s"] = out["seconds"]
        return out

    # --- one grid: every day on its own -------------------------------------------------------
    def _key(self, counts: dict[str, float]) -> tuple:
        return tuple(round(float(counts[z]), 6) for z in self.ids)

    def _nearest_state(self, i: int, counts: dict[str, float]) -> np.ndarray | None:
        """Day ``i``'s solution on the solved grid nearest ``counts``, when it is within :data:`WARM_STEPS` count
        steps (summed over the zones); None otherwise."""
        x = np.array([float(counts[z]) for z in self.ids]) / self.steps
        best, dist = None, math.inf
        for key, solves in self._solved.items():
            if len(solves) > i and solves[i].ok and solves[i].state is not None:
                d = float(np.abs(np.array(key) / self.steps - x).sum())
                if d < dist:
                    best, dist = solves[i].state, d
        return best if dist <= WARM_STEPS else None

    @staticmethod
    def _broken_limits(st) -> list:
        """The limits (:data:`airtaper.optimize.problem.LIMIT_GROUPS`: DO range, effluent, airflow per diffuser,
        mixing, valve, blowers) the day's current point breaks by more than :data:`PHASE_ONE_TOLERANCE` of the
        bound (at least of 1): their groups."""
        b, out = st.m.opt, []
        for group in LIMIT_GROUPS:
            con = b.component(group.name)
            if con is None or not con.active:
                continue
            for c in con.values():
                if _excess(c) > PHASE_ONE_TOLERANCE * max(1.0, abs(_bound(c))):
                    out.append(group)
                    break
        return out

    @staticmethod
    def _least_excess_objective(m):
        """Phase two's objective on the day's model ``m``: the sum of every limit's slack, built once and kept
        (deactivated between its solves).

        The slacks of the limits a phase-two solve does not free stay fixed at zero, so one objective serves every
        set of broken limits; the bridge converts a model once per set of active components and objective
        (:func:`airtaper.solve.nlp.get_structure`), so a persistent objective is converted once per model and
        reused (a new one each call was converted each time: 0.75 s a call on the demo's 6-period day).
        """
        b = m.opt
        least = b.component("least_excess_objective")
        if least is None:
            least = pyo.Objective(expr=sum(v for g in LIMIT_GROUPS if b.component(g.slack) is not None
                                           for v in b.component(g.slack).values()))
            b.least_excess_objective = least
            suffix = m.component("scaling_factor")
            if suffix is not None:
                suffix[least] = 1.0
            least.deactivate()
        return least

    @staticmethod
    def _least_excess(st, rung, groups, params) -> tuple[str | None, object, float, np.ndarray | None]:
        """How little the day can break the limits ``groups`` on this grid, from the current point:
        (the limit, zone and least excess when it cannot meet them, else None; the Ipopt result; the least sum of
        the slacks; its derivative by the Params ``params``, the diffuser counts, from the duals).

        Phase two of :meth:`_two_phase`: each limit's slack (the elastic solve's: mg/L, or a fraction of an
        airflow limit) is freed at the point's own excess and the day's objective is replaced by the sum of those
        slacks, every other limit and the model's equations held; the slacks are fixed at zero and the objective
        restored afterwards. A slack above the elastic solve's ``REPORT_THRESHOLD`` is a limit not met.
        """
        m, b = st.m, st.m.opt
        slacks = [(g, b.component(g.slack), b.component(g.name)) for g in groups]
        for _g, var, con in slacks:
            for k, v in var.items():
                v.unfix()
                v.set_value(0.0)
                c = con[k] if k in con else None
                if c is None or _excess(c) <= 0.0:
                    continue
                # every limit is linear in its own slack: the slack that meets it at this point
                at0 = pyo.value(c.body)
                v.set_value(1.0)
                rate = abs(pyo.value(c.body) - at0)
                v.set_value(0.0)
                if rate > 0.0:
                    v.set_value(_excess(c) / rate)
        least = GridDesign._least_excess_objective(m)
        b.objective.deactivate()
        least.activate()
        try:
            r = st._ipopt(rung)
            total = float(pyo.value(least))
            grad = np.array(parameter_sensitivity(m, r, params)) if r.ok else None
            found = []
            for g, var, _con in slacks:
                unit = g.unit
                for k, v in var.items():
                    if v.value is not None and v.value > REPORT_THRESHOLD[unit]:
                        where = k[0] if g.index == "zone_period" else k[-1] if isinstance(k, tuple) else k
                        found.append((float(v.value) / REPORT_THRESHOLD[unit], g, where, float(v.value)))
        finally:
            for _g, var, _c in slacks:
                for v in var.values():
                    v.fix(0.0)
            least.deactivate()
            b.objective.activate()
        if not r.ok or not found:
            return None, r, total, grad
        _, g, where, value = max(found, key=lambda f: f[0])
        amount = f"{100 * value:.3g} %" if g.unit == "fraction" else f"{value:.3g} {g.unit}"
        return f"{g.text}{f' ({where})' if where is not None else ''} broken by {amount} at the least", r, total, grad

    def _two_phase(self, st, rung, start: str) -> tuple[list, str | None, tuple | None]:
        """The day solved from ``start`` ("warm": the point set, "first": the baseline start set by the build,
        "restart": the baseline start again): (every Ipopt result, the last the day's; the reason the grid cannot
        meet the day, or None; (least excess, its gradient by the counts) when the grid fails the day).

        Where the start breaks a limit (on the minimum day the baseline's uniform DO control at the grid's
        turndown airflow leaves a DO maximum by 1.6 mg/L on the demo; a smaller grid than the start's cannot pass
        its airflow), Ipopt from there crawled (steps of 1e-4, the dual infeasibility at 1e14, 400 iterations
        without a verdict on the demo's own grid, which cannot hold that maximum). So, as a simplex method's two
        phases do: phase one solves the day without the limits its start breaks (the model's equations and every
        other limit, 15 iterations there); phase two minimises how far those limits are broken from there
        (:meth:`_least_excess`, about 20 iterations). When they cannot all be met the grid fails the day, with the
        limit and the least excess found (a local verdict, like Ipopt's own); otherwise the day is solved with
        every limit from that point, which meets them all.
        """
        if start == "restart":
            st._restart(rung)
        elif start == "first":
            st._free_decisions()
        broken = self._broken_limits(st)
        runs = []
        if broken:
            cons = [st.m.opt.component(g.name) for g in broken]
            for con in cons:
                con.deactivate()
            try:
                runs.append(st._ipopt(rung))
            finally:
                for con in cons:
                    con.activate()
            if runs[-1].ok:
                params = [st.m.diffuser_count[z] for z in self.ids]
                reason, r, excess, grad = self._least_excess(st, rung, broken, params)
                runs.append(r)
                if reason is not None:
                    return runs, reason, (excess, grad)
            if not runs[-1].ok:  # the phases found no point: the day is not solved from this start
                return runs, None, None
        runs.append(st._ipopt(rung))
        return runs, None, None

    def _solve_day(self, i: int, counts: dict[str, float]):
        """Day ``i`` on the grid ``counts``, warm from its solution on the nearest solved grid: (DaySolve, result)."""
        st, m = self.studies[i], self.studies[i].m
        self.progress.phase(f"load day {self.days[i].id} on the grid")
        for z in self.ids:
            m.diffuser_count[z] = float(counts[z])
        warm = self._nearest_state(i, counts)
        rungs = [replace(rung, options={**rung.options, "max_iter": self.options.max_iter}) for rung in LADDER[:2]]
        if warm is not None:
            for v, val in zip(self._vars[i], warm):
                if not v.fixed:
                    v.set_value(float(val), skip_validation=True)
        # warm from the nearest grid's solution, else from the day's baseline start (set by the build for its first
        # solve, set again after that)
        start = "warm" if warm is not None else "restart" if i in self._started else "first"
        self._started.add(i)
        runs, reason, excess = self._two_phase(st, rungs[0], start)
        r = runs[-1]
        if reason is None and not r.ok:  # once more from the day's baseline start
            more, reason, excess = self._two_phase(st, rungs[1], "restart")
            runs += more
            r = runs[-1]
        ipopt_s, iters = sum(x.timings.ipopt_s for x in runs), sum(x.iterations for x in runs)
        if reason is not None:
            self.progress.phase(f"load day {self.days[i].id} cannot be met on the grid: {reason}")
            return DaySolve("infeasible", ipopt_s=ipopt_s, iterations=iters, reason=reason, excess=excess[0],
                            excess_gradient=excess[1]), r
        if not r.ok:
            return DaySolve(r.status.value, ipopt_s=ipopt_s, iterations=iters), r
        ref = st.reference()
        grad = ref * np.array(parameter_sensitivity(m, r, [m.diffuser_count[z] for z in self.ids]))
        state = np.array([v.value if v.value is not None else np.nan for v in self._vars[i]], dtype=float)
        return DaySolve(r.status.value, goal=float(pyo.value(m.opt.goal)),
                        objective=ref * float(pyo.value(m.opt.objective)), gradient=grad, state=state,
                        ipopt_s=ipopt_s, iterations=iters), r

    def evaluate(self, counts: dict[str, float], whole: bool = True, every_day: bool = False) -> Candidate:
        """Annual cost of the grid ``counts``: every load day's schedule optimised on it, one day at a time.

        Days are independent given the counts; they run one after the other here (each keeps its model for the
        warm starts of the next grid). ``every_day``: solve every day even after one fails (the restoration needs
        each failing day's excess); a grid evaluated before without it is solved again.
        """
        key = self._key(counts)
        for c in self.candidates:
            if self._key(c.counts) == key and (c.objective is not None or not every_day):
                return c
        if not self.studies:
            self.build()
        t0 = time.perf_counter()
        self.progress.phase("grid " + ", ".join(f"{z} {counts[z]:.6g}" for z in self.ids))
        n = len(self.days)
        solves, results = [None] * n, [None] * n
        failed = None
        # a day that failed a grid before is solved first, then the rarest days (the peak and minimum days, which
        # set the limits of a grid): a grid that fails one of them is ruled out sooner
        for i in sorted(range(n), key=lambda k: (-self._failures[k], self.days[k].days_per_year)):
            s, r = self._solve_day(i, counts)
            solves[i], results[i] = s, r
            self.timings["ipopt_s"] = self.timings.get("ipopt_s", 0.0) + s.ipopt_s
            self.timings["iterations"] = self.timings.get("iterations", 0) + s.iterations
            self.timings["day_solves"] = self.timings.get("day_solves", 0) + 1
            if not s.ok:  # a day that cannot be met rules the grid out: the other days need not be solved
                self._failures[i] += 1
                failed = self.days[i].id if failed is None else failed
                if not every_day:
                    break
        self._solved[key] = [s if s is not None else DaySolve("not solved") for s in solves]
        cand_counts = {z: (int(round(counts[z])) if whole else float(counts[z])) for z in self.ids}
        if all(s is not None and s.ok for s in solves):
            cap = self.crf * grid_capital(self.capital, counts)
            w = np.array([d.days_per_year for d in self.days])
            grad = self.crf * self.capital.cost_per_diffuser + sum(
                wd * s.gradient for wd, s in zip(w, solves))
            cand = Candidate(cand_counts, cap + float(sum(wd * s.goal for wd, s in zip(w, solves))), "optimal",
                             time.perf_counter() - t0, objective=cap + float(sum(
                                 wd * s.objective for wd, s in zip(w, solves))),
                             gradient=dict(zip(self.ids, map(float, grad))), whole=whole)
            self.day_results = results
        else:
            bad = solves[next(k for k, d in enumerate(self.days) if d.id == failed)]  # the first day that failed
            cand = Candidate(cand_counts, None, bad.status, time.perf_counter() - t0, whole=whole, failed_day=failed,
                             reason=bad.reason, excess=bad.excess)
        self.candidates.append(cand)
        return cand

    def load(self, counts: dict[str, int], days: list[int] | None = None) -> None:
        """Put the solved state of an evaluated grid back into every day's model (``days``: those days' only, by
        index), with its duals (a warm re-solve from the solution: a few iterations); the days' results
        (:attr:`day_results`) are set when every day is loaded."""
        key = self._key(counts)
        days = list(range(len(self.days))) if days is None else list(days)
        if key not in self._solved or not all(self._solved[key][i].ok for i in days):
            raise ModelError("load: the grid was not solved on every day asked")
        results = []
        for i in days:
            s = self._solved[key][i]
            if s.state is None:
                raise ModelError(f"load day {self.days[i].id}: its model was replaced (solved again on other "
                                 "periods or steps): the grid's state is not its own")
            st, m = self.studies[i], self.studies[i].m
            for z in self.ids:
                m.diffuser_count[z] = float(counts[z])
            for v, val in zip(self._vars[i], s.state):
                if not v.fixed:
                    v.set_value(float(val), skip_validation=True)
            r = st._ipopt(LADDER[0])
            if not r.ok:
                raise ModelError(f"load day {self.days[i].id}: the re-solve on its own solution failed ({r.message})")
            results.append(r)
        self.day_results = results if len(days) == len(self.days) else None

    # --- the continuous search (counts real) ------------------------------------------------------
    def solve_relaxed(self, start: dict[str, float] | None = None) -> Candidate | None:
        """The continuous optimum of the counts (module notes), from ``start`` (default: the current grid);
        None when no start grid meets every day."""
        lo = np.array([self.ranges[z][0] for z in self.ids], dtype=float)
        hi = np.array([self.ranges[z][1] for z in self.ids], dtype=float)
        s = self.steps

        def grid(x):
            return dict(zip(self.ids, map(float, x)))

        first = start if start is not None else self.current
        # when the first start fails a day: the bottom of the ranges (a turndown or DO maximum fails with too many
        # diffusers), then the top (a transfer limit fails with too few), then the middle
        starts = [np.clip([first[z] for z in self.ids], lo, hi), lo, hi, 0.5 * (lo + hi)]
        c, x, tried = None, None, []
        for x0 in starts:
            x0 = np.array(x0, dtype=float)
            c = self.evaluate(grid(x0), whole=all(float(v).is_integer() for v in x0))
            if c.objective is not None:
                x = x0
                break
            tried.append((x0, c))
            found = self._between(tried, grid)
            if found is not None:
                x, c = found
                break
        if x is None:
            found = self._restore(grid, lo, hi)
            if found is None:
                return None
            x, c = found
        # scaled coordinates: one unit is one count step
        u, g = x / s, np.array([c.gradient[z] for z in self.ids]) * s
        ulo, uhi = lo / s, hi / s
        radius = np.maximum(0.25 * (uhi - ulo), 1.0)
        H = np.diag(np.maximum(np.abs(g), 1e-12) / radius)
        f = c.objective
        for _ in range(self.options.max_continuous - 1):
            free = ~(((u <= ulo + 1e-9) & (g > 0)) | ((u >= uhi - 1e-9) & (g < 0)))
            if not free.any() or np.max(np.abs(g[free])) < 1e-7 * abs(f):
                break  # a step changes the annual cost by less than 1e-7 of it
            d = np.zeros_like(u)
            d[free] = -np.linalg.solve(H[np.ix_(free, free)], g[free])
            d = np.clip(d, -radius, radius)
            accepted = False
            for _half in range(4):
                u_new = np.clip(u + d, ulo, uhi)
                step = u_new - u
                if np.max(np.abs(step)) < 0.05:  # below a twentieth of a count step: converged
                    break
                c_new = self.evaluate(grid(u_new * s), whole=False)
                if c_new.objective is not None and c_new.objective <= f + 1e-4 * float(g @ step):
                    accepted = True
                    break
                d = 0.5 * d
            if not accepted:
                break
            g_new = np.array([c_new.gradient[z] for z in self.ids]) * s
            y = g_new - g
            if float(y @ step) > 1e-12 * abs(f):  # BFGS update of the curvature
                Hs = H @ step
                H = H - np.outer(Hs, Hs) / float(step @ Hs) + np.outer(y, y) / float(y @ step)
            u, g, f, c = u_new, g_new, c_new.objective, c_new
            if np.max(np.abs(step)) < 0.5:  # moved by less than half a step: the whole-count search takes over
                break
        self.relaxed = dict(zip(self.ids, map(float, u * s)))
        self.relaxed_candidate = c
        return c

    def _cuts(self) -> dict[int, tuple[np.ndarray, float, np.ndarray]]:
        """Per load day that failed a grid: its least excess linearised at the grid where it was least (phase two
        of :meth:`_two_phase`, the gradient by the counts from the duals): day -> (the grid in count steps, the
        excess, its gradient per count step). The linearisation nearest the boundary is the one to trust: where the
        excess saturates (the DO maximum's excess with every zone at 800 diffusers) the tangent is flat and asks
        for a move far beyond the one that meets the limit."""
        out: dict[int, tuple] = {}
        for key, solves in self._solved.items():
            u = np.array(key) / self.steps
            for i, d in enumerate(solves):
                if (d.excess is not None and d.excess_gradient is not None and np.any(d.excess_gradient)
                        and (i not in out or d.excess < out[i][1])):
                    out[i] = (u, float(d.excess), np.asarray(d.excess_gradient, dtype=float) * self.steps)
        return out

    def _restoration_step(self, x: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> np.ndarray | None:
        """The grid nearest ``x`` (fewest count steps moved, summed over the zones) where every day's linearised
        excess (:meth:`_cuts`) is zero, aimed up to :data:`RESTORE_AIM` times as far as the linearisations say
        (as far as the other days' linearisations allow): two linear programmes in HiGHS, the aim then the step.
        None when the linearisations of the days cannot all be met inside the design ranges."""
        cuts = list(self._cuts().values())
        if not cuts:
            return None
        s, n = self.steps, len(self.ids)
        m = pyo.ConcreteModel(name="restoration")
        m.u = pyo.Var(range(n), bounds=lambda _m, i: (float(lo[i] / s[i]), float(hi[i] / s[i])))
        m.t = pyo.Var(range(n), bounds=(0.0, None))  # |u - x| per zone, in count steps
        m.aim = pyo.Var(bounds=(0.0, RESTORE_AIM - 1.0))  # how much further than the linearisation the step aims
        m.cut = pyo.ConstraintList()
        for u0, e, g in cuts:  # (1 + aim) e + g.(u - u0) <= 0
            m.cut.add(e * (1.0 + m.aim) + sum(float(g[i]) * (m.u[i] - float(u0[i])) for i in range(n)) <= 0.0)
        u_now = x / s
        m.up = pyo.Constraint(range(n), rule=lambda _m, i: _m.t[i] >= _m.u[i] - float(u_now[i]))
        m.down = pyo.Constraint(range(n), rule=lambda _m, i: _m.t[i] >= float(u_now[i]) - _m.u[i])
        m.goal = pyo.Objective(expr=m.aim, sense=pyo.maximize)
        if not solve_milp(m).has_solution:
            return None
        m.aim.fix(float(m.aim.value))
        m.goal.deactivate()
        m.moved = pyo.Objective(expr=sum(m.t[i] for i in range(n)))
        if not solve_milp(m).has_solution:
            return None
        return np.array([float(m.u[i].value) for i in range(n)]) * s

    def _restore(self, grid, lo: np.ndarray, hi: np.ndarray, rounds: int = 8) -> tuple | None:
        """A grid meeting every day, by steps on linearised least excesses that remember every day (a
        sequential linear programme): each day that failed a grid gives its least excess linearised at the grid
        where it was least (:meth:`_cuts`), and the next grid is the nearest one where every such linearisation is
        met, aimed further (:meth:`_restoration_step`); every day is solved there. A day met now but failed
        before keeps its linearisation, so a step for the peak day does not undo the minimum day. A grid whose day
        ends without a verdict (not converged) is replaced by the point halfway back. None when no day has an
        excess, the linearisations cannot all be met in the design ranges, or ``rounds`` grids fail.

        On the demo the ends of the ranges and the segments between them fail: the minimum day holds its DO
        maximum only with few diffusers behind the head of the train (its night air sits on the mixing minimum in
        Z5 and Z6 and on the diffuser minimum in Z4), the peak day needs many at the head: 591/523/401/340/340
        misses the peak day by 0.4 % of Z2's air per diffuser, 700/500/400/340/340 the minimum day by 0.018 mg/L,
        600/520/400/340/340 meets both. Newton steps on one grid's failing days overshot from one side to the other
        and forgot the side they came from.
        """
        cuts = self._cuts()
        if not cuts:
            return None
        # from the grid the linearisations put nearest to meeting its day (excess over slope: count steps)
        u0, _e, _g = min(cuts.values(), key=lambda c: c[1] / max(float(np.linalg.norm(c[2])), 1e-300))
        x = u0 * self.steps
        for _ in range(rounds):
            x_new = self._restoration_step(x, lo, hi)
            if x_new is None or np.max(np.abs(x_new - x) / self.steps) < 0.05:
                return None
            c = self.evaluate(grid(x_new), whole=False, every_day=True)
            if c.objective is not None:
                return x_new, c
            if all(d.ok or d.excess is not None for d in self._solved[self._key(grid(x_new))]):
                x = x_new
            else:  # a day without a verdict there: nothing learnt; halfway back next
                x = x + 0.5 * (x_new - x)
                c = self.evaluate(grid(x), whole=False, every_day=True)
                if c.objective is not None:
                    return x, c
        return None

    def _between(self, tried: list, grid) -> tuple | None:
        """A grid meeting every day on the segment between two failed grids whose failed days are met on the other
        one (the minimum day met by few diffusers, the peak day by many): bisection on the segment, towards the
        end whose day failed less far from it. None when no such pair or no such grid."""
        index = {d.id: i for i, d in enumerate(self.days)}

        def met(c, day_id):
            solves = self._solved.get(self._key(c.counts))
            return bool(solves) and solves[index[day_id]].ok

        for k in reversed(range(len(tried) - 1)):  # the nearest earlier grid first
            a, ca = tried[k]
            b, cb = tried[-1]
            if not (ca.failed_day and cb.failed_day and ca.failed_day != cb.failed_day
                    and met(cb, ca.failed_day) and met(ca, cb.failed_day)):
                continue
            lo, hi = 0.0, 1.0  # 0: a (fails ca.failed_day), 1: b (fails cb.failed_day)
            for _ in range(6):
                t = 0.5 * (lo + hi)
                x = a + t * (b - a)
                c = self.evaluate(grid(x), whole=False)
                if c.objective is not None:
                    return x, c
                if c.failed_day == ca.failed_day:
                    lo = t
                elif c.failed_day == cb.failed_day:
                    hi = t
                else:
                    break
        return None

    # --- whole counts ----------------------------------------------------------------------------
    def _nearest(self, rounding=round) -> dict[str, int]:
        out = {}
        for z in self.zones:
            step = z.count_step
            lo, hi = self.ranges[z.id]
            out[z.id] = int(min(max(step * rounding(self.relaxed[z.id] / step), lo), hi))
        return out

    def _roundings(self) -> list[dict[str, int]]:
        """The whole-count grids to start the neighbour search from, in order: the continuous optimum rounded to the
        nearest steps, every count up, every count down, then the other corners of the box of whole steps around it
        (each count rounded down or up), nearest first, at most :attr:`DesignOptions.max_roundings` in all.

        Where the grids meeting every day form a thin set (on the demo the minimum day's DO maximum and the peak
        day's transfer leave a band a few count steps wide), the corner nearest the continuous optimum can fail a
        day while another corner meets them all."""
        out = []
        for rounding in (round, math.ceil, math.floor):  # when the nearest grid fails a day: up, then down
            counts = self._nearest(rounding)
            if counts not in out:
                out.append(counts)
        corners = [dict(zip(self.ids, c)) for c in itertools.product(
            *[sorted({self._nearest(math.floor)[z], self._nearest(math.ceil)[z]}) for z in self.ids])]
        steps = dict(zip(self.ids, self.steps))
        corners.sort(key=lambda c: sum(((c[z] - self.relaxed[z]) / steps[z]) ** 2 for z in self.ids))
        out += [c for c in corners if c not in out]
        return out[:max(self.options.max_roundings, 1)]

    def _better(self, c: Candidate, best: Candidate) -> bool:
        return c.objective is not None and c.objective < best.objective - 1e-9 * abs(best.objective)

    def search(self) -> Candidate | None:
        """Whole counts by the neighbour search from the rounded continuous optimum (module notes)."""
        if self.relaxed is None:
            raise ModelError("solve the relaxed design first")
        best = None
        for counts in self._roundings():
            best = self.evaluate(counts)
            if best.objective is not None:
                break
        if best is None or best.objective is None:
            return None
        for _ in range(self.options.max_moves):
            moves = []
            for z in self.zones:
                for sign in (1, -1):
                    n = best.counts[z.id] + sign * z.count_step
                    if not self.ranges[z.id][0] <= n <= self.ranges[z.id][1]:
                        continue
                    predicted = best.gradient[z.id] * sign * z.count_step
                    # the annual cost lies above its tangent (convex in the count): a move the gradient says
                    # raises it cannot lower it
                    if predicted > 1e-9 * abs(best.objective):
                        continue
                    moves.append((predicted, dict(best.counts, **{z.id: n})))
            moved = False
            for _pred, counts in sorted(moves, key=lambda m: m[0]):
                c = self.evaluate(counts)
                if self._better(c, best):
                    best, moved = c, True
                    break
            if not moved:
                break
        return best

    # --- results of the loaded grid -----------------------------------------------------------
    def day_figures(self, days: list[int] | None = None) -> list[dict]:
        """Per load day (``days``: their indices; default every one) at the models' current state: energy, cost,
        effluent, schedule."""
        out = []
        for i, (day, st) in enumerate(zip(self.days, self.studies)):
            if days is not None and i not in days:
                continue
            out.append({"day": day, "study": st, "energy_kWh_per_day": st.energy_kWh_per_day(),
                        "cost_per_day": float(pyo.value(st.m.opt.goal)), "figures": st.figures(),
                        "schedule": st.schedule_by_zone()})
        return out

    def binding(self, counts: dict[str, int]) -> tuple[dict[str, list[str]], list[dict]]:
        """What holds each zone's grid, from the duals of every day's solve at the loaded grid.

        A day's limit in a zone binds when its dual is not zero: its annual value (the day's weight x the change
        of the day's cost) per 0.1 mg/L of a DO minimum or per 1 % of an airflow limit. Cases: transfer (the DO
        minimum, the air per diffuser at its maximum, the valve), turndown (the air per diffuser at its
        minimum), mixing (the mixing minimum). Returns (zone -> sentences, rows of binding.csv).
        """
        if self.day_results is None:
            raise ModelError("load a solved grid first")
        cur = self.plant.tariff.currency
        rows, saving = [], {}
        for day, st, r in zip(self.days, self.studies, self.day_results):
            m, b = st.m, st.m.opt
            w, ref = day.days_per_year, st.reference()
            tol = BINDING_SHARE * w * float(pyo.value(b.goal))
            value_of_one = dict(zip(self.ids, -w * ref * np.array(
                parameter_sensitivity(m, r, [m.diffuser_count[z] for z in self.ids]))))
            saving[day.id] = value_of_one

            def dual(con):
                try:
                    return float(r.dual(con))
                except KeyError:
                    return 0.0

            for z in self.ids:
                found = []
                if z in b.DO_ZONES:
                    found.append(("transfer", "DO minimum", "per 0.1 mg/L higher minimum",
                                  STEP_mg_L * limit_derivative(r, [b.do_min[t, z] for t in m.STEPS],
                                                               b.do_min_mg_L[z])))
                for name, case, text, zones in (("diffuser_max", "transfer", "air per diffuser at its maximum",
                                                 b.ZONES),
                                                ("valve_max", "transfer", "valve capacity", b.VALVE_ZONES),
                                                ("diffuser_min", "turndown", "air per diffuser at its minimum",
                                                 b.MIN_ZONES),
                                                ("mixing_min", "mixing", "mixing minimum", b.MIN_ZONES)):
                    con = b.component(name)
                    if con is None or not con.active or z not in zones:
                        continue
                    # the bound moved by 1 % of the airflow it holds (the airflow itself where it binds)
                    value = sum(dual(con[z, p]) * 0.01 * float(m.airflow_Sm3_h[z, p].value) for p in m.PERIODS)
                    found.append((case, text, "per 1 % of the limit", value))
                for case, text, per, value in found:
                    annual = w * ref * abs(value)
                    if annual > tol:
                        rows.append({"zone": z, "load_day": day.id, "case": case, "limit": text,
                                     "cost_per_year": annual, "per": per,
                                     "diffuser_saving_per_year": value_of_one[z]})
        out: dict[str, list[str]] = {}
        for z in self.ids:
            text = []
            for day in sorted(self.days, key=lambda d: -abs(saving[d.id][z])):
                mine = [row for row in rows if row["zone"] == z and row["load_day"] == day.id]
                if not mine:
                    continue
                v = saving[day.id][z]
                text.append(f"{day.id} (one more diffuser {'saves' if v >= 0 else 'costs'} {abs(v):,.3g} {cur}/year): "
                            + ", ".join(f"{row['case']} ({row['limit']}, {row['cost_per_year']:,.3g} {cur}/year "
                                        f"{row['per']})" for row in mine))
            lo, hi = self.ranges[z]
            if counts[z] <= lo:
                text.append(f"lowest count of the tested density range ({lo})")
            if counts[z] >= hi:
                text.append(f"highest count of the tested density range ({hi})")
            out[z] = text or ["energy against capital (no limit holds it)"]
        return out, rows

    def verify(self, counts: dict[str, int]) -> list[dict]:
        """Every day's schedule on the loaded grid ``counts`` re-simulated by the independent simulator; with
        :attr:`DesignOptions.hold_do`, first held inside its DO range between the model's time points by the
        back-off rounds ``optimize`` runs (:func:`airtaper.optimize.backoff.hold_do`), with ``optimize``'s rule for
        model steps longer than :data:`~airtaper.optimize.backoff.REFINED_STEP_H` (``coarse``: an excursion too
        large for the points, or one that does not shrink, ends the rounds), and where those rounds cannot hold the
        range the day solved again on the finer steps for the grid ``counts`` (:meth:`_refine`, as ``optimize``
        does). On the demo's six 4-hour periods the re-simulated DO of the chosen grid's schedules left the range by
        up to 0.9 mg/L inside the periods without the back-off (Z6 above its maximum at night, Z2-Z5 below their
        minimum), and the back-off re-solves on the 2-hour steps failed on four of the six days. The days' studies
        and results (their duals) become those of the held or refined solves: the schedules reported are the ones
        verified."""
        if self.day_results is None:
            raise ModelError("load a solved grid first")
        out, results = [], []
        for i, (day, st, r) in enumerate(zip(self.days, self.studies, self.day_results)):
            plant = with_diffuser_counts(st.plant, counts)

            def check(st=st, plant=plant):
                return verify_day(plant, st.schedule_by_zone(), st.figures(), st.m)

            self.progress.phase(f"verifying load day {day.id}: the schedule re-simulated")
            if not self.options.hold_do:
                out.append(check()[0])
                results.append(r)
                continue
            st.result = r
            if self.options.verify_layout_periods and self.source.horizon.n_periods != plant.n_periods:
                # the day as the layout gives it (its per-period values on the layout's own periods)
                own_day = next(d for d in layout_days(self.source) if d.id == day.id)
                own = with_diffuser_counts(resolve_plant(day_layout(self.source, own_day)), counts)
                fine = self._resolve_day(i, own, None, f"on the layout's {own.n_periods} periods",
                                         f"the design's {plant.n_periods} periods")
                if fine is not None:
                    st, ver = fine
                    self._replace_study(i, st)
                else:
                    ver = check()[0]
                out.append(ver)
                results.append(st.result)
                continue
            finer = refined_steps_per_period(plant.period_h, model_steps_per_period(plant, st.options))
            hold = hold_do(st, check, self.progress, coarse=finer is not None)
            ver = hold["verification"]
            if hold["refine"]:
                step_h = plant.period_h / model_steps_per_period(plant, st.options)
                fine = self._resolve_day(
                    i, plant, hold["day"], f"on {plant.period_h / finer:g}-hour model steps",
                    f"{step_h:g}-hour steps, where the back-off could not hold the DO range ({hold['refine_reason']})",
                    finer)
                if fine is not None:
                    st, ver = fine
                    self._replace_study(i, st)
            out.append(ver)
            results.append(st.result)
        self.day_results = results
        return out

    def _resolve_day(self, i: int, plant: ResolvedPlant, start, where: str, instead: str,
                     steps_per_period: int | None = None) -> tuple | None:
        """Day ``i`` solved again for the grid of ``plant`` (its counts fixed) ``where`` (on ``steps_per_period``
        finer steps, or on the layout's own periods and steps: None): (the study, its verification), or None with a note when it gives no schedule (the
        design's schedule stays, unverified). ``start``: a simulated day to start from (None: the plant's
        uniform-DO baseline).

        Then its back-off rounds and the verification, as ``optimize`` does. The solve is the design's own
        (:meth:`_two_phase`): a coarse schedule's re-simulated day breaks the DO range it left (by up to 0.67 mg/L
        on the demo), and ``optimize``'s run from there crawled on the demo's average day (the dual infeasibility
        at 3e13 by iteration 60, 10 s an iteration at a load of 6) where the two phases settle."""
        st, day = self.studies[i], self.days[i]
        self.progress.phase(f"load day {day.id}: solved again {where} for the chosen grid")
        t0 = time.perf_counter()
        opts = replace(st.options, steps_per_period=steps_per_period)  # None: the plant's own
        same = plant.n_periods == st.plant.n_periods
        fine = DiurnalOptimisation(plant, opts, self.progress, baseline=st.run_baseline() if same else None,
                                   start=start)
        fine.build()
        rungs = [replace(rung, options={**rung.options, "max_iter": self.options.max_iter}) for rung in LADDER[:2]]
        runs, reason, _ = self._two_phase(fine, rungs[0], "first")
        if reason is None and not runs[-1].ok:
            more, reason, _ = self._two_phase(fine, rungs[1], "restart")
            runs += more
        r = runs[-1]
        self.timings["ipopt_s"] = self.timings.get("ipopt_s", 0.0) + sum(x.timings.ipopt_s for x in runs)
        self.timings["iterations"] = self.timings.get("iterations", 0) + sum(x.iterations for x in runs)
        ver = None
        if reason is None and r.ok:
            fine.result = r

            def check():
                return verify_day(plant, fine.schedule_by_zone(), fine.figures(), fine.m)

            finer = refined_steps_per_period(plant.period_h, model_steps_per_period(plant, opts))
            ver = hold_do(fine, check, self.progress, coarse=finer is not None)["verification"]
        self.timings["resolved_s"] = self.timings.get("resolved_s", 0.0) + time.perf_counter() - t0
        if ver is None:
            self.notes.append(f"load day {day.id}: solved again {where} for the chosen grid: no schedule ("
                              + (reason or f"the solver: {r.message}") + f"); the schedule on {instead} is "
                              "reported")
            return None
        self.notes.append(f"load day {day.id}: the schedule reported is solved {where} for the chosen grid "
                          f"(instead of {instead})")
        self.refined[day.id] = where
        return fine, ver


@dataclass
class DesignResult:
    zones: pd.DataFrame  # design.csv: one row per diffused zone
    days: pd.DataFrame  # load_days.csv: one row per load day, designed and current grid
    schedule: pd.DataFrame  # schedule.csv: one row per load day, period and zone on the designed grid
    candidates: pd.DataFrame  # candidates.csv: every grid evaluated (the continuous search's and the whole counts)
    summary: dict
    exit_code: int
    layout: Layout  # the layout with the designed grid (the current one when no design was found)
    design: GridDesign | None = None
    binding: pd.DataFrame | None = None  # binding.csv: one row per zone, load day and limit whose dual is not zero


def _day_rows(g: GridDesign, label: str, days: list[int] | None = None) -> dict[str, dict]:
    rows = {}
    for f in g.day_figures(days):
        d = f["day"]
        rows[d.id] = {f"energy_kWh_per_day_{label}": f["energy_kWh_per_day"],
                      f"cost_per_day_{label}": f["cost_per_day"],
                      f"nh4_mean_mg_L_{label}": f["figures"]["nh4_mean_mg_L"],
                      f"tn_mean_mg_L_{label}": f["figures"]["tn_mean_mg_L"]}
    return rows


def _annual(g: GridDesign, rows: dict, label: str, what: str, days=None) -> float:
    """The year's sum of ``what`` over ``days`` (load days; default every one), each times its days per year."""
    return sum(d.days_per_year * rows[d.id][f"{what}_{label}"] for d in (g.days if days is None else days))


def run_design(layout: ResolvedPlant | Layout, options: DesignOptions | None = None, progress: Progress | None = None
               ) -> DesignResult:
    """The whole design (module notes): continuous search, whole counts, verification, economics; never raises
    for an infeasible or failed solve (the exit code says it)."""
    t0 = time.perf_counter()
    g = GridDesign(layout, options, progress)
    lay, plant = g.layout, g.plant
    cap = plant.capital
    messages: list[str] = []
    base = {"plant": plant.name, "layout": plant.path, "currency": plant.tariff.currency,
            "load_days": [{"id": d.id, "days_per_year": d.days_per_year,
                           "periods": g.source.horizon.n_periods if d.id in g.own_periods else plant.n_periods}
                          for d in g.days],
            "capital_inputs": {"cost_per_diffuser": cap.cost_per_diffuser, "cost_per_zone": cap.cost_per_zone,
                               "interest_rate": cap.interest_rate, "life_years": cap.life_years,
                               "capital_recovery_factor": g.crf},
            "count_ranges": {z: {"lowest": lo, "highest": hi} for z, (lo, hi) in g.ranges.items()},
            "prescreen": None}
    if g.options.prescreen:
        screen = g.prescreen()
        base["prescreen"] = screen
        if not screen["feasible"]:
            bad = {d: r for d, r in screen["days"].items() if not r["feasible"]}
            messages.append("no grid in the design ranges can meet load day(s) " + "; ".join(
                f"{d}: " + "; ".join(f["message"] for f in r["findings"]) for d, r in bad.items())
                + " (pre-screen, before any search)")
            return _no_design(g, base, "infeasible", messages, t0)
    g.build()
    relaxed = g.solve_relaxed()
    if relaxed is None:
        statuses = {c.status for c in g.candidates}
        status = "infeasible" if "infeasible" in statuses else "failed"
        nearest = {}  # per load day not met: the grid that came nearest to meeting it (its least excess)
        for c in g.candidates:
            if c.failed_day and (c.failed_day not in nearest or (c.excess or math.inf) < (
                    nearest[c.failed_day].excess or math.inf)):
                nearest[c.failed_day] = c
        failed = [d + (f" ({c.reason}, on the grid " + ", ".join(f"{z} {n:.6g}" for z, n in c.counts.items()) + ")"
                       if c.reason else "") for d, c in sorted(nearest.items())]
        messages.append(("no grid tried in the design ranges meets every load day's limits" if status == "infeasible"
                         else "the load days could not be solved on any start grid (" + ", ".join(sorted(statuses))
                         + ")") + ("; load day(s) not met: " + ", ".join(failed) if failed else "")
                        + " (candidates.csv lists the grids tried)")
        return _no_design(g, base, status, messages, t0)
    # the current grid on every day, also after one it cannot meet: it is compared on the days it meets
    g.evaluate(g.current, every_day=True)
    solves = g._solved[g._key(g.current)]
    met = [i for i, s in enumerate(solves) if s.ok]
    not_met = {g.days[i].id: s.reason or f"not solved ({s.status})" for i, s in enumerate(solves) if not s.ok}
    current_rows = None
    if met:
        g.load(g.current, days=met)
        current_rows = _day_rows(g, "current", met)
    if not_met:
        messages.append("the current grid cannot meet load day(s) " + "; ".join(
            f"{d}: {why}" for d, why in not_met.items()) + (
            ": the payback and net present value compare the grids on the other load days only" if met else
            ": no payback against it"))
    best = g.search()
    if best is None:
        messages.append("no whole-count grid near the continuous optimum meets every load day's limits")
        return _no_design(g, base, "infeasible", messages, t0)
    g.load(best.counts)
    # the designed grid's days as the search solved them, on the design's periods: the current grid's basis
    searched_rows = _day_rows(g, "design")
    verification = g.verify(best.counts) if g.options.verify else None  # the DO held first: the days' schedules
    messages.extend(g.notes)
    design_rows = _day_rows(g, "design")
    binding, binding_rows = g.binding(best.counts)
    designed = with_grid_counts(lay, best.counts)

    zones = []
    for z in g.zones:
        zones.append({"zone": z.id, "count_current": g.current[z.id], "count_relaxed": g.relaxed[z.id],
                      "count_design": best.counts[z.id], "count_step": z.count_step,
                      "count_lowest": g.ranges[z.id][0], "count_highest": g.ranges[z.id][1],
                      "density_current_percent": z.density_percent_at(g.current[z.id]),
                      "density_design_percent": z.density_percent_at(best.counts[z.id]),
                      "diffuser_saving_per_year": -best.gradient[z.id] + g.crf * cap.cost_per_diffuser,
                      "marginal_annual_cost_per_diffuser": best.gradient[z.id],
                      "binding": "; ".join(binding[z.id])})
    days = []
    for i, (d, st) in enumerate(zip(g.days, g.studies)):
        row = {"load_day": d.id, "days_per_year": d.days_per_year, **design_rows[d.id]}
        if current_rows is not None and d.id in current_rows:
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
    candidates = candidate_table(g)

    def totals(rows, label, counts, days=None):
        capital = grid_capital(cap, counts)
        energy_cost = _annual(g, rows, label, "cost_per_day", days)
        return {"counts": dict(counts), "capital": capital, "capital_per_year": g.crf * capital,
                "energy_kWh_per_year": _annual(g, rows, label, "energy_kWh_per_day", days),
                "energy_cost_per_year": energy_cost, "annual_cost": g.crf * capital + energy_cost,
                "diffusers": int(sum(counts.values()))}

    design_tot = totals(design_rows, "design", best.counts)
    design_tot["relaxed_counts"] = dict(g.relaxed)
    current_tot, comparison = None, None
    if current_rows is not None:
        # on the days the current grid meets (every day when it meets them all): its energy there against the
        # designed grid's on the same days
        compared = [g.days[i] for i in met]
        current_tot = totals(current_rows, "current", g.current, compared)
        current_tot["load_days_not_met"] = not_met
        # both grids as the search solved them (the design's periods, the model's optimum): like with like, also
        # when the designed grid's days were solved again on the layout's periods for the verification
        same = totals(searched_rows, "design", best.counts, compared)
        extra = design_tot["capital"] - current_tot["capital"]
        saving = current_tot["energy_cost_per_year"] - same["energy_cost_per_year"]
        if simple_payback_years(extra, saving) is None:
            messages.append("against the current grid: " + payback_text(extra, saving))
        comparison = {"extra_capital": extra, "energy_saving_per_year": saving,
                      "energy_saving_kWh_per_year": current_tot["energy_kWh_per_year"] - same["energy_kWh_per_year"],
                      "payback_years": simple_payback_years(extra, saving),
                      "payback": payback_text(extra, saving),
                      "net_present_value": net_present_value(extra, saving, cap.interest_rate, cap.life_years),
                      "design_energy_cost_per_year_compared": same["energy_cost_per_year"],
                      "design_energy_kWh_per_year_compared": same["energy_kWh_per_year"],
                      "periods": g.plant.n_periods,
                      "periods_by_day": {d["id"]: d["periods"] for d in base["load_days"]},
                      "load_days_compared": [d.id for d in compared],
                      "days_per_year_compared": float(sum(d.days_per_year for d in compared)),
                      "load_days_not_met_by_current": not_met}
    verified = None if verification is None else all(v["verified"] for v in verification)
    status = "optimal" if verified is not False else "unverified"
    if verified is False:
        bad = [d.id for d, v in zip(g.days, verification) if not v["verified"]]
        messages.append("WARNING: the re-simulated schedule breaks a limit on load day(s) " + ", ".join(bad))
    g.timings["total_s"] = time.perf_counter() - t0
    summary = {**base, "status": status, "design": design_tot, "current": current_tot, "comparison": comparison,
               "binding": binding, "verified": verified, "candidates_evaluated": len(g.candidates),
               "solver": {"day_solves": int(g.timings.get("day_solves", 0)),
                          "iterations": int(g.timings.get("iterations", 0)),
                          "timings": {k: v for k, v in g.timings.items() if k not in ("iterations", "day_solves")}},
               "messages": messages}
    code = EXIT_OK if status == "optimal" else EXIT_UNVERIFIED
    binding_table = pd.DataFrame(binding_rows, columns=["zone", "load_day", "case", "limit", "cost_per_year", "per",
                                                        "diffuser_saving_per_year"])
    return DesignResult(pd.DataFrame(zones), pd.DataFrame(days), schedule, candidates, jsonable(summary), code,
                        designed, g, binding_table)


def _no_design(g: GridDesign, base: dict, status: str, messages: list[str], t0: float) -> DesignResult:
    g.timings["total_s"] = time.perf_counter() - t0
    summary = {**base, "status": status, "design": None, "current": None, "comparison": None, "binding": None,
               "verified": None, "candidates_evaluated": len(g.candidates),
               "solver": {"day_solves": int(g.timings.get("day_solves", 0)),
                          "iterations": int(g.timings.get("iterations", 0)),
                          "timings": {k: v for k, v in g.timings.items() if k not in ("iterations", "day_solves")}},
               "messages": messages}
    code = EXIT_INFEASIBLE if status == "infeasible" else EXIT_FAILURE
    candidates = candidate_table(g)
    return DesignResult(pd.DataFrame(), pd.DataFrame(), pd.DataFrame(), candidates, jsonable(summary), code,
                        g.layout, g)


def candidate_table(g: GridDesign) -> pd.DataFrame:
    """candidates.csv: every grid evaluated, in order, with its annual cost (empty: a day's limits not met)."""
    return pd.DataFrame([{**{f"count_{z}": c.counts[z] for z in g.ids}, "whole": c.whole,
                          "annual_cost": c.annual_cost, "objective": c.objective, "status": c.status,
                          "failed_day": c.failed_day, "seconds": c.seconds} for c in g.candidates])


__all__ = ["BINDING_SHARE", "PHASE_ONE_TOLERANCE", "RESTORE_AIM", "WARM_STEPS", "Candidate", "DaySolve", "DesignOptions", "DesignResult", "GridDesign",
           "run_design", "capital_recovery_factor", "grid_capital", "net_present_value", "payback_text",
           "simple_payback_years"]
