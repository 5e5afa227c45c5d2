"""Steady state of the simulator's equations by a Newton-type root solve.

The root of ``f(y) = 0`` is found by pseudo-transient continuation (Kelley &
Keyes 1998): damped Newton steps ``(I/dt - J) dy = f(y)`` with the sparse
Jacobian of :class:`~airtaper.simulate.system.System`, the pseudo time step
``dt`` growing as the residual falls (switched evolution relaxation, ``dt_k+1
= dt_k ||f_k-1|| / ||f_k||``), so the iteration ends with plain Newton steps
(``dt`` -> infinity) and quadratic convergence. Once ``dt`` is long the steps
are line-searched on the residual norm (backtracking, see :func:`solve_steady`),
which keeps the Newton phase from cycling at kinks of ``f`` (clamped DO
control). Iterates are kept non-negative (concentrations). This is a root
solve, not a long simulation: BSM1 with its layered settler converges in
about 150 linear solves, the demo in a few dozen.

References
----------
Kelley, C.T., Keyes, D.E. (1998). Convergence analysis of pseudo-transient
continuation. SIAM J. Numer. Anal. 35(2), 508-523.
Nocedal, J., Wright, S.J. (2006). Numerical Optimization, 2nd ed. Springer.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from airtaper.errors import AirtaperError
from airtaper.process.stoichiometry import IDX
from airtaper.simulate.plant import MODE_DO, Inputs
from airtaper.simulate.system import NC, System


class SteadyStateError(AirtaperError):
    """The steady-state iteration did not converge."""


@dataclass
class SteadySolve:
    y: np.ndarray
    iterations: int
    residual: float  # max |f_i| / max(|y_i|, 1), per day


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


def _scaled_norm(f, y):
    return float(np.max(np.abs(f) / np.maximum(np.abs(y), 1.0)))


#: Pseudo time step (d) from which steps are line-searched: there ``(I/dt - J) dy = f`` is
#: close to a Newton step, a descent direction of the residual norm.
_DT_SEARCH_d = 1.0
#: Shortest step fraction the line search tries.
_MIN_LAMBDA = 1.0 / 16.0


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
        y_new = np.maximum(y + lam * dy, 0.0)
        f_new = system.rhs(y_new, inp)


def solve_steady(system: System, inp: Inputs, y0=None, tol: float = 1e-10, max_iter: int = 200,
                 dt0_d: float = 0.05) -> SteadySolve:
    """Root of the right-hand side (see module notes).

    Parameters
    ----------
    tol : float
        Convergence when ``max_i |f_i| / max(|y_i|, 1)`` is below ``tol`` (1/d).
    max_iter : int
        Most pseudo-time steps (accepted or rejected), each one linear solve.

    Notes
    -----
    Once ``dt`` reaches ``_DT_SEARCH_d`` every step is globalised by
    backtracking on the residual: ``y + lambda dy`` with the first ``lambda``
    of 1, 1/2, ... 1/16 whose weighted residual ``||f / max(|y_k|, 1)||_2``
    falls (Armijo condition, Nocedal & Wright 2006 section 3.1), the full step
    if none does; ``dt`` grows by switched evolution relaxation only after full
    steps. Without the line search, plain steps at large ``dt`` can cycle
    between the two branches of a DO controller clamped at its smallest kLa
    (a kink of ``f``) while ``dt`` keeps growing, as on the demo train split
    into 10 or 20 aerated zones. Short pseudo time steps are not searched:
    there the iteration follows the transient, whose residual may rise.

    References
    ----------
    Nocedal, J., Wright, S.J. (2006). Numerical Optimization, 2nd ed. Springer.
    """
    y = initial_guess(system, inp) if y0 is None else np.maximum(np.asarray(y0, dtype=float), 0.0)
    f = system.rhs(y, inp)
    res = _scaled_norm(f, y)
    dt = dt0_d
    eye = sp.identity(system.n, format="csc")
    for it in range(1, max_iter + 1):
        if res < tol:
            return SteadySolve(y, it - 1, res)
        J = system.jacobian(y, inp, f0=f)
        A = (eye / dt - J).tocsc() if np.isfinite(dt) else (-J).tocsc()
        try:
            dy = spla.spsolve(A, f)
        except RuntimeError:
            dy = np.full_like(y, np.nan)
        if not np.all(np.isfinite(dy)):
            dt = dt * 0.1
            continue
        y_new = np.maximum(y + dy, 0.0)
        f_new = system.rhs(y_new, inp)
        lam = 1.0
        if dt >= _DT_SEARCH_d:
            y_new, f_new, lam = _backtrack(system, inp, y, f, dy, y_new, f_new)
        res_new = _scaled_norm(f_new, y_new)
        if not np.isfinite(res_new) or res_new > 10.0 * res:
            dt *= 0.25
            if dt < 1e-8:
                break
            continue
        if lam == 1.0:
            dt = min(dt * max(min(res / max(res_new, 1e-300), 10.0), 0.5), 1e12)
        y, f, res = y_new, f_new, res_new
    if res < tol * 100:
        return SteadySolve(y, max_iter, res)
    raise SteadyStateError(f"steady state not reached: scaled residual {res:.3g} /d after {it} steps")
