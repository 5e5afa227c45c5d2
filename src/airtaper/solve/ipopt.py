"""Ipopt (through cyipopt) on a Pyomo model converted by the CasADi bridge.

Entry point: :func:`solve_nlp`. Ipopt failures (iteration or time limit, restoration
failure, local infeasibility, evaluation errors) come back as an :class:`NlpResult`
with a :class:`SolveStatus`; they never raise. Only misuse raises: an unsupported model
(:class:`~airtaper.errors.ModelError`) or an option Ipopt rejects
(:class:`~airtaper.errors.SolverError`).

Sign convention of every dual returned
--------------------------------------
A dual is the derivative of the optimal objective (in the model's own sense and units)
with respect to the limit it belongs to:

* constraint ``lo <= body <= up`` (or ``body == rhs``): ``dual = d f* / d b``, where
  ``b`` shifts the active bound (both bounds of a ranged constraint move together).
  For ``min f`` subject to ``body <= b`` the dual is ``<= 0`` (relaxing the limit can
  only lower the cost); for ``body >= b`` it is ``>= 0``; for a maximisation the
  signs flip. A dual of 0 means the limit does not bind.
* variable bounds: ``lower = d f* / d lb`` and ``upper = d f* / d ub`` (for ``min``:
  ``lower >= 0``, ``upper <= 0``).
* fixed variables (not passed to Ipopt; both bounds hold them at their value): ``lower +
  upper = d f* / d value``, the derivative of the Lagrangian with respect to the
  value at the solution, split into its positive part (``lower``) and negative part
  (``upper``) for a minimisation, as Ipopt's ``make_parameter`` treatment reports it.

So ``dual * delta`` is the first-order change of the optimum when the limit moves by
``delta``: for the aeration problems, the marginal cost of a limit.
"""

from __future__ import annotations

import enum
import time
from dataclasses import dataclass, field

import cyipopt
import numpy as np
from pyomo.common.collections import ComponentMap
from pyomo.core.base.block import BlockData
from pyomo.core.base.suffix import Suffix

from airtaper.errors import SolverError
from airtaper.solve import nlp as _nlp


class SolveStatus(enum.Enum):
    """Outcome of a solve, independent of the solver's own wording."""

    OPTIMAL = "optimal"
    ACCEPTABLE = "acceptable"  # converged to Ipopt's looser 'acceptable' tolerances
    FEASIBLE = "feasible"  # a feasible point without proof of optimality (MILP limits)
    INFEASIBLE = "infeasible"
    UNBOUNDED = "unbounded"
    ITERATION_LIMIT = "iteration_limit"
    TIME_LIMIT = "time_limit"
    USER_STOP = "user_stop"
    RESTORATION_FAILED = "restoration_failed"
    EVALUATION_ERROR = "evaluation_error"
    INVALID_PROBLEM = "invalid_problem"
    ERROR = "error"

    @property
    def ok(self) -> bool:
        """True when the returned point can be used as a solution."""
        return self in (SolveStatus.OPTIMAL, SolveStatus.ACCEPTABLE)


# Ipopt ApplicationReturnStatus codes (IpReturnCodes_inc.h of Ipopt 3.14)
_IPOPT_STATUS = {
    0: SolveStatus.OPTIMAL,
    1: SolveStatus.ACCEPTABLE,
    2: SolveStatus.INFEASIBLE,
    3: SolveStatus.ERROR,  # search direction becomes too small
    4: SolveStatus.UNBOUNDED,  # diverging iterates
    5: SolveStatus.USER_STOP,
    6: SolveStatus.FEASIBLE,  # feasible point found (square problems)
    -1: SolveStatus.ITERATION_LIMIT,
    -2: SolveStatus.RESTORATION_FAILED,
    -3: SolveStatus.ERROR,  # error in step computation
    -4: SolveStatus.TIME_LIMIT,  # CPU time
    -5: SolveStatus.TIME_LIMIT,  # wall time
    -10: SolveStatus.INVALID_PROBLEM,  # not enough degrees of freedom
    -11: SolveStatus.INVALID_PROBLEM,
    -12: SolveStatus.INVALID_PROBLEM,  # invalid option
    -13: SolveStatus.EVALUATION_ERROR,  # invalid number detected
}
_IPOPT_TEXT = {
    0: "optimal solution found",
    1: "solved to acceptable level",
    2: "converged to a point of local infeasibility: the problem may be infeasible",
    3: "search direction became too small",
    4: "iterates diverging: the problem may be unbounded",
    5: "stopped on request",
    6: "feasible point found",
    -1: "iteration limit reached",
    -2: "restoration phase failed",
    -3: "error in step computation",
    -4: "CPU time limit reached",
    -5: "wall time limit reached",
    -10: "not enough degrees of freedom (more equalities than free variables)",
    -11: "invalid problem definition",
    -12: "invalid option",
    -13: "invalid number (NaN or inf) in a function or derivative evaluation",
}

