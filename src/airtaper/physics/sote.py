"""Clean-water SOTE of a diffuser type, fitted to its test points.

Form (pinned, see docs/physics.md)::

    SOTE% = s_ref * (q / q_ref)**a * (rho / rho_ref)**b * (Df / Df_ref)**c

q airflow per diffuser (Sm3/h), rho diffuser density (% of floor area covered
by diffusers), Df submergence (m); ``q_ref``, ``rho_ref``, ``Df_ref`` are the
geometric means of the test points. With ``a < 0`` the curve is positive and
strictly decreasing in q, and infinitely differentiable for q > 0 (no kinks
for Ipopt). The parameters are found with ``scipy.optimize.least_squares`` on
the SOTE residuals in percentage points.

When the test points cover only one density (or one submergence), that
exponent cannot be fitted and a documented default is used instead:

* density exponent 0.20: SOTE rises with diffuser density with an exponent of
  about +0.15 to +0.25 (from memory);
* submergence exponent 1.0: SOTE is quoted per metre of submergence (%/m),
  i.e. proportional to it (common practice (no source)).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import least_squares

from airtaper.errors import InputError, Problem
from airtaper.physics.backend import power
from airtaper.physics.extrapolation import SoteExtrapolationWarning, warn_if_outside

#: Default density exponent when the test points cover one density (from memory).
DEFAULT_DENSITY_EXPONENT = 0.20
#: Default submergence exponent when the test points cover one submergence
#: (SOTE quoted in %/m; common practice (no source)).
DEFAULT_SUBMERGENCE_EXPONENT = 1.0
#: Bounds of the airflow exponent: below 0 keeps SOTE decreasing in airflow per diffuser;
#: above -1 keeps SOTR = Q SOTE(Q) increasing in airflow.
AIRFLOW_EXPONENT_BOUNDS = (-0.9, -1e-3)
_OTHER_EXPONENT_BOUNDS = (-5.0, 5.0)
#: Relative spread below which a column counts as "one value".
_SAME_VALUE_RTOL = 1e-9


class SoteFitWarning(UserWarning):
    """The SOTE fit is weak (exponent held at a bound, no degrees of freedom left)."""


@dataclass(frozen=True)
class SoteCurve:
    """A fitted clean-water SOTE correlation for one diffuser type (immutable).

    Use :meth:`sote_fraction` (or :meth:`sote_percent`) to evaluate; both take
    floats, numpy arrays or Pyomo expressions and warn
    (:class:`~airtaper.physics.extrapolation.SoteExtrapolationWarning`) when a
    numeric input is outside the tested range.
    """

    name: str
    sote_ref_percent: float
    airflow_ref_Sm3_h: float
    density_ref_percent: float
    submergence_ref_m: float
    airflow_exponent: float
    density_exponent: float
    submergence_exponent: float
    density_exponent_fitted: bool
    submergence_exponent_fitted: bool
    airflow_range: tuple[float, float]
    density_range: tuple[float, float]
    submergence_range: tuple[float, float]
    residuals_percent: tuple[float, ...] = field(repr=False)
    notes: tuple[str, ...] = ()

    # --- evaluation ---------------------------------------------------------
    def sote_percent(self, airflow_per_diffuser_Sm3_h, density_percent, submergence_m):
        """Clean-water SOTE, percent.

        Parameters
        ----------
        airflow_per_diffuser_Sm3_h : float, ndarray or Pyomo expression
            Airflow per diffuser, Sm3/h (> 0).
        density_percent : float, ndarray or Pyomo expression
            Diffuser density, % of the floor covered (as in the test points).
        submergence_m : float, ndarray or Pyomo expression
            Diffuser submergence, m.
        """
        self._check_range(airflow_per_diffuser_Sm3_h, density_percent, submergence_m)
        value = self.sote_ref_percent * power(airflow_per_diffuser_Sm3_h / self.airflow_ref_Sm3_h, self.airflow_exponent)
        if self.density_exponent != 0.0:
            value = value * power(density_percent / self.density_ref_percent, self.density_exponent)
        if self.submergence_exponent != 0.0:
            value = value * power(submergence_m / self.submergence_ref_m, self.submergence_exponent)
        return value

    def sote_fraction(self, airflow_per_diffuser_Sm3_h, density_percent, submergence_m):
        """Clean-water SOTE as a fraction (0..1); see :meth:`sote_percent`."""
        return self.sote_percent(airflow_per_diffuser_Sm3_h, density_percent, submergence_m) / 100.0

    def _check_range(self, airflow, density, submergence):
        curve = f"SOTE curve {self.name!r}"
        warn_if_outside(airflow, self.airflow_range, "airflow per diffuser (Sm3/h)", curve, SoteExtrapolationWarning, 4)
        warn_if_outside(density, self.density_range, "diffuser density (%)", curve, SoteExtrapolationWarning, 4)
        warn_if_outside(submergence, self.submergence_range, "submergence (m)", curve, SoteExtrapolationWarning, 4)

    # --- fit quality --------------------------------------------------------
    @property
    def residuals(self) -> np.ndarray:
        """Fit residuals (fitted minus tested SOTE), percentage points, in test-point order."""
        return np.array(self.residuals_percent)

    @property
    def rms_residual_percent(self) -> float:
        """Root-mean-square residual, percentage points."""
        r = self.residuals
        return float(np.sqrt(np.mean(r**2))) if r.size else 0.0

    @property
    def max_abs_residual_percent(self) -> float:
        """Largest absolute residual, percentage points."""
        r = self.residuals
        return float(np.max(np.abs(r))) if r.size else 0.0

    def report(self) -> str:
        """A short plain-text fit report (form, parameters, residuals, defaults used)."""

        def source(fitted: bool) -> str:
            return "fitted" if fitted else "default, not fitted"

        lines = [
            f"SOTE curve {self.name!r}: SOTE% = {self.sote_ref_percent:.4g} * (q/{self.airflow_ref_Sm3_h:.4g})^a"
            f" * (rho/{self.density_ref_percent:.4g})^b * (Df/{self.submergence_ref_m:.4g})^c",
            f"  a (airflow)     = {self.airflow_exponent:+.4f} (fitted)",
            f"  b (density)     = {self.density_exponent:+.4f} ({source(self.density_exponent_fitted)})",
            f"  c (submergence) = {self.submergence_exponent:+.4f} ({source(self.submergence_exponent_fitted)})",
            f"  tested airflow per diffuser {self.airflow_range[0]:g}..{self.airflow_range[1]:g} Sm3/h, "
            f"density {self.density_range[0]:g}..{self.density_range[1]:g} %, "
            f"submergence {self.submergence_range[0]:g}..{self.submergence_range[1]:g} m",
            f"  residuals ({len(self.residuals_percent)} points): RMS {self.rms_residual_percent:.3f}, "
            f"max |r| {self.max_abs_residual_percent:.3f} percentage points",
        ]
        lines.extend(f"  note: {n}" for n in self.notes)
        return "\n".join(lines)


def _column(values, n: int) -> np.ndarray:
    arr = np.asarray(values, dtype=float)
    if arr.ndim == 0:
        arr = np.full(n, float(arr))
    return arr.ravel()


def _geomean(x: np.ndarray) -> float:
    return float(np.exp(np.mean(np.log(x))))


def _one_value(x: np.ndarray) -> bool:
    return float(np.ptp(x)) <= _SAME_VALUE_RTOL * float(np.max(np.abs(x)))


def fit_sote_curve(
    airflow_per_diffuser_Sm3_h,
    sote_percent,
    density_percent,
    submergence_m,
    *,
    name: str = "diffuser",
    density_exponent: float | None = None,
    submergence_exponent: float | None = None,
    source_file: str = "<SOTE test points>",
    key: str = "sote_points",
) -> SoteCurve:
    """Fit the clean-water SOTE correlation of one diffuser type to its test points.

    Parameters
    ----------
    airflow_per_diffuser_Sm3_h : array_like
        Tested airflow per diffuser, Sm3/h (> 0; at least two distinct values).
    sote_percent : array_like
        Measured clean-water SOTE at each point, percent (0 < SOTE < 100).
    density_percent : array_like or float
        Diffuser density of each point, % of floor covered (> 0).
    submergence_m : array_like or float
        Diffuser submergence of each point, m (> 0).
    name : str
        Diffuser type name, used in warnings and the report.
    density_exponent, submergence_exponent : float, optional
        Fix an exponent instead of fitting it. When ``None`` it is fitted if
        the points cover more than one value, otherwise
        :data:`DEFAULT_DENSITY_EXPONENT` / :data:`DEFAULT_SUBMERGENCE_EXPONENT`.
    source_file, key : str
        Where the points came from, for :class:`~airtaper.errors.InputError`.

    Returns
    -------
    SoteCurve

    Raises
    ------
    InputError
        Non-finite, non-positive or inconsistent points, fewer points than
        free parameters, or effects that the points cannot separate.

    Notes
    -----
    ``ln SOTE = ln s_ref + a ln(q/q_ref) + b ln(rho/rho_ref) + c ln(Df/Df_ref)``
    is solved by linear least squares for a start, then
    ``scipy.optimize.least_squares`` minimises the residuals in percentage
    points with ``a`` bounded to [-0.9, -0.001]: SOTE decreases and SOTR
    (proportional to q**(1+a)) increases with airflow.

    References
    ----------
    ASCE/EWRI 2-06 (clean-water SOTE and its test points). A power law in
    airflow per diffuser and in density is the customary shape of clean-water
    SOTE curves of fine-pore diffusers (from memory).
    """
    problems: list[Problem] = []
    q = np.asarray(airflow_per_diffuser_Sm3_h, dtype=float).ravel()
    n = q.size
    s = np.asarray(sote_percent, dtype=float).ravel()
    try:
        rho = _column(density_percent, n)
        df = _column(submergence_m, n)
    except ValueError as exc:  # pragma: no cover - numpy conversion of non-numbers
        raise InputError(Problem(source_file, key, f"test points are not numbers ({exc})")) from exc

    for label, arr in (("sote_percent", s), ("density_percent", rho), ("submergence_m", df)):
        if arr.size != n:
            problems.append(
                Problem(source_file, f"{key}.{label}", "length differs from airflow_per_diffuser_Sm3_h", arr.size, str(n))
            )
    if problems:
        raise InputError(problems)
    if n == 0:
        raise InputError(Problem(source_file, key, "no test points", 0, "at least 2 points"))
    for label, arr in (
        ("airflow_per_diffuser_Sm3_h", q),
        ("sote_percent", s),
        ("density_percent", rho),
        ("submergence_m", df),
    ):
        bad = ~np.isfinite(arr) | (arr <= 0)
        if bad.any():
            problems.append(
                Problem(source_file, f"{key}.{label}", "values must be finite and > 0", arr[bad].tolist(), "> 0")
            )
    if (s >= 100).any():
        problems.append(Problem(source_file, f"{key}.sote_percent", "SOTE must be below 100 %", s[s >= 100].tolist()))
    if problems:
        raise InputError(problems)
    if _one_value(q):
        raise InputError(
            Problem(
                source_file,
                f"{key}.airflow_per_diffuser_Sm3_h",
                "all points at one airflow: the airflow dependence cannot be fitted",
                float(q[0]),
                "at least 2 distinct airflows",
            )
        )

    notes: list[str] = []
    q_ref, rho_ref, df_ref = _geomean(q), _geomean(rho), _geomean(df)
    xq, xrho, xdf = np.log(q / q_ref), np.log(rho / rho_ref), np.log(df / df_ref)

    def decide(user: float | None, column: np.ndarray, default: float, what: str, why: str) -> tuple[float | None, bool]:
        """Return (fixed value or None to fit, fitted flag)."""
        if user is not None:
            notes.append(f"{what} exponent fixed by the caller at {user:g}")
            return float(user), False
        if _one_value(column):
            notes.append(f"one {what} in the test points: {what} exponent set to the default {default:g} ({why})")
            return default, False
        return None, True

    b_fixed, b_fit = decide(density_exponent, rho, DEFAULT_DENSITY_EXPONENT, "density", "from memory")
    c_fixed, c_fit = decide(
        submergence_exponent, df, DEFAULT_SUBMERGENCE_EXPONENT, "submergence", "SOTE per metre, common practice"
    )

    columns = [np.ones(n), xq] + ([xrho] if b_fit else []) + ([xdf] if c_fit else [])
    design = np.column_stack(columns)
    n_par = design.shape[1]
    if n < n_par:
        raise InputError(
            Problem(source_file, key, "fewer test points than fitted parameters", n, f"at least {n_par} points")
        )
    if np.linalg.matrix_rank(design) < n_par:
        raise InputError(
            Problem(
                source_file,
                key,
                "airflow, density and submergence vary together in the test points: their effects cannot be separated",
                None,
                "points that vary one factor at a time, or fix an exponent",
            )
        )

    offset = np.zeros(n)
    if not b_fit:
        offset += b_fixed * xrho
    if not c_fit:
        offset += c_fixed * xdf

    start, *_ = np.linalg.lstsq(design, np.log(s) - offset, rcond=None)
    lo = np.array([-np.inf, AIRFLOW_EXPONENT_BOUNDS[0]] + [_OTHER_EXPONENT_BOUNDS[0]] * (n_par - 2))
    hi = np.array([np.inf, AIRFLOW_EXPONENT_BOUNDS[1]] + [_OTHER_EXPONENT_BOUNDS[1]] * (n_par - 2))
    margin = 1e-9 * (1.0 + np.abs(np.where(np.isfinite(lo), lo, 0.0)) + np.abs(np.where(np.isfinite(hi), hi, 0.0)))
    start = np.clip(start, lo + margin, hi - margin)

    def residual(params: np.ndarray) -> np.ndarray:
        return np.exp(design @ params + offset) - s

    def jacobian(params: np.ndarray) -> np.ndarray:
        return np.exp(design @ params + offset)[:, None] * design

    result = least_squares(residual, start, jac=jacobian, bounds=(lo, hi), method="trf", xtol=1e-14, ftol=1e-14)
    params = result.x
    a = float(params[1])
    b = float(params[2]) if b_fit else float(b_fixed)
    c = float(params[2 + int(b_fit)]) if c_fit else float(c_fixed)
    residuals = residual(params)

    if math.isclose(a, AIRFLOW_EXPONENT_BOUNDS[1], rel_tol=1e-6) or math.isclose(
        a, AIRFLOW_EXPONENT_BOUNDS[0], rel_tol=1e-6
    ):
        msg = (
            f"the airflow exponent is held at its bound {a:g}: the test points do not show SOTE "
            "falling with airflow per diffuser as expected"
        )
        notes.append(msg)
        warnings.warn(f"SOTE curve {name!r}: {msg}", SoteFitWarning, stacklevel=2)
    if n == n_par:
        notes.append("as many points as parameters: the curve passes through them, residuals say nothing")

    return SoteCurve(
        name=name,
        sote_ref_percent=float(np.exp(params[0])),
        airflow_ref_Sm3_h=q_ref,
        density_ref_percent=rho_ref,
        submergence_ref_m=df_ref,
        airflow_exponent=a,
        density_exponent=b,
        submergence_exponent=c,
        density_exponent_fitted=b_fit,
        submergence_exponent_fitted=c_fit,
        airflow_range=(float(q.min()), float(q.max())),
        density_range=(float(rho.min()), float(rho.max())),
        submergence_range=(float(df.min()), float(df.max())),
        residuals_percent=tuple(float(r) for r in residuals),
        notes=tuple(notes),
    )


__all__ = [
    "DEFAULT_DENSITY_EXPONENT",
    "DEFAULT_SUBMERGENCE_EXPONENT",
    "SoteCurve",
    "SoteFitWarning",
    "fit_sote_curve",
]
