"""Air-side pressures: static head, diffuser headloss, pipe losses, zone and header pressure.

Conventions (the project's, docs/glossary.md): a pressure named ``*_kPa`` is
absolute and one named ``*_gauge_kPa`` is above the atmosphere at the site. Heads,
headlosses and valve losses (``static_head_kPa``, ``pipe_loss_kPa``,
``valve_loss_kPa``, ``headloss_kPa``) are pressure differences, so neither. The
zone and header pressures (:func:`zone_required_pressure_gauge_kPa`,
:func:`header_pressure_gauge_kPa`) are sums of such differences above the water
surface: gauge pressures, and named so here, in the optimisation model
(``opt.header_gauge_kPa``) and in the outputs (``header.csv``: ``pressure_gauge_kPa``).
The blower works on absolute pressures (:func:`blower_discharge_pressure_kPa`,
:func:`blower_inlet_pressure_kPa`). Water column is the conventional one
(1 m = 9.80665 kPa, :mod:`airtaper.units`).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import least_squares

from airtaper import units
from airtaper.errors import InputError, Problem
from airtaper.physics.backend import any_pyomo, power
from airtaper.physics.smooth import smooth_max
from airtaper.physics.extrapolation import HeadlossExtrapolationWarning, warn_if_outside

#: Headloss exponent used when too few points are given to fit it: the
#: orifice law, loss proportional to flow squared (common practice (no source)).
DEFAULT_HEADLOSS_EXPONENT = 2.0
#: Bounds of a fitted headloss exponent; >= 1 keeps the curve differentiable at q = 0.
HEADLOSS_EXPONENT_BOUNDS = (1.0, 3.0)


def static_head_kPa(submergence_m):
    """Static head of the water above the diffusers, kPa.

    Parameters
    ----------
    submergence_m : float, ndarray or Pyomo expression
        Diffuser submergence, m.

    Notes
    -----
    ``p = rho g Df`` with the conventional water column (1 m = 9.80665 kPa);
    mixed liquor is within about 0.3 % of this density.

    References
    ----------
    Hydrostatics; conventional metre of water, ISO 80000-4.
    """
    return units.m_water_to_kPa(submergence_m)


def pipe_loss_kPa(k_kPa_per_Sm3_h2, airflow_Sm3_h):
    """Pressure loss of a pipe run or drop leg, kPa: ``dp = k Q**2``.

    Parameters
    ----------
    k_kPa_per_Sm3_h2 : float, ndarray or Pyomo expression
        Loss coefficient, kPa/(Sm3/h)**2 (fitted or computed from Darcy-Weisbach
        at the design point).
    airflow_Sm3_h : float, ndarray or Pyomo expression
        Airflow through the pipe, Sm3/h (>= 0).

    Notes
    -----
    Fully turbulent flow: the Darcy-Weisbach loss ``f (L/D) rho v**2 / 2`` is
    proportional to the flow squared when f is constant.

    References
    ----------
    Darcy-Weisbach equation (any fluid-mechanics text, e.g. White, Fluid Mechanics).
    """
    return k_kPa_per_Sm3_h2 * airflow_Sm3_h**2


@dataclass(frozen=True)
class HeadlossCurve:
    """Fitted diffuser headloss (dynamic wet pressure) versus airflow per diffuser.

    ``dp = h0 + k (q / q_ref)**n`` in kPa, with h0 >= 0 (opening pressure),
    k >= 0 and 1 <= n <= 3: smooth and non-decreasing for q >= 0.
    """

    name: str
    h0_kPa: float
    k_kPa: float
    airflow_ref_Sm3_h: float
    exponent: float
    exponent_fitted: bool
    airflow_range: tuple[float, float]
    residuals_kPa: tuple[float, ...] = field(repr=False)

    def headloss_kPa(self, airflow_per_diffuser_Sm3_h):
        """Diffuser headloss, kPa, at an airflow per diffuser (Sm3/h); floats, arrays or Pyomo.

        Warns (:class:`~airtaper.physics.extrapolation.HeadlossExtrapolationWarning`)
        when a numeric airflow is outside the tested range.
        """
        warn_if_outside(
            airflow_per_diffuser_Sm3_h,
            self.airflow_range,
            "airflow per diffuser (Sm3/h)",
            f"headloss curve {self.name!r}",
            HeadlossExtrapolationWarning,
            3,
        )
        return self.h0_kPa + self.k_kPa * power(airflow_per_diffuser_Sm3_h / self.airflow_ref_Sm3_h, self.exponent)

    @property
    def residuals(self) -> np.ndarray:
        """Fitted minus tested headloss, kPa, in point order."""
        return np.array(self.residuals_kPa)

    @property
    def rms_residual_kPa(self) -> float:
        """Root-mean-square residual, kPa."""
        return float(np.sqrt(np.mean(self.residuals**2)))


def fit_headloss_curve(
    airflow_per_diffuser_Sm3_h,
    headloss_kPa,
    *,
    name: str = "diffuser",
    exponent: float | None = None,
    source_file: str = "<headloss points>",
    key: str = "headloss_points",
) -> HeadlossCurve:
    """Fit ``dp = h0 + k (q/q_ref)**n`` to diffuser headloss test points.

    Parameters
    ----------
    airflow_per_diffuser_Sm3_h : array_like
        Airflow per diffuser, Sm3/h (>= 0; at least two distinct values).
    headloss_kPa : array_like
        Measured headloss at each point, kPa (>= 0).
    name : str
        Diffuser type name for warnings.
    exponent : float, optional
        Fix n. By default n is fitted when there are at least four distinct
        airflows, otherwise n = :data:`DEFAULT_HEADLOSS_EXPONENT`.

    Notes
    -----
    ``scipy.optimize.least_squares`` on the residuals in kPa with bounds
    h0 >= 0, k >= 0, 1 <= n <= 3; q_ref is the largest tested airflow.

    References
    ----------
    Orifice/turbulent loss law (dp proportional to Q**n, n near 2); membrane
    opening pressure as the constant term (common practice (no source)).
    """
    q = np.asarray(airflow_per_diffuser_Sm3_h, dtype=float).ravel()
    h = np.asarray(headloss_kPa, dtype=float).ravel()
    problems: list[Problem] = []
    if h.size != q.size:
        problems.append(Problem(source_file, f"{key}.headloss_kPa", "length differs from the airflows", h.size, str(q.size)))
    else:
        for label, arr in (("airflow_per_diffuser_Sm3_h", q), ("headloss_kPa", h)):
            bad = ~np.isfinite(arr) | (arr < 0)
            if bad.any():
                problems.append(Problem(source_file, f"{key}.{label}", "values must be finite and >= 0", arr[bad].tolist()))
        if np.unique(q).size < 2:
            problems.append(
                Problem(source_file, key, "need points at two or more distinct airflows", np.unique(q).size, ">= 2")
            )
    if problems:
        raise InputError(problems)

    q_ref = float(q.max())
    x = q / q_ref
    fit_n = exponent is None and np.unique(q).size >= 4
    n_fixed = DEFAULT_HEADLOSS_EXPONENT if exponent is None else float(exponent)
    if not HEADLOSS_EXPONENT_BOUNDS[0] <= n_fixed <= HEADLOSS_EXPONENT_BOUNDS[1]:
        raise InputError(Problem(source_file, f"{key}.exponent", "headloss exponent out of range", n_fixed, "1..3"))

    def model(p: np.ndarray) -> np.ndarray:
        n = p[2] if fit_n else n_fixed
        return p[0] + p[1] * x**n

    def residual(p: np.ndarray) -> np.ndarray:
        return model(p) - h

    start = [max(float(h.min()) * 0.5, 0.0), max(float(h.max() - h.min()), 1e-6)]
    lo, hi = [0.0, 0.0], [np.inf, np.inf]
    if fit_n:
        start.append(n_fixed)
        lo.append(HEADLOSS_EXPONENT_BOUNDS[0])
        hi.append(HEADLOSS_EXPONENT_BOUNDS[1])
    result = least_squares(residual, np.array(start), bounds=(np.array(lo), np.array(hi)), xtol=1e-14, ftol=1e-14)
    p = result.x
    return HeadlossCurve(
        name=name,
        h0_kPa=float(p[0]),
        k_kPa=float(p[1]),
        airflow_ref_Sm3_h=q_ref,
        exponent=float(p[2]) if fit_n else n_fixed,
        exponent_fitted=bool(fit_n),
        airflow_range=(float(q.min()), float(q.max())),
        residuals_kPa=tuple(float(r) for r in residual(p)),
    )


def zone_required_pressure_gauge_kPa(submergence_m, diffuser_headloss_kPa, drop_leg_loss_kPa=0.0):
    """Gauge pressure the header must deliver at a zone's control valve outlet, kPa.

    Parameters
    ----------
    submergence_m : float, ndarray or Pyomo expression
        Diffuser submergence, m.
    diffuser_headloss_kPa : float, ndarray or Pyomo expression
        Diffuser headloss at the zone's airflow per diffuser
        (:meth:`HeadlossCurve.headloss_kPa`).
    drop_leg_loss_kPa : float, ndarray or Pyomo expression
        Loss in the drop leg and zone grid piping (:func:`pipe_loss_kPa`).

    Notes
    -----
    ``p_zone = rho g Df + dp_diffuser(q) + k_drop Q**2``.

    References
    ----------
    Pressure balance of a diffused-air system (common practice (no source)).
    """
    return static_head_kPa(submergence_m) + diffuser_headloss_kPa + drop_leg_loss_kPa


def valve_loss_kPa(header_pressure_gauge_kPa, zone_required_pressure_gauge_kPa):
    """Pressure a zone's control valve must throttle, kPa: header minus zone requirement.

    A feasible schedule keeps this at or above the minimum valve loss for
    every zone (the model states ``valve_loss_kPa(...) >= min_valve_loss_kPa``).
    """
    return header_pressure_gauge_kPa - zone_required_pressure_gauge_kPa


def header_pressure_gauge_kPa(zone_required_pressures_gauge_kPa, min_valve_loss_kPa, smoothing_kPa=0.0):
    """Header gauge pressure under the most-open-valve rule, kPa.

    Parameters
    ----------
    zone_required_pressures_gauge_kPa : sequence
        One entry per zone, each a float, an array (e.g. over periods, all the
        same shape) or a Pyomo expression.
    min_valve_loss_kPa : float
        Loss across the most open valve (the valve is never fully open, so it
        keeps control authority), kPa >= 0.
    smoothing_kPa : float, default 0
        0 gives the exact maximum (numeric inputs only). A positive value uses
        the smooth maximum of :func:`airtaper.physics.smooth.smooth_max`
        (at most ``(n_zones - 1) * smoothing_kPa / 2`` above the exact one),
        which Pyomo expressions need.

    Notes
    -----
    ``p_header = max_i(p_zone,i) + dp_valve,min``: the most demanding zone's
    valve is the most open one, throttling only the minimum loss; every other
    valve throttles more. In an optimisation model the exact form is the
    epigraph ``p_header >= p_zone,i + dp_valve,min`` for every zone (smooth, and
    tight at the optimum because blower power rises with p_header).

    References
    ----------
    Most-open-valve pressure control of aeration blowers (common practice (no source)).
    """
    zones = list(zone_required_pressures_gauge_kPa)
    if not zones:
        raise ValueError("header_pressure_gauge_kPa: no zones given")
    if smoothing_kPa < 0:
        raise ValueError(f"header_pressure_gauge_kPa: smoothing_kPa must be >= 0, got {smoothing_kPa}")
    if smoothing_kPa == 0:
        if any_pyomo(*zones):
            raise ValueError(
                "header_pressure_gauge_kPa: the exact maximum is not smooth; pass smoothing_kPa > 0 for Pyomo "
                "expressions, or constrain header >= zone + min valve loss for each zone (valve_loss_kPa)"
            )
        stacked = np.stack(np.broadcast_arrays(*[np.asarray(z, dtype=float) for z in zones]))
        return np.max(stacked, axis=0)[()] + min_valve_loss_kPa
    top = zones[0]
    for z in zones[1:]:
        top = smooth_max(top, z, smoothing_kPa)
    return top + min_valve_loss_kPa


def blower_discharge_pressure_kPa(header_pressure_gauge_kPa, barometric_pressure_kPa, discharge_loss_kPa=0.0):
    """Absolute blower discharge pressure, kPa: ``p2 = p_baro + p_header + dp_discharge``.

    Parameters
    ----------
    header_pressure_gauge_kPa : float, ndarray or Pyomo expression
        Header gauge pressure (:func:`header_pressure_gauge_kPa`), kPa.
    barometric_pressure_kPa : float, ndarray or Pyomo expression
        Site barometric pressure, kPa absolute.
    discharge_loss_kPa : float, ndarray or Pyomo expression
        Loss between the blower outlet and the header (check valve, silencer,
        main), kPa (:func:`pipe_loss_kPa`).
    """
    return barometric_pressure_kPa + header_pressure_gauge_kPa + discharge_loss_kPa


def blower_inlet_pressure_kPa(barometric_pressure_kPa, inlet_loss_kPa=0.0):
    """Absolute blower inlet pressure, kPa: barometric minus inlet filter/silencer loss."""
    return barometric_pressure_kPa - inlet_loss_kPa
