"""Uncertainty of the fitted parameters: reduced Hessian, Gauss-Newton matrix, identifiability.

At the optimum of ``min f(x, theta) s.t. g(x, theta) = 0`` (``x`` the model states,
``g`` the model equations, square and nonsingular in ``x``), the states follow the
parameters along ``dx/dtheta = -g_x^-1 g_theta`` (implicit function theorem). With
``Z = [dx/dtheta; I]`` the reduced Hessian is ``H_red = Z' (grad^2 L) Z``, ``L`` the
Lagrangian with Ipopt's multipliers; the Gauss-Newton matrix is ``J' J`` with
``J = (dr/dx) Z`` the sensitivity of the weighted residuals ``r``. For
``f = 1/2 |r|^2`` both approximate the inverse covariance of the estimate; the
covariance reported is ``s^2 H_red^-1`` with ``s^2 = |r|^2 / (n - p)`` (the residual
variance, so a misstated measurement noise does not shrink or widen the intervals),
and 95 % intervals are ``theta +- t(0.975, n - p) SE``.

Identifiability: the eigenvalues of the Gauss-Newton matrix scaled by the parameter
values (``D J'J D``, ``D = diag(theta)``): the condition number, and any direction
whose eigenvalue is below :data:`WEAK_EIGENVALUE` of the largest (a combination of
parameters the data cannot tell apart); pairs correlated beyond :data:`HIGH_CORRELATION`.

References
----------
Bard, Y. (1974). Nonlinear Parameter Estimation. Academic Press, ch. 7 (covariance of
least-squares estimates). Biegler, L.T. (2010). Nonlinear Programming: Concepts,
Algorithms, and Applications to Chemical Processes. SIAM, section 7.4 (reduced Hessian
of an equality-constrained NLP and parameter sensitivity).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from pyomo.repn import generate_standard_repn

from airtaper.errors import ModelError
from airtaper.solve import nlp as _nlp

#: Eigenvalue (relative to the largest, scaled Fisher matrix) below which a direction is not identifiable.
#: Common practice (no source).
WEAK_EIGENVALUE = 1e-6
#: Correlation beyond which a pair of estimates is reported. Common practice (no source).
HIGH_CORRELATION = 0.95
#: Relative standard error beyond which an estimate is called poorly determined. Common practice (no source).
POOR_RELATIVE_SE = 0.5


@dataclass
class FitStatistics:
    names: list[str]
    values: np.ndarray
    reduced_hessian: np.ndarray
    gauss_newton: np.ndarray
    covariance: np.ndarray
    standard_error: np.ndarray
    correlation: np.ndarray
    t_quantile: float
    ci_low: np.ndarray
    ci_high: np.ndarray
    residual_variance: float
    n_observations: int
    condition_number: float
    eigenvalues: np.ndarray  # scaled Gauss-Newton, ascending
    eigenvectors: np.ndarray  # columns
    weak_directions: list[str]
    messages: list[str]


def _sensitivities(m, params: list, residual_exprs: list):
    """(Z restricted to the parameters' effect, dr/dtheta, H_red) at the current point."""
    structure, _ = _nlp.get_structure(m)
    tape = structure.tape
    fns = structure.functions
    ev = structure.evaluator
    ev.set_parameters(structure.parameter_values())
    cols = {id(v): k for k, v in enumerate(tape.variables)}
    try:
        pcols = np.array([cols[id(v)] for v in params], dtype=np.int64)
    except KeyError:
        raise ModelError("a fitted parameter is fixed or absent from the problem") from None
    n, mcon = fns.n, fns.m
    x = np.array([float(v.value) for v in tape.variables])
    J = sp.csc_matrix((ev.jacobian(x).copy(), (fns.jac_rows, fns.jac_cols)), shape=(mcon, n))
    is_p = np.zeros(n, dtype=bool)
    is_p[pcols] = True
    scols = np.flatnonzero(~is_p)
    if len(scols) != mcon:
        raise ModelError(f"the model is not square in its states ({mcon} equations, {len(scols)} states)")
    lu = spla.splu(J[:, scols].tocsc())
    dx = -lu.solve(J[:, pcols].toarray())  # (states, p)
    Z = np.zeros((n, len(pcols)))
    Z[scols] = dx
    Z[pcols, np.arange(len(pcols))] = 1.0
    mult = structure.last_multipliers
    lam = mult[0] if mult is not None else np.zeros(mcon)
    hv = ev.hessian(x, lam, 1.0).copy()
    H = sp.csr_matrix((hv, (fns.hess_rows, fns.hess_cols)), shape=(n, n))
    H = H + sp.triu(H.T, k=1)  # lower triangle to the full symmetric matrix
    h_red = Z.T @ (H @ Z)
    # residual gradients: the residuals are linear in the states (interpolated DO, NH4-N)
    rows, rc, rv = [], [], []
    for i, e in enumerate(residual_exprs):
        repn = generate_standard_repn(e, quadratic=False, compute_values=True)
        if repn.nonlinear_expr is not None:
            raise ModelError("a residual is not linear in the model variables")
        for v, c in zip(repn.linear_vars, repn.linear_coefs):
            k = cols.get(id(v))
            if k is not None:
                rows.append(i)
                rc.append(k)
                rv.append(float(c))
    R = sp.csr_matrix((rv, (rows, rc)), shape=(len(residual_exprs), n))
    Jr = R @ Z
    return Jr, 0.5 * (h_red + h_red.T)


def fit_statistics(m, names: list[str], params: list, residual_exprs: list, residuals: np.ndarray) -> FitStatistics:
    """Covariance, intervals and identifiability at the current (optimal) point; see module notes."""
    Jr, h_red = _sensitivities(m, params, residual_exprs)
    gn = Jr.T @ Jr
    n_obs, p = len(residuals), len(params)
    dof = max(n_obs - p, 1)
    s2 = float(residuals @ residuals) / dof
    theta = np.array([float(v.value) for v in params])
    messages = []
    try:
        inv = np.linalg.inv(h_red)
        if not np.all(np.isfinite(inv)) or np.any(np.diag(inv) <= 0):
            raise np.linalg.LinAlgError
    except np.linalg.LinAlgError:
        inv = np.linalg.pinv(gn)
        messages.append("the reduced Hessian is singular or indefinite: the covariance comes from the "
                        "pseudo-inverse of the Gauss-Newton matrix")
    cov = s2 * inv
    se = np.sqrt(np.maximum(np.diag(cov), 0.0))
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = cov / np.outer(se, se)
    corr[~np.isfinite(corr)] = 0.0
    from scipy import stats  # here, not at import: scipy.stats alone costs about 0.4 s to import

    tq = float(stats.t.ppf(0.975, dof))
    D = np.diag(np.where(theta != 0, np.abs(theta), 1.0))
    scaled = D @ gn @ D
    w, V = np.linalg.eigh(0.5 * (scaled + scaled.T))
    top = float(w[-1]) if w.size else 0.0
    cond = float(top / w[0]) if w.size and w[0] > 0 else float("inf")
    weak = []
    for k in range(len(w)):
        if top <= 0 or w[k] < WEAK_EIGENVALUE * top:
            parts = [f"{V[j, k]:+.2f} {names[j]}" for j in np.argsort(-np.abs(V[:, k])) if abs(V[j, k]) > 0.1]
            weak.append(" ".join(parts))
    for d in weak:
        messages.append(f"not identifiable from these data: the direction {d} changes the fit by almost nothing")
    for i in range(p):
        if theta[i] != 0 and se[i] / abs(theta[i]) > POOR_RELATIVE_SE:
            messages.append(f"{names[i]} is poorly determined (standard error {100 * se[i] / abs(theta[i]):.0f} % "
                            "of its value)")
        for j in range(i + 1, p):
            if abs(corr[i, j]) > HIGH_CORRELATION:
                messages.append(f"{names[i]} and {names[j]} are strongly correlated ({corr[i, j]:+.3f}): the data "
                                "pin down a combination of the two better than either")
    return FitStatistics(names=list(names), values=theta, reduced_hessian=h_red, gauss_newton=gn, covariance=cov,
                         standard_error=se, correlation=corr, t_quantile=tq, ci_low=theta - tq * se,
                         ci_high=theta + tq * se, residual_variance=s2, n_observations=n_obs,
                         condition_number=cond, eigenvalues=w, eigenvectors=V, weak_directions=weak,
                         messages=messages)


__all__ = ["FitStatistics", "HIGH_CORRELATION", "POOR_RELATIVE_SE", "WEAK_EIGENVALUE", "fit_statistics"]