_DEFAULT_OPTIONS = {"print_level": 0, "sb": "yes", "linear_solver": "mumps"}
_ALIASES = {"time_limit": "max_wall_time"}
_WARM_DEFAULTS = {
    "warm_start_init_point": "yes",
    "warm_start_bound_push": 1e-9,
    "warm_start_slack_bound_push": 1e-9,
    "warm_start_mult_bound_push": 1e-9,
    "mu_init": 1e-6,
}


@dataclass(frozen=True)
class IterationInfo:
    """What the progress callback receives once per Ipopt iteration."""

    iteration: int
    objective: float  # in the model's own sense and units
    primal_infeasibility: float  # Ipopt's (scaled) constraint violation
    dual_infeasibility: float  # Ipopt's (scaled) optimality error
    mu: float  # barrier parameter
    step_norm: float
    alpha_primal: float
    alpha_dual: float
    restoration: bool  # True in Ipopt's feasibility restoration phase


@dataclass(frozen=True)
class BoundDuals:
    """Duals of the bounds of one variable (see module docstring for the sign)."""

    lower: float
    upper: float


@dataclass
class Timings:
    conversion_s: float = 0.0  # Pyomo walk and CasADi graph (0 when reused)
    derivatives_s: float = 0.0  # Jacobian, Hessian, functions (0 when reused)
    ipopt_s: float = 0.0  # Ipopt, including its calls of the CasADi functions
    ipopt_cpu_s: float = 0.0  # the same span in process CPU seconds (all threads): unlike the wall time, not
    # stretched by other work on the machine, so a run's CPU against it is a ratio that load does not blur
    total_s: float = 0.0  # the whole solve_nlp call


@dataclass
class NlpResult:
    """Result of :func:`solve_nlp`; see the module docstring for the dual signs."""

    status: SolveStatus
    message: str
    iterations: int
    objective: float | None
    timings: Timings
    constraint_duals: ComponentMap  # ConstraintData -> d f*/d b
    bound_duals: ComponentMap  # VarData -> BoundDuals
    primal_infeasibility: float = float("nan")  # last reported by Ipopt
    dual_infeasibility: float = float("nan")
    reused_structure: bool = False
    evaluation_errors: list[str] = field(default_factory=list)
    n_variables: int = 0
    n_constraints: int = 0
    ipopt_status: int | None = None

    @property
    def ok(self) -> bool:
        return self.status.ok

    def dual(self, con) -> float:
        """Dual of one constraint data object (``d f*/d b``)."""
        return self.constraint_duals[con]

    def bound_dual(self, var) -> BoundDuals:
        return self.bound_duals[var]


