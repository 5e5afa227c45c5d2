"""Initial points of the optimisation, and the retry ladder.

Start from the baseline (:func:`start_from_day`): the airflow of every zone and
period is the baseline's period-mean airflow (clipped into the zone's range), the
zone concentrations at every model step are the simulated baseline states at the
same time of day, the waste flow is the simulated one, and a layered clarifier's
layers are the simulated day's at the same time of day too (the layers and the
zones of one simulated trajectory: pairing the day's zones with the mean-load
steady settler left the zones' balances off by up to 4.9e3 g/m3/d at the start
on the layered demo, 70 g/m3/d with the day's layers). Everything else comes from the model
layer's cyclic initialisation (the steady state at mean load). Should the model's
own continuation not settle, that steady state starts from the independent
simulator's at the same mean airflows (:func:`simulated_steady_start`); should that
not settle either, the simulated day alone is the start (it gives every state). On a
layered plant the model's own time steps are then marched through the day from those
states (``march_cyclic``), so that Ipopt starts on the model's equations except where the
day closes on itself.
Optionally a square solve of the model at those airflows makes the start satisfy
the model equations.

Retry ladder (:data:`LADDER`): when a solve fails, the next rung changes one thing:

1. default: baseline start, user scaling, Ipopt's adaptive barrier update
   (``mu_strategy = adaptive``: 20-50 % fewer iterations than the monotone update on
   the three-tank and demo layouts, same optimum; docs/optimization.md);
2. the monotone (Fiacco-McCormick) barrier update instead;
3. other start: the model equations solved first at the baseline airflows (square
   solve), then the optimisation;
4. other start and scaling: airflows raised 15 % above the baseline start, square
   solve, Ipopt's own gradient-based scaling instead of the user scaling;
5. everything at once: monotone barrier, square-solved start, 3000 iterations.

Solve budget (:class:`SolveBudget`): every Ipopt solve of one optimisation (the ladder,
the blower staging and swing-zone rounds, the DO back-off re-solves, the elastic solve)
draws on one budget of CPU seconds, :data:`SOLVE_BUDGET_S` by default; each solve gets what
is left as Ipopt's ``max_cpu_time``. What it counts: the process's CPU time *during* the
solves only (:meth:`SolveBudget.charging` around each call: the model's conversion when not
cached, Ipopt's iterations and its calls of the derivative functions), not the baseline, the
model build, the verification's simulated days or the dispatch MILPs between them (before,
the clock ran from the first solve on, so the simulator's days between back-off rounds were
charged to the solver). One exception: the DO back-off's rounds, which are optional, pay for their
re-simulations from the budget too (:meth:`SolveBudget.charge`; :data:`airtaper.optimize.backoff.ROUND_BUDGET_RULE`).
CPU, not wall clock: on a machine shared with other jobs a wall-clock budget measured the load
(at a load average of 10 a 12-zone plant got 52 CPU seconds in 620 s of wall clock), not the solve. A stalled optimiser (restoration that wanders, a
ladder whose every rung fails slowly) then ends within the budget with a plain-words
message and exit code 3 (:data:`airtaper.errors.EXIT_INFEASIBLE`) instead of running on:
the study says it could not settle, never that the limits are infeasible. A study solved
again on shorter model steps (:mod:`airtaper.optimize.backoff`) gets a budget of its own.

Elastic reserve (:data:`ELASTIC_RESERVE_FRACTION`): until a solve has given a schedule, the ladder
and every other solve may spend only 70 % of the budget; the last 30 % is kept for the elastic
solve (:meth:`DiurnalOptimisation.elastic`), so that a plant the optimiser cannot settle is still
diagnosed (which limit cannot be met, when and by how much) rather than ended with "budget spent".
Before, a 12-zone plant at twice its design load (plant 23 of the robustness benchmark) spent all
420 CPU seconds in four rungs (777 iterations) and ended in exit 3 with no diagnosis. Once a schedule
exists (:meth:`SolveBudget.release`, called by :func:`~airtaper.optimize.diurnal.run_optimization`
after the first solve, or on a staged plant after the staging, whose relaxed first solve is no
schedule) the reserve is released: the back-off re-solves that follow have a schedule to fall back
on and need no diagnosis. Only :func:`~airtaper.optimize.diurnal.run_optimization` keeps a reserve
(other users of :class:`~airtaper.optimize.diurnal.DiurnalOptimisation` call no elastic solve).

Stall rule (:class:`StallWatch`, :data:`STALL_WINDOW_ITERATIONS`, :data:`STALL_FALL_FACTOR`,
:data:`STALL_INFEASIBILITY_MIN`): an attempt whose (scaled) primal infeasibility has not fallen
tenfold over the last 150 iterations while it is still above 1e-4 is stopped, and the ladder ends
there (a stalled warm re-solve goes down no ladder either): the elastic solve says what cannot be
met. An attempt that converges reduces the infeasibility by orders of magnitude well within 150
iterations; one that wanders in restoration or creeps along a limit it cannot meet keeps it within
a decade for hundreds (plant 23: 777 iterations over four rungs, no schedule; with the rule its
all-day swing solve went from 5.7e-2 to 1.1e-2 in 150 iterations and was stopped). Restarting such
a plant from another rung repeats the wander; the elastic solve does not (its slacks make it
feasible). The rule watches feasibility only: an attempt that is near feasible (below 1e-4) and
still improving its objective is never stopped by it. The elastic solve itself is not watched (it
is the diagnosis).
"""

