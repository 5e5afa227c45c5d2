"""Steady state of the simulator's equations: a root solve that cannot stall.

Two methods, the second a fallback that always makes progress:

1. **Pseudo-transient Newton** (Kelley & Keyes 1998): damped Newton steps
   ``(I/dt - J) dy = f(y)`` with the sparse Jacobian of
   :class:`~airtaper.simulate.system.System`, the pseudo time step ``dt`` growing
   as the residual falls (switched evolution relaxation, Mulder & van Leer 1985:
   ``dt`` times the ratio of the last two residuals, after every accepted step,
   whole or line-searched), so the iteration ends with plain Newton steps and
   quadratic convergence. Steps at long ``dt`` are line-searched on the residual
   (Nocedal & Wright 2006 section 3.1), which keeps the Newton phase from cycling
   at kinks of ``f`` (a DO controller clamped at an end of its airflow range).
   Iterates stay positive by a fraction-to-the-boundary rule per component (a
   step lowers a concentration by at most :data:`_TO_BOUNDARY` of its value, as
   interior-point methods keep their iterates inside the bounds, Wachter & Biegler
   2006 eq. 15), not by clipping at zero: clipping a thin clarifier layer's
   biomass to zero made its residual jump by 20 x and the step collapse on the
   first steps from BSM1's initial guess. This is the fast path: a few dozen
   linear solves on most plants (BSM1 from its initial guess: 53, no fallback).
2. **Time integration, then Newton again.** Pseudo-transient steps are implicit
   Euler steps whose length is chosen from the residual, not from an error
   estimate; near a kink of ``f`` (the minimum of two settling fluxes on a
   thickening plateau, where the linear model holds within a few mg/L) the
   residual test rejects long steps and ``dt`` can collapse, so the iteration
   sits still while the slow modes (nitrifiers: about 100 d) have not settled.
   When Newton stalls (``dt`` collapsed, or the best residual no better by a
   factor 10 over :data:`_STALL_STEPS` steps) the plant's own equations are
   integrated in time with a stiff error-controlled solver (``solve_ivp`` BDF
   with the sparse Jacobian) until the scaled rate of change is small or the leg
   ends, and Newton restarts from there: plain full steps first (from near the
   steady state they converge quadratically even where the residual rises on the
   first step), the pseudo-transient iteration if they do not converge. Every
   leg advances simulated time (a leg the integrator cannot finish counts as
   spent), so the sequence cannot stall: either the plant settles (a stable
   steady state is an attractor of its dynamics) and Newton finishes, or
   simulated time runs out (:data:`MAX_SIMULATED_d`) and
   :class:`NoSteadyStateError` says why.

Before anything is solved, :func:`check_washout` refuses a plant whose sludge
age is below the nitrifiers' minimum at its temperature: no nitrifying steady
state exists there, whatever the aeration.

References
----------
Kelley, C.T., Keyes, D.E. (1998). Convergence analysis of pseudo-transient
continuation. SIAM J. Numer. Anal. 35(2), 508-523.
Mulder, W.A., van Leer, B. (1985). Experiments with implicit upwind methods for
the Euler equations. J. Comput. Phys. 59(2), 232-246.
Nocedal, J., Wright, S.J. (2006). Numerical Optimization, 2nd ed. Springer.
Wachter, A., Biegler, L.T. (2006). On the implementation of an interior-point
filter line-search algorithm for large-scale nonlinear programming. Math.
Program. 106(1), 25-57.
Shampine, L.F., Reichelt, M.W. (1997). The MATLAB ODE suite. SIAM J. Sci. Comput.
18(1), 1-22 (the variable-order BDF method scipy's ``BDF`` implements).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from scipy.integrate import solve_ivp

from airtaper.errors import NoSteadyStateError
from airtaper.process.stoichiometry import IDX
from airtaper.simulate.plant import MODE_DO, Inputs
from airtaper.simulate.system import NC, System

#: Kept for callers that caught the old name: a steady state the solve could not reach.
SteadyStateError = NoSteadyStateError


@dataclass
class SteadySolve:
    y: np.ndarray
    iterations: int  # linear solves of the Newton phases
    residual: float  # max |f_i| / max(|y_i|, 1), per day
    simulated_d: float = 0.0  # simulated time of the fallback (0: Newton alone)
    legs: int = 0  # time-integration legs of the fallback


def initial_guess(system: System, inp: Inputs) -> np.ndarray:
    """A plausible activated-sludge state to start the iteration from.

    Solubles from the influent (nitrogen half nitrified), biomass and inerts at
    typical mixed-liquor levels, DO at the setpoint or 1 mg/L in aerated
    zones; clarifier layers thin above the feed and thickening below it.
    common practice (no source): a starting point only, the solution does not
    depend on it.
    """
    c_in = inp.c_influent
    z = np.zeros(NC)
    for k in ("SI", "SALK"):
        z[IDX[k]] = c_in[IDX[k]]
    z[IDX["SS"]] = 5.0
    z[IDX["XI"]] = max(20.0 * c_in[IDX["XI"]], 200.0)
    z[IDX["XS"]] = 80.0
    z[IDX["XBH"]] = 2000.0
    z[IDX["XBA"]] = 120.0
    z[IDX["XP"]] = 400.0
    tn = c_in[IDX["SNH"]] + c_in[IDX["SND"]]
    z[IDX["SNO"]] = 0.3 * tn
    z[IDX["SNH"]] = 0.2 * tn
    z[IDX["SND"]] = 1.0
    z[IDX["XND"]] = 5.0
    Y = np.tile(z, (system.nb, 1))
    for i, zone in enumerate(system.plant.zones):
        if inp.mode[i] == MODE_DO:
            Y[i, IDX["SO"]] = inp.do_setpoint_mg_L[i]
        elif zone.aerated and (inp.kla_per_d[i] > 0):
            Y[i, IDX["SO"]] = 1.0
    if system.layered:
        part = [IDX[k] for k in ("XI", "XS", "XBH", "XBA", "XP", "XND")]
        f, L = system.feed, system.n_layers
        for j in range(L):
            b = system.nz + j
            Y[b] = Y[system.nz - 1]
            scale = 0.01 * 2.0 ** (j - f) if j < f else (1.0 if j == f else 1.0 + (j - f) / (L - 1 - f))
            Y[b, part] *= scale
    return Y.reshape(-1)


# --- washout: no nitrifying steady state -----------------------------------------------
def aerable_fraction(system: System) -> float:
    """Share of the reactor volume in zones that can be aerated (diffusers or a fixed kLa)."""
    can = np.array([a is not None for a in system.plant.plant.aeration])
    return float(system.V[can].sum() / system.V.sum())


def minimum_srt_d(params, aerated_fraction: float) -> float:
    """Sludge age below which nitrifiers wash out at any aeration, d.

    Nitrifiers grow only in aerated zones, at most at ``mu_A`` (ammonia and
    oxygen saturating), and decay everywhere at ``b_A`` (ASM1, Henze et al.
    1987). A steady population needs growth to balance decay and wasting::

        mu_A f_aer SRT >= 1 + b_A SRT   ->   SRT_min = 1 / (mu_A f_aer - b_A)

    with ``f_aer`` the aerable share of the volume (solids evenly spread over
    the zones; common practice (no source)). Infinite when ``mu_A f_aer <= b_A``.

    References
    ----------
    Henze, M., Grady, C.P.L., Gujer, W., Marais, G.v.R., Matsuo, T. (1987).
    Activated Sludge Model No. 1. IAWPRC Scientific and Technical Report No. 1.
    """
    net = params.mu_A * aerated_fraction - params.b_A
    return float(1.0 / net) if net > 0.0 else float("inf")


def check_washout(system: System, inp: Inputs, srt_d: float | None = None, y=None) -> None:
    """Raise :class:`NoSteadyStateError` when the sludge age cannot keep nitrifiers.

    ``srt_d``: the sludge age to check (default: the layout's target; nothing is
    checked without one); ``y``: the steady state it was reached at (the message then
    says how much solids leave with the waste and over the weir).
    """
    srt = inp.srt_target_d if srt_d is None else srt_d
    if srt is None or not np.isfinite(srt):
        return
    f_aer = aerable_fraction(system)
    srt_min = minimum_srt_d(inp.params, f_aer)
    if srt < srt_min:
        path = system.plant.plant.path
        what = "the target sludge age"
        if srt_d is not None:
            _, info = system.rhs(y, inp, detail=True)
            wasted = float(info["q_waste_m3_d"]) * float(system.tss(info["c_underflow"])) / 1000.0
            lost = float(info["q_effluent_m3_d"]) * float(system.tss(info["c_effluent"])) / 1000.0
            what = (f"the sludge age the plant reaches ({wasted:,.0f} kg/d of solids wasted, {lost:,.0f} kg/d "
                    "lost over the weir)")
        limit = f"{srt_min:.3g} d" if np.isfinite(srt_min) else "any value"
        raise NoSteadyStateError(
            f"{path}: wasting: no steady state with nitrification: {what} ({srt:.3g} d) is below the "
            f"nitrifiers' minimum sludge age at {inp.temperature_C:.3g} C ({limit}: mu_A {inp.params.mu_A:.3g} /d, "
            f"b_A {inp.params.b_A:.3g} /d, {100 * f_aer:.0f} % of the volume aerable); they wash out at any "
            "aeration (lengthen the sludge age, waste less, or aerate more of the volume)",
            cause="washout")


# --- method 1: pseudo-transient Newton ---------------------------------------------------
def _scaled_norm(f, y):
    return float(np.max(np.abs(f) / np.maximum(np.abs(y), 1.0)))


#: Pseudo time step (d) from which steps are line-searched: there ``(I/dt - J) dy = f`` is
#: close to a Newton step, a descent direction of the residual norm.
_DT_SEARCH_d = 1.0
#: Shortest step fraction the line search tries.
_MIN_LAMBDA = 1.0 / 16.0
#: Newton has stalled when its best residual fell less than 10 x over this many steps ...
_STALL_STEPS = 60
#: ... or when the pseudo time step collapsed below this, d.
_DT_COLLAPSED_d = 1e-3
#: Largest share of its value a step may take off a concentration (fraction to the boundary).
_TO_BOUNDARY = 0.9


def _step(y, dy):
    """``y + dy`` with every component kept at or above ``(1 - _TO_BOUNDARY) y`` (module notes)."""
    return np.maximum(y + dy, (1.0 - _TO_BOUNDARY) * y)


def _merit(f, w) -> float:
    """Root-mean-square of the residual with fixed weights ``w`` (the line-search merit)."""
    return float(np.sqrt(np.mean((f * w) ** 2)))


def _backtrack(system, inp, y, f, dy, y_full, f_full):
    """The first ``y + lambda dy`` (lambda = 1, 1/2, ... ``_MIN_LAMBDA``) whose weighted residual falls
    (Armijo, Nocedal & Wright 2006 section 3.1); the full step when none does."""
    w = 1.0 / np.maximum(np.abs(y), 1.0)
    m0 = _merit(f, w)
    lam, y_new, f_new = 1.0, y_full, f_full
    while True:
        m_new = _merit(f_new, w)
        if np.isfinite(m_new) and m_new <= (1.0 - 1e-4 * lam) * m0:
            return y_new, f_new, lam
        lam *= 0.5
        if lam < _MIN_LAMBDA:
            return y_full, f_full, 1.0
        y_new = _step(y, lam * dy)
        f_new = system.rhs(y_new, inp)


def _linear_solve(A, b) -> np.ndarray | None:
    """x of the sparse system ``A x = b`` (``A`` CSC) by LU factorisation; None when ``A`` is singular.

    The singular case is caught at the factorisation (SuperLU's "exactly singular" error), so the
    caller's fallback takes over without the warning (and the NaN solution) that ``spsolve`` gives
    there: on an overloaded layered demo (tests/simulate/test_steady.py) the full Newton steps
    after a time integration met an exactly singular Jacobian twice and scipy printed "Matrix is
    exactly singular" to the user before the next method reached the steady state.
    """
    try:
        lu = spla.splu(A)
    except RuntimeError:  # "Factor is exactly singular"
        return None
    x = lu.solve(np.asarray(b, dtype=float))
    return x if np.all(np.isfinite(x)) else None


def _newton(system, inp, y, tol, max_iter, dt0_d):
    """Pseudo-transient Newton from ``y``; returns (best y, its residual, linear solves, converged).

    Stops early when it stalls (see :data:`_STALL_STEPS`, :data:`_DT_COLLAPSED_d`).
    """
    f = system.rhs(y, inp)
    res = _scaled_norm(f, y)
    best = (y, res)
    best_at, mark = 0, res  # the step at which the residual last fell 10 x below ``mark``
    dt = dt0_d
    eye = sp.identity(system.n, format="csc")
    it = 0
    while it < max_iter:
        if res < tol:
            return y, res, it, True
        it += 1
        J = system.jacobian(y, inp, f0=f)
        A = (eye / dt - J).tocsc() if np.isfinite(dt) else (-J).tocsc()
        dy = _linear_solve(A, f)
        if dy is None:  # singular or not finite: a shorter pseudo-time step makes the matrix regular
            dt *= 0.1
            if dt < _DT_COLLAPSED_d:
                break
            continue
        y_new = _step(y, dy)
        f_new = system.rhs(y_new, inp)
        if dt >= _DT_SEARCH_d:
            y_new, f_new, _ = _backtrack(system, inp, y, f, dy, y_new, f_new)
        res_new = _scaled_norm(f_new, y_new)
        if not np.isfinite(res_new) or res_new > 10.0 * res:
            dt *= 0.25
            if dt < _DT_COLLAPSED_d:
                break
            continue
        # every accepted step, line-searched or whole: growing only after whole steps held dt at
        # about 3 d for 100+ steps on BSM1 while the line search accepted half steps
        dt = min(dt * max(min(res / max(res_new, 1e-300), 10.0), 0.5), 1e12)
        y, f, res = y_new, f_new, res_new
        if res < 0.1 * mark:
            best_at, mark = it, res
        if res < best[1]:
            best = (y, res)
        if it - best_at > _STALL_STEPS or dt < _DT_COLLAPSED_d:
            break
    return best[0], best[1], it, best[1] < tol


def _plain_newton(system, inp, y, tol, max_iter=15):
    """Full Newton steps (kept non-negative) from a state near the steady state; (y, residual, steps, ok).

    Unglobalised on purpose: from the end of a time integration the residual may rise on the
    first step (fast components overshoot) and still converge quadratically, which a line
    search or a pseudo time step would refuse. Only a converged result is used.
    """
    f = system.rhs(y, inp)
    res = _scaled_norm(f, y)
    for it in range(max_iter):
        if res < tol:
            return y, res, it, True
        dy = _linear_solve((-system.jacobian(y, inp, f0=f)).tocsc(), f)
        if dy is None:  # singular Jacobian: not converged here, the caller's next method takes over
            return y, res, it + 1, False
        y = np.maximum(y + dy, 0.0)
        f = system.rhs(y, inp)
        res = _scaled_norm(f, y)
        if not np.isfinite(res):
            return y, res, it + 1, False
    return y, res, max_iter, res < tol


# --- method 2: time integration toward the steady state ---------------------------------
#: Total simulated time the fallback may spend before it declares no steady state, d
#: (about 30 times the slowest settling mode of a nitrifying plant, the nitrifiers' ~100 d).
MAX_SIMULATED_d = 3000.0
#: First leg of simulated time, d; each further leg is twice as long.
_FIRST_LEG_d = 25.0


def _integrate(system, inp, y, horizon_d, target):
    """Integrate the plant's equations from ``y`` for ``horizon_d`` or until the scaled rate of change
    falls below ``target``; returns (y, simulated time, success)."""
    def fun(t, yy):
        return system.rhs(np.maximum(yy, 0.0), inp)

    def jac(t, yy):
        return system.jacobian(np.maximum(yy, 0.0), inp)

    def settled(t, yy):
        yy = np.maximum(yy, 0.0)
        return np.log(max(_scaled_norm(system.rhs(yy, inp), yy), 1e-300)) - np.log(target)

    settled.terminal = True
    settled.direction = -1
    scale = np.maximum(np.abs(y), 1.0)
    sol = solve_ivp(fun, (0.0, horizon_d), y, method="BDF", jac=jac, rtol=1e-4, atol=1e-4 * scale,
                    events=settled, first_step=1e-4)
    y_end = np.maximum(sol.y[:, -1], 0.0)
    return y_end, float(sol.t[-1]), sol.status >= 0


def solve_steady(system: System, inp: Inputs, y0=None, tol: float = 1e-10, max_iter: int = 200,
                 dt0_d: float = 0.05, check: bool = True) -> SteadySolve:
    """Root of the right-hand side (see module notes).

    Parameters
    ----------
    tol : float
        Convergence when ``max_i |f_i| / max(|y_i|, 1)`` is below ``tol`` (1/d).
    max_iter : int
        Most pseudo-time steps of each Newton phase (accepted or rejected), each one linear solve.
    check : bool
        Refuse a sludge age below the nitrifiers' minimum first (:func:`check_washout`).

    Raises
    ------
    NoSteadyStateError
        The nitrifiers wash out, or the plant still changes after :data:`MAX_SIMULATED_d`
        of simulated time (the message names the largest rate of change and where).
    """
    if check:
        check_washout(system, inp)
    y = initial_guess(system, inp) if y0 is None else np.maximum(np.asarray(y0, dtype=float), 0.0)
    y, res, iters, ok = _newton(system, inp, y, tol, max_iter, dt0_d)
    simulated, legs, leg = 0.0, 0, _FIRST_LEG_d
    target = 1e-5
    while not ok and simulated < MAX_SIMULATED_d:
        legs += 1
        span = min(leg, MAX_SIMULATED_d - simulated)
        y, t, finished = _integrate(system, inp, y, span, target)
        simulated += t if finished else span
        y_n, res_n, k, ok = _plain_newton(system, inp, y, tol)
        iters += k
        if ok:
            y, res = y_n, res_n
            break
        y, res, k, ok = _newton(system, inp, y, tol, max_iter, 1.0)
        iters += k
        leg *= 2.0
        target = max(target * 0.01, 1e-9)
    if not ok and res < 100 * tol:
        ok = True
    if not ok:
        raise NoSteadyStateError(_no_steady_message(system, inp, y, res, simulated), cause="no steady state")
    if check and inp.srt_target_d is None:  # a fixed waste flow: check the sludge age it gives
        check_washout(system, inp, float(system.rhs(y, inp, detail=True)[1]["srt_d"]), y)
    return SteadySolve(y, iters, res, simulated, legs)


def _no_steady_message(system, inp, y, res, simulated) -> str:
    """Plain words on why no steady state was found: where the plant still changes."""
    from airtaper.layout.types import ASM1_COMPONENTS

    f = system.rhs(y, inp)
    rate = np.abs(f) / np.maximum(np.abs(y), 1.0)
    k = int(np.argmax(rate))
    b, c = divmod(k, NC)
    plant = system.plant.plant
    where = plant.zone_ids[b] if b < system.nz else f"clarifier layer {b - system.nz + 1}"
    return (f"{plant.path}: no steady state found: after {simulated:.0f} d of simulated time the plant still "
            f"changes (scaled rate {res:.3g} /d, largest in {ASM1_COMPONENTS[c]} of {where})")