class _Problem:
    """The cyipopt callback object; every callback is a vectorised CasADi call."""

    def __init__(self, structure: _nlp.Structure, callback, sense: int):
        self.ev = structure.evaluator
        self.fns = structure.functions
        self.tape = structure.tape
        self.callback = callback
        self.sense = sense
        self.iterations = 0
        self.inf_pr = float("nan")
        self.inf_du = float("nan")
        self.bad: list[str] = []
        self.stop_requested = False

    # --- evaluations -----------------------------------------------------------------
    def objective(self, x):
        v = self.ev.objective(x)
        if not np.isfinite(v):
            self._report(f"objective value is {v} at iteration {self.iterations}")
            raise cyipopt.CyIpoptEvaluationError()
        return v

    def gradient(self, x):
        out = self.ev.gradient(x)
        if not np.isfinite(out).all():
            cols = np.flatnonzero(~np.isfinite(out))
            self._report(f"objective gradient is NaN/inf with respect to "
                         f"{self._var_names(cols)} at iteration {self.iterations}")
            raise cyipopt.CyIpoptEvaluationError()
        return out

    def constraints(self, x):
        out = self.ev.constraints(x)
        if not np.isfinite(out).all():
            rows = np.flatnonzero(~np.isfinite(out))
            self._report(f"NaN/inf value of {self._con_names(rows)} at iteration "
                         f"{self.iterations}")
            raise cyipopt.CyIpoptEvaluationError()
        return out

    def jacobian(self, x):
        out = self.ev.jacobian(x)
        if not np.isfinite(out).all():
            bad = np.flatnonzero(~np.isfinite(out))
            rows = np.unique(self.fns.jac_rows[bad])
            cols = np.unique(self.fns.jac_cols[bad])
            self._report(f"NaN/inf derivative of {self._con_names(rows)} with respect "
                         f"to {self._var_names(cols)} at iteration {self.iterations}")
            raise cyipopt.CyIpoptEvaluationError()
        return out

    def hessian(self, x, lagrange, obj_factor):
        out = self.ev.hessian(x, lagrange, obj_factor)
        if not np.isfinite(out).all():
            bad = np.flatnonzero(~np.isfinite(out))
            cols = np.unique(np.concatenate((self.fns.hess_rows[bad],
                                             self.fns.hess_cols[bad])))
            self._report(f"NaN/inf second derivative with respect to "
                         f"{self._var_names(cols)} at iteration {self.iterations}")
            raise cyipopt.CyIpoptEvaluationError()
        return out

    def jacobianstructure(self):
        return self.fns.jac_rows, self.fns.jac_cols

    def hessianstructure(self):
        return self.fns.hess_rows, self.fns.hess_cols

    def intermediate(self, alg_mod, iter_count, obj_value, inf_pr, inf_du, mu, d_norm,
                     regularization_size, alpha_du, alpha_pr, ls_trials):
        self.iterations = iter_count
        self.inf_pr, self.inf_du = inf_pr, inf_du
        if self.callback is None:
            return True
        info = IterationInfo(
            iteration=iter_count, objective=self.sense * obj_value,
            primal_infeasibility=inf_pr, dual_infeasibility=inf_du, mu=mu,
            step_norm=d_norm, alpha_primal=alpha_pr, alpha_dual=alpha_du,
            restoration=alg_mod == 1,
        )
        if self.callback(info) is False:
            self.stop_requested = True
            return False
        return True

    # --- naming ------------------------------------------------------------------------
    def _report(self, text: str) -> None:
        if len(self.bad) < 20:
            self.bad.append(text)

    def _con_names(self, rows) -> str:
        return _names([self.tape.constraints[i].name for i in rows[:3]], len(rows),
                      "constraint")

    def _var_names(self, cols) -> str:
        return _names([self.tape.variables[i].name for i in cols[:3]], len(cols),
                      "variable")


def _names(first: list[str], total: int, what: str) -> str:
    text = f"{what}{'s' if total > 1 else ''} " + ", ".join(first)
    if total > len(first):
        text += f" (and {total - len(first)} more)"
    return text


def _bounds(items, lower: str, upper: str) -> tuple[np.ndarray, np.ndarray]:
    lo = np.empty(len(items))
    up = np.empty(len(items))
    for i, c in enumerate(items):
        a, b = getattr(c, lower), getattr(c, upper)
        lo[i] = -np.inf if a is None else a
        up[i] = np.inf if b is None else b
    return lo, up


def _initial_point(variables, lb, ub) -> np.ndarray:
    x0 = np.fromiter((np.nan if v.value is None else v.value for v in variables),
                     dtype=float, count=len(variables))
    missing = np.isnan(x0)
    if missing.any():  # no value given: 0 projected into the bounds
        x0[missing] = np.clip(0.0, lb[missing], ub[missing])
    return x0


