"""LP and MILP models through HiGHS (highspy) with Pyomo's ``pyomo.contrib.solver``
HiGHS interface (the maintained one in Pyomo 6.10; ``appsi_highs`` is its predecessor).

Entry point: :func:`solve_milp`. Solver outcomes (infeasible, unbounded, time limit
with or without an incumbent) come back as a :class:`MilpResult`; they never raise.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

from pyomo.common.collections import ComponentMap
from pyomo.contrib.solver.common.results import TerminationCondition as TC
from pyomo.contrib.solver.common.util import IncompatibleModelError, NoDualsError
from pyomo.contrib.solver.solvers.highs import Highs
from pyomo.core.base.var import Var

from airtaper.errors import ModelError, SolverError
from airtaper.solve.ipopt import SolveStatus

_STATUS = {
    TC.convergenceCriteriaSatisfied: SolveStatus.OPTIMAL,
    TC.maxTimeLimit: SolveStatus.TIME_LIMIT,
    TC.iterationLimit: SolveStatus.ITERATION_LIMIT,
    TC.provenInfeasible: SolveStatus.INFEASIBLE,
    TC.locallyInfeasible: SolveStatus.INFEASIBLE,
    TC.infeasibleOrUnbounded: SolveStatus.INFEASIBLE,
    TC.unbounded: SolveStatus.UNBOUNDED,
    TC.interrupted: SolveStatus.USER_STOP,
    TC.objectiveLimit: SolveStatus.FEASIBLE,
}
_TEXT = {
    TC.convergenceCriteriaSatisfied: "optimal within the gap tolerance",
    TC.maxTimeLimit: "time limit reached",
    TC.iterationLimit: "iteration or solution limit reached",
    TC.provenInfeasible: "proven infeasible",
    TC.locallyInfeasible: "infeasible",
    TC.infeasibleOrUnbounded: "infeasible or unbounded (HiGHS could not tell which)",
    TC.unbounded: "unbounded",
    TC.interrupted: "interrupted",
    TC.objectiveLimit: "objective limit reached",
}


@dataclass
class MilpResult:
    """Result of :func:`solve_milp`.

    ``objective`` is the best solution found (None without one), ``bound`` the best
    proven bound, ``gap`` the relative gap ``|objective - bound| / |objective|``.
    ``constraint_duals`` (LPs only, empty for MILPs) follow the convention of
    :mod:`airtaper.solve.ipopt`: ``d f*/d b`` for the constraint's bound ``b``.
    """

    status: SolveStatus
    message: str
    objective: float | None
    bound: float | None
    gap: float | None
    has_solution: bool
    is_mip: bool
    solver_s: float
    total_s: float
    constraint_duals: ComponentMap = field(default_factory=ComponentMap)

    @property
    def ok(self) -> bool:
        return self.status.ok

    def dual(self, con) -> float:
        return self.constraint_duals[con]


def solve_milp(model, *, time_limit: float | None = None, rel_gap: float | None = None,
               abs_gap: float | None = None, threads: int | None = None,
               options: dict | None = None, load_solution: bool = True,
               tee: bool = False) -> MilpResult:
    """Solve a linear (mixed-integer) Pyomo model with HiGHS.

    Parameters
    ----------
    model : pyomo ConcreteModel
        Linear constraints and objective; integer and binary variables allowed.
    time_limit : float, optional
        Wall-clock limit in seconds; the best solution found so far is returned with
        status ``TIME_LIMIT`` (``has_solution`` says whether there is one).
    rel_gap, abs_gap : float, optional
        MIP stopping tolerances (HiGHS ``mip_rel_gap``, ``mip_abs_gap``).
    options : dict, optional
        Further HiGHS options passed through by name.
    load_solution : bool
        Write the solution (when there is one) into the model's variables.
    tee : bool
        Show the HiGHS log on stdout.
    """
    t0 = time.perf_counter()
    solver = Highs()
    if not solver.available():
        raise SolverError("HiGHS (highspy) is not installed")
    is_mip = any(
        not v.is_continuous() and not v.fixed
        for v in model.component_data_objects(Var, descend_into=True)
    )
    try:
        res = solver.solve(
            model, tee=tee, load_solutions=False,
            raise_exception_on_nonoptimal_result=False, time_limit=time_limit,
            rel_gap=rel_gap, abs_gap=abs_gap, threads=threads,
            solver_options=dict(options or {}),
        )
    except IncompatibleModelError as exc:  # nonlinear constraints
        raise ModelError(f"model {model.name} cannot be passed to HiGHS: {exc}") from None
    except (ValueError, TypeError, KeyError) as exc:  # e.g. an unknown HiGHS option
        raise SolverError(f"HiGHS could not be run on model {model.name}: {exc}") from None
    tc = res.termination_condition
    status = _STATUS.get(tc, SolveStatus.ERROR)
    message = _TEXT.get(tc, f"HiGHS termination {tc.name}")
    objective = res.incumbent_objective
    has_solution = objective is not None
    bound = res.objective_bound
    gap = None
    if objective is not None and bound is not None:
        gap = abs(objective - bound) / max(abs(objective), 1e-10)
    if status == SolveStatus.ITERATION_LIMIT and has_solution and is_mip:
        status = SolveStatus.FEASIBLE
    duals = ComponentMap()
    if has_solution and load_solution:
        res.solution_loader.load_vars()
    if status is SolveStatus.OPTIMAL and not is_mip:
        try:
            duals = ComponentMap(res.solution_loader.get_duals().items())
        except NoDualsError:  # integer variables all fixed: HiGHS solves a MIP and keeps no duals
            pass
    return MilpResult(
        status=status, message=message, objective=objective, bound=bound, gap=gap,
        has_solution=has_solution, is_mip=is_mip,
        solver_s=float(res.timing_info.wall_time or 0.0),
        total_s=time.perf_counter() - t0, constraint_duals=duals,
    )