from __future__ import annotations

import time
from collections import deque
from contextlib import contextmanager
from dataclasses import dataclass, field

import numpy as np

from airtaper.errors import ModelError, NoSteadyStateError
from airtaper.layout.types import ASM1_COMPONENTS
from airtaper.model.initial_point import initialise_cyclic, march_cyclic, set_layer_state
from airtaper.optimize.simday import SimDay


@dataclass(frozen=True)
class Rung:
    name: str
    options: dict = field(default_factory=dict)
    square_solve: bool = False
    airflow_factor: float = 1.0
    user_scaling: bool = True


#: Base Ipopt options of every rung. ``mumps_pivot_order = 2``: MUMPS orders the KKT
#: matrix by approximate minimum fill (AMF) instead of its automatic choice. Every time
#: point couples all zones, so the factorisation is nearly all the time; AMF halves its
#: cost on the larger layouts and keeps the cost per iteration linear in the number of
#: periods (docs/optimization.md, Performance: 5 zones x 96 periods 0.94 against 1.84 s
#: per iteration, 20 x 12 1.7 against 3.8 s, the same optimum in the same iterations).
BASE_OPTIONS = {"tol": 1e-7, "acceptable_tol": 1e-5, "max_iter": 600, "mumps_pivot_order": 2}

LADDER: tuple[Rung, ...] = (
    Rung("baseline start", {"mu_strategy": "adaptive"}),
    Rung("monotone barrier", {"mu_strategy": "monotone"}),
    Rung("square-solved start", square_solve=True),
    Rung("raised airflow, gradient scaling", square_solve=True, airflow_factor=1.15, user_scaling=False),
    Rung("monotone barrier, square-solved start", {"mu_strategy": "monotone", "max_iter": 3000}, square_solve=True),
)


#: CPU seconds of all the Ipopt solves of one optimisation together (module notes).
#: The demo's solves take about 15 s, a 12-zone plant on 48 periods with every rung and the
#: elastic solve about 250 s on the 2-core machine under load; the robustness benchmark's
#: time limit per plant is 600 s (issue 10), which leaves room for the baseline, start and
#: verification.
SOLVE_BUDGET_S = 420.0


#: Share of the solve budget kept for the elastic solve until a schedule exists (module notes,
#: "Elastic reserve"); of the default 420 s budget, 126 s.
ELASTIC_RESERVE_FRACTION = 0.3

#: Stall rule (module notes): the iterations over which the primal infeasibility must fall ...
STALL_WINDOW_ITERATIONS = 150
#: ... by at least this factor ...
STALL_FALL_FACTOR = 10.0
#: ... unless it is already below this (Ipopt's scaled constraint violation; the solves' ``tol`` is 1e-7,
#: ``acceptable_tol`` 1e-5: below 1e-4 an attempt is near feasible and may take its time on the objective).
STALL_INFEASIBILITY_MIN = 1e-4