def _scaling_factors(model) -> dict[int, float]:
    """id(component data) -> factor, from every ``scaling_factor`` Suffix in the model.

    Suffixes on inner blocks override those on outer blocks (the most local wins).
    """
    factors: dict[int, float] = {}
    blocks = [model] if isinstance(model, BlockData) else []
    blocks += list(model.block_data_objects(active=True, descend_into=True))
    seen = set()
    for blk in blocks:
        if id(blk) in seen:
            continue
        seen.add(id(blk))
        suffix = blk.component("scaling_factor")
        if not isinstance(suffix, Suffix):
            continue
        for comp, val in suffix.items():
            if val is None:
                continue
            if hasattr(comp, "is_indexed") and comp.is_indexed():
                for data in comp.values():
                    factors[id(data)] = float(val)
            else:
                factors[id(comp)] = float(val)
    return factors


# Ipopt options of integer type (others given as Python ints are passed as reals)
_INTEGER_OPTIONS = {
    "max_iter", "print_level", "file_print_level", "acceptable_iter", "max_soc",
    "print_frequency_iter", "max_resto_iter", "accept_after_max_steps",
    "limited_memory_max_history", "max_refinement_steps", "min_refinement_steps",
    "mumps_mem_percent", "mumps_permuting_scaling", "mumps_pivot_order", "mumps_scaling",
    "watchdog_shortened_iter_trigger", "watchdog_trial_iter_max", "num_linear_variables",
    "max_filter_resets", "filter_reset_trigger", "quality_function_max_section_steps",
    "limited_memory_max_skipping", "adaptive_mu_kkterror_red_iters",
}


def _add_options(problem, options: dict) -> None:
    for key, val in options.items():
        if isinstance(val, bool):
            val = "yes" if val else "no"
        elif isinstance(val, (int, np.integer)):
            val = int(val) if key in _INTEGER_OPTIONS else float(val)
        elif isinstance(val, np.floating):
            val = float(val)
        try:
            problem.add_option(key, val)
        except (TypeError, ValueError) as exc:
            raise SolverError(f"Ipopt rejected option {key}={val!r} ({exc})") from None


def solve_nlp(model, options: dict | None = None, *, warm_start=False, callback=None,
              scaling: bool = True, load_solution: bool = True,
              use_cache: bool = True) -> NlpResult:
    """Solve the active part of a Pyomo model with Ipopt (MUMPS) through CasADi.

    Parameters
    ----------
    model : pyomo ConcreteModel or Block
        Active constraints (equality, inequality, ranged) and at most one active
        objective (none: a feasibility problem). Fixed variables and mutable parameters
        are constants whose current values are used; the current variable values are
        the initial point (a missing value starts at 0 projected into the bounds).
        Changing parameter values, bounds, or which variables are fixed reuses the
        derivative functions of the structure (see ``use_cache``).
    options : dict, optional
        Ipopt options passed through (``tol``, ``max_iter``, ``max_wall_time``,
        ``mu_strategy``, ``nlp_scaling_method``, ``print_level``, ...); ``time_limit``
        is accepted for ``max_wall_time``. Defaults: ``print_level=0``, ``sb=yes``
        (no banner), ``linear_solver=mumps``.
    warm_start : bool or NlpResult
        ``True``: start from the multipliers of the previous solve of the same model
        structure (if any) with Ipopt's warm-start options; an :class:`NlpResult`:
        start from its duals. Primal values always come from the model.
    callback : callable, optional
        Called with an :class:`IterationInfo` once per iteration; return ``False`` to
        stop Ipopt (status ``USER_STOP``).
    scaling : bool
        ``True``: if the model has a ``scaling_factor`` Suffix, use its factors for
        variables, constraints and the objective (Ipopt ``user-scaling``), otherwise
        Ipopt's gradient-based scaling. ``False``: no scaling.
    load_solution : bool
        Write Ipopt's final point into the free variables (for any status where Ipopt
        returned a point; check ``status``) and the duals into a ``dual`` IMPORT Suffix
        of the model if it has one.
    use_cache : bool
        Reuse the derivative functions built for the same model structure (same active
        constraints, objective and named-expression bodies; fixing and unfixing
        variables keeps the structure).

    Returns
    -------
    NlpResult
        Status, message, iterations, objective, timings, duals (module docstring gives
        the sign convention).
    """
    t_start = time.perf_counter()
    structure, reused = _nlp.get_structure(model, use_cache=use_cache)
    tape = structure.tape
    n, m = structure.functions.n, structure.functions.m
    sense = tape.sense

    # values that may change between solves of one structure
    ev = structure.evaluator
    ev.set_parameters(structure.parameter_values())
    lb, ub = _bounds(tape.variables, "lb", "ub")
    cl, cu = _bounds(tape.constraints, "lb", "ub")
    x0 = _initial_point(tape.variables, lb, ub)
    values_s = time.perf_counter() - t_start
    if reused:  # only the cache look-up and the values above
        timings = Timings(conversion_s=values_s, derivatives_s=0.0)
    else:  # everything before Ipopt that is not derivative setup counts as conversion
        timings = Timings(conversion_s=values_s - structure.derivatives_s,
                          derivatives_s=structure.derivatives_s)

    if n == 0:
        return _no_freedom(structure, timings, t_start, reused, load_solution, model)

    prob = _Problem(structure, callback, sense)
    nlp = cyipopt.Problem(n=n, m=m, problem_obj=prob, lb=lb, ub=ub, cl=cl, cu=cu)
    opts = dict(_DEFAULT_OPTIONS)
    user = {_ALIASES.get(k, k): v for k, v in (options or {}).items()}
    if scaling:
        factors = _scaling_factors(model)
        if factors and "nlp_scaling_method" not in user:
            obj_s = factors.get(id(tape.objective), 1.0) if tape.objective is not None else 1.0
            x_s = np.array([factors.get(id(v), 1.0) for v in tape.variables])
            g_s = np.array([factors.get(id(c), 1.0) for c in tape.constraints])
            nlp.set_problem_scaling(obj_scaling=obj_s, x_scaling=x_s,
                                    g_scaling=g_s if m else None)
            opts["nlp_scaling_method"] = "user-scaling"
    else:
        opts["nlp_scaling_method"] = "none"
    lam0, zl0, zu0 = _warm_multipliers(warm_start, structure, sense)
    if lam0 is not None:
        opts.update(_WARM_DEFAULTS)
    opts.update(user)
    _add_options(nlp, opts)

    t_ip, c_ip = time.perf_counter(), time.process_time()
    if lam0 is not None:
        x, info = nlp.solve(x0, lagrange=lam0, zl=zl0, zu=zu0)
    else:
        x, info = nlp.solve(x0)
    timings.ipopt_s = time.perf_counter() - t_ip
    timings.ipopt_cpu_s = time.process_time() - c_ip
    nlp.close()

    code = int(info["status"])
    status = _IPOPT_STATUS.get(code, SolveStatus.ERROR)
    message = _IPOPT_TEXT.get(code, f"Ipopt status {code}")
    if prob.bad and not status.ok:
        if status in (SolveStatus.ERROR, SolveStatus.RESTORATION_FAILED):
            status = SolveStatus.EVALUATION_ERROR
        message += "; evaluation failed: " + "; ".join(prob.bad[:3])

    lam, zl, zu = info["mult_g"], info["mult_x_L"], info["mult_x_U"]
    if status.ok:
        structure.last_multipliers = (lam.copy(), zl.copy(), zu.copy())
    duals, bduals = _map_duals(tape, lam, zl, zu, sense)
    if tape.fixed and np.isfinite(x).all() and np.isfinite(lam).all():
        _fixed_duals(bduals, tape.fixed, ev.fixed_reduced_gradient(x, lam), sense)
    objective = None
    if tape.objective is not None and np.isfinite(x).all():
        objective = sense * ev.objective(x)
    if load_solution:
        for v, val in zip(tape.variables, x.tolist()):
            v.set_value(val, skip_validation=True)
        _load_dual_suffix(model, duals)
    timings.total_s = time.perf_counter() - t_start
    return NlpResult(
        status=status, message=message, iterations=prob.iterations, objective=objective,
        timings=timings, constraint_duals=duals, bound_duals=bduals,
        primal_infeasibility=prob.inf_pr, dual_infeasibility=prob.inf_du,
        reused_structure=reused, evaluation_errors=list(prob.bad), n_variables=n,
        n_constraints=m, ipopt_status=code,
    )