class StallWatch:
    """Iteration callback that asks Ipopt to stop an attempt that does not approach feasibility (module notes).

    Called with each iteration's :class:`~airtaper.solve.ipopt.IterationInfo`; returns False (stop) when the
    primal infeasibility is above ``floor`` and has not fallen by ``factor`` since ``window`` iterations ago.
    :attr:`stalled` then holds True and :meth:`message` says why.
    """

    def __init__(self, window: int = STALL_WINDOW_ITERATIONS, factor: float = STALL_FALL_FACTOR,
                 floor: float = STALL_INFEASIBILITY_MIN):
        self.window, self.factor, self.floor = int(window), float(factor), float(floor)
        self.history: deque = deque(maxlen=self.window + 1)
        self.stalled = False

    def __call__(self, info) -> bool:
        inf = float(info.primal_infeasibility)
        self.history.append(inf)
        if len(self.history) <= self.window or not np.isfinite(inf) or inf <= self.floor:
            return True
        if inf * self.factor > self.history[0]:  # not tenfold lower than `window` iterations ago
            self.stalled = True
            return False
        return True

    def message(self) -> str:
        first, last = self.history[0], self.history[-1]
        return (f"stopped: the constraint violation fell only from {first:.2e} to {last:.2e} in "
                f"{self.window} iterations (stall rule: less than {self.factor:g}-fold while above "
                f"{self.floor:g})")


class SolveBudget:
    """One CPU-time budget shared by every Ipopt solve of an optimisation (module notes).

    Each solve runs inside :meth:`charging`, which adds the process's CPU time during the solve to
    :attr:`spent`; :meth:`options` gives the next solve what it may spend as ``max_cpu_time``; :attr:`exhausted`
    tells the ladder to stop. Time between solves (simulation, dispatch, model build) is not counted.
    Until :meth:`release` (a schedule exists) a share ``reserve_fraction`` is kept for the elastic solve:
    the other solves see it as spent (module notes, "Elastic reserve").
    """

    #: Ipopt's ``max_cpu_time`` must be positive: a solve asked for after the budget is spent gets this, s.
    FLOOR_S = 1e-3

    def __init__(self, seconds: float = SOLVE_BUDGET_S, reserve_fraction: float = ELASTIC_RESERVE_FRACTION):
        self.seconds = float(seconds)
        self.reserve_s = float(reserve_fraction) * self.seconds
        self.spent = 0.0  # CPU seconds of the solves so far
        self.solves = 0
        self.released = False  # True once a solve gave a schedule: no reserve any more

    def elapsed(self) -> float:
        """CPU seconds charged so far (the solves only)."""
        return self.spent

    def remaining(self) -> float:
        """CPU seconds left of the whole budget (the reserve included)."""
        return max(self.seconds - self.spent, 0.0)

    def available(self, elastic: bool = False) -> float:
        """CPU seconds the next solve may spend: the rest less the reserve, unless it is the elastic solve or a
        schedule exists."""
        keep = 0.0 if (elastic or self.released) else self.reserve_s
        return max(self.seconds - self.spent - keep, 0.0)

    def release(self) -> None:
        """A solve gave a schedule: the elastic reserve is no longer kept."""
        self.released = True

    @property
    def exhausted(self) -> bool:
        """True when the solves other than the elastic one have nothing left (the whole budget once released)."""
        return self.solves > 0 and self.available() <= 0.0

    @property
    def spent_in_full(self) -> bool:
        """True when nothing is left even for the elastic solve."""
        return self.solves > 0 and self.remaining() <= 0.0

    def options(self, elastic: bool = False) -> dict:
        """Ipopt options of the next solve (``elastic``: the elastic solve, which may spend the reserve)."""
        return {"max_cpu_time": max(self.available(elastic), self.FLOOR_S)}

    @contextmanager
    def charging(self):
        """Charge the process's CPU time inside the ``with`` block (one solve) to the budget."""
        t = time.process_time()
        try:
            yield
        finally:
            self.spent += time.process_time() - t
            self.solves += 1

    def charge(self, seconds: float) -> None:
        """Charge ``seconds`` of CPU time spent outside a solve (no solve counted): the DO back-off's
        re-simulations, which its rounds pay from this budget (:data:`airtaper.optimize.backoff.ROUND_BUDGET_RULE`)."""
        self.spent += max(float(seconds), 0.0)

    def message(self, attempts: list[dict]) -> str:
        """The plain-words ending of a run that used up the budget."""
        iterations = sum(int(a.get("iterations") or 0) for a in attempts)
        return (f"the optimiser did not settle within its solve budget of {self.seconds:.0f} CPU seconds "
                f"(the CPU time of its solves; {len(attempts)} attempts, {iterations} iterations): no schedule "
                "is given. This says nothing about whether the limits can be met; give it more time "
                "(--solve-budget), try fewer periods, or check the layout "
                "(a plant near the edge of its equipment or its clarifier's capacity)")


def start_airflow(m, day: SimDay, factor: float = 1.0) -> dict:
    """Zone id -> per-period start airflow: baseline period means x factor, clipped to the zone's range."""
    means = day.period_mean_airflow()
    out = {}
    for z in m.GRID_ZONES:
        lo, hi = m.aeration[z].airflow_range_Sm3_h
        out[z] = np.clip(np.asarray(means[z]) * factor, lo, hi)
    return out