def _warm_multipliers(warm_start, structure, sense):
    if warm_start is False or warm_start is None:
        return None, None, None
    tape = structure.tape
    if isinstance(warm_start, NlpResult):
        d, b = warm_start.constraint_duals, warm_start.bound_duals
        lam = np.array([-sense * d.get(c, 0.0) for c in tape.constraints])
        zl = np.array([sense * b[v].lower if v in b else 0.0 for v in tape.variables])
        zu = np.array([-sense * b[v].upper if v in b else 0.0 for v in tape.variables])
        return lam, np.maximum(zl, 0.0), np.maximum(zu, 0.0)
    if structure.last_multipliers is None:
        return None, None, None
    return structure.last_multipliers


def _map_duals(tape, lam, zl, zu, sense):
    duals = ComponentMap(zip(tape.constraints, (-sense * lam).tolist()))
    lo = (sense * zl).tolist()
    up = (-sense * zu).tolist()
    bduals = ComponentMap(
        (v, BoundDuals(a, b)) for v, a, b in zip(tape.variables, lo, up)
    )
    return duals, bduals


def _fixed_duals(bduals, fixed, reduced, sense) -> None:
    """Bound duals of fixed variables from the Lagrangian's derivative at the solution.

    A fixed variable is held at its value by both of its bounds at once. Its
    ``BoundDuals`` are what Ipopt's ``make_parameter`` treatment reports: with
    ``r = d(f + lam' g)/dx_j`` in Ipopt's convention, ``zl = max(r, 0)`` and
    ``zu = max(-r, 0)``, mapped like the duals of free variables. So
    ``lower + upper = d f* / d value`` (envelope theorem) and at most one is nonzero.
    """
    zl = np.maximum(reduced, 0.0)
    zu = np.maximum(-reduced, 0.0)
    for v, a, b in zip(fixed, (sense * zl).tolist(), (-sense * zu).tolist()):
        bduals[v] = BoundDuals(a, b)


def _load_dual_suffix(model, duals) -> None:
    suffix = model.component("dual")
    if isinstance(suffix, Suffix) and suffix.import_enabled():
        for con, val in duals.items():
            suffix[con] = val


def _no_freedom(structure, timings, t_start, reused, load_solution, model) -> NlpResult:
    """Every variable is fixed: check the constraints at the fixed point."""
    tape = structure.tape
    ev = structure.evaluator
    x = np.zeros(0)
    g = ev.constraints(x) if structure.functions.m else np.zeros(0)
    cl, cu = _bounds(tape.constraints, "lb", "ub")
    viol = np.maximum(np.maximum(cl - g, g - cu), 0.0)
    worst = float(viol.max()) if len(viol) else 0.0
    if not np.isfinite(g).all():
        status, message = SolveStatus.EVALUATION_ERROR, "NaN/inf constraint value"
    elif worst <= 1e-8:
        status, message = SolveStatus.OPTIMAL, "no free variables; constraints hold"
    else:
        status = SolveStatus.INFEASIBLE
        message = (f"no free variables; {tape.constraints[int(viol.argmax())].name} "
                   f"violated by {worst:g}")
    objective = tape.sense * ev.objective(x) if tape.objective is not None else None
    timings.total_s = time.perf_counter() - t_start
    zeros = ComponentMap((c, 0.0) for c in tape.constraints)
    if load_solution:
        _load_dual_suffix(model, zeros)
    return NlpResult(status=status, message=message, iterations=0, objective=objective,
                     timings=timings, constraint_duals=zeros, bound_duals=ComponentMap(),
                     primal_infeasibility=worst, dual_infeasibility=0.0,
                     reused_structure=reused, n_variables=0,
                     n_constraints=structure.functions.m)


__all__ = ["BoundDuals", "IterationInfo", "NlpResult", "SolveStatus", "Timings",
           "solve_nlp"]