def point_hours(m) -> dict:
    """Time of day of every model time point, h."""
    return dict(m.point_hour)


def start_from_day(m, day: SimDay, airflow: dict, march: bool = True) -> None:
    """Set the model's airflow, states and waste flow from a simulated day (see module notes).

    Airflows are *fixed* at ``airflow`` (zone -> per-period values); the caller frees them.
    ``march``: on a layered plant, then march the model's own time steps through the day from
    there (:func:`~airtaper.model.initial_point.march_cyclic`), so that the start satisfies the
    model's equations except where the day closes on itself: from the simulated day alone Ipopt
    stalled on the demo with a layered clarifier on 24 periods (infeasibility stuck at ~4e4),
    from the marched day it converges. A step the march cannot solve keeps the day's values.
    """
    for z, values in airflow.items():
        for p in m.PERIODS:
            m.airflow_Sm3_h[z, p].fix(float(values[p - 1]))
    try:
        initialise_cyclic(m)
    except ModelError:
        # the model's own continuation did not settle: start it from the independent
        # simulator's steady state at the same mean airflows (a root solve that cannot stall),
        # unless that state shows the plant cannot hold its target sludge age at all
        plant = m.train_data.plant
        start, clarifier = simulated_steady_start(plant.layout, airflow)
        if clarifier is not None and not clarifier["srt_held"]:
            raise NoSteadyStateError(f"{plant.path}: clarifier: no steady state at the target "
                                     f"sludge age: {clarifier['message']}", cause="overloaded") from None
        try:
            initialise_cyclic(m, start=start)
        except ModelError:
            # Every state the mean-load steady state would give is replaced by the simulated day's
            # below (zones, clarifier layers, waste flow): the day alone is a start. A plant whose
            # day lacks some of them (a layered model without the day's layers) has no start.
            if hasattr(m, "settler_conc") and day.layers is None:
                raise
    zones = list(m.ZONES)
    index = {c: k for k, c in enumerate(ASM1_COMPONENTS)}
    hours = point_hours(m)
    layered = hasattr(m, "settler_conc") and day.layers is not None
    for t in m.STEPS:
        state = day.state_at(hours[t])
        for i, z in enumerate(zones):
            for c in m.COMPONENTS:
                v = m.conc[t, z, c]
                if not v.fixed:
                    v.set_value(max(float(state[i, index[c]]), 0.0), skip_validation=True)
        if layered:  # the simulated day's layers, consistent with its zones (not the mean-load settler)
            set_layer_state(m, t, day.layers_at(hours[t]))
    if not m.waste_m3_d[1].fixed:  # a target SRT: the waste flow is a variable
        mean = float(np.mean(day.extra["waste_m3_d"]))
        for p in m.PERIODS:
            m.waste_m3_d[p].set_value(mean)
    if layered and march:
        try:
            march_cyclic(m, days=1)
        except ModelError:
            pass  # the steps before the one that failed are marched, the rest keep the day's values


def simulated_steady_start(layout, airflow: dict) -> tuple[dict, dict | None]:
    """The simulator's steady state at each zone's daily-mean airflow, as a start for the model.

    Returns ``({"zones": {zone_id: 13 components}, "layers": (layers, 13) or None, "waste_m3_d"},
    clarifier)``: the start (:func:`airtaper.model.initial_point.set_start_state`) and the layered
    clarifier's check at that state (None for an ideal separator).
    """
    from airtaper.simulate import steady_state

    mean = {z: float(np.mean(v)) for z, v in airflow.items()}
    ss = steady_state(layout, airflow_Sm3_h=mean)
    comps = list(ASM1_COMPONENTS)
    zones = {str(row["zone"]): row[comps].to_numpy(dtype=float) for _, row in ss.zones.iterrows()}
    layers = None if ss.layers is None else ss.layers[comps].to_numpy(dtype=float)
    return {"zones": zones, "layers": layers, "waste_m3_d": ss.q_waste_m3_d}, ss.clarifier


__all__ = ["BASE_OPTIONS", "ELASTIC_RESERVE_FRACTION", "LADDER", "SOLVE_BUDGET_S", "STALL_FALL_FACTOR",
           "STALL_INFEASIBILITY_MIN", "STALL_WINDOW_ITERATIONS", "Rung", "SolveBudget", "StallWatch", "point_hours",
           "simulated_steady_start", "start_airflow", "start_from_day"]
