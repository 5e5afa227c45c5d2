"""Blower power: adiabatic (isentropic) compression of the air mass flow, over a wire-to-air efficiency.

Pinned formula (see docs/physics.md): the exact ideal-gas isentropic form with
k = 1.4 and cp = 1.005 kJ/(kg K) (:func:`blower_power_kW`). The Metcalf & Eddy
printed form with the constant 29.7 is kept for comparison
(:func:`blower_power_textbook_kW`); it gives about 2.5-2.6 % less power at
pressure ratios 1.2-2.0.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import least_squares

from airtaper import units
from airtaper.errors import InputError, Problem
from airtaper.physics.backend import power
from airtaper.physics.extrapolation import EfficiencyExtrapolationWarning, warn_if_outside

#: Isentropic exponent (k - 1) / k of air with k = 1.4 (2/7 = 0.2857).
ISENTROPIC_EXPONENT = (units.K_AIR - 1.0) / units.K_AIR

# Coefficients of the printed Metcalf & Eddy form (R = 8.314 kJ/(kmol K), 29.7, n = 0.283).
_TEXTBOOK_R = 8.314
_TEXTBOOK_CONSTANT = 29.7
_TEXTBOOK_N = 0.283


def isentropic_work_kJ_kg(inlet_temperature_C, pressure_ratio):
    """Specific isentropic compression work of ideal-gas air, kJ/kg.

    Parameters
    ----------
    inlet_temperature_C : float, ndarray or Pyomo expression
        Air temperature at the blower inlet, degC.
    pressure_ratio : float, ndarray or Pyomo expression
        Absolute discharge over absolute inlet pressure (>= 1).

    Notes
    -----
    ``w_s = cp T1 ((p2/p1)**((k-1)/k) - 1)`` with cp = 1.005 kJ/(kg K), k = 1.4,
    T1 in K: the enthalpy rise of an isentropic compression of an ideal gas of
    constant cp.

    References
    ----------
    Isentropic relations of an ideal gas, e.g. Cengel & Boles, Thermodynamics:
    An Engineering Approach, ch. 7 (steady-flow compressor work).
    """
    return units.CP_AIR_kJ_kg_K * units.C_to_K(inlet_temperature_C) * (
        power(pressure_ratio, ISENTROPIC_EXPONENT) - 1.0
    )


@dataclass(frozen=True)
class EfficiencyCurve:
    """Wire-to-air blower efficiency versus total airflow (immutable).

    ``eta = c0 + c1 x + c2 x**2`` with ``x = Q / Q_ref`` and ``c2 <= 0``
    (concave: one best-efficiency point, smooth for Ipopt). Fitted by
    :func:`fit_efficiency_curve`; a single data point gives a constant.
    """

    name: str
    coefficients: tuple[float, float, float]
    airflow_ref_Sm3_h: float
    airflow_range: tuple[float, float]
    residuals: tuple[float, ...] = field(repr=False)

    def efficiency(self, airflow_Sm3_h):
        """Wire-to-air efficiency (fraction) at a total airflow (Sm3/h); floats, arrays or Pyomo.

        Warns (:class:`~airtaper.physics.extrapolation.EfficiencyExtrapolationWarning`)
        when a numeric airflow is outside the data range.
        """
        warn_if_outside(
            airflow_Sm3_h,
            self.airflow_range,
            "airflow (Sm3/h)",
            f"efficiency curve {self.name!r}",
            EfficiencyExtrapolationWarning,
            3,
        )
        c0, c1, c2 = self.coefficients
        x = airflow_Sm3_h / self.airflow_ref_Sm3_h
        return c0 + x * (c1 + x * c2)


def fit_efficiency_curve(
    airflow_Sm3_h,
    efficiency,
    *,
    name: str = "blower",
    source_file: str = "<efficiency points>",
    key: str = "efficiency_points",
) -> EfficiencyCurve:
    """Fit a concave quadratic wire-to-air efficiency curve to data points.

    Parameters
    ----------
    airflow_Sm3_h : array_like
        Total blower airflow of each point, Sm3/h (> 0).
    efficiency : array_like
        Wire-to-air efficiency at each point, fraction (0 < eta <= 1).

    Notes
    -----
    One distinct airflow gives a constant, two give a straight line, three or
    more a quadratic with ``c2 <= 0`` (``scipy.optimize.least_squares``). The
    fitted efficiency must stay within (0, 1] over the data range.

    References
    ----------
    Quadratic efficiency-versus-flow curves of turbomachinery around the
    best-efficiency point (common practice (no source)).
    """
    q = np.asarray(airflow_Sm3_h, dtype=float).ravel()
    eta = np.asarray(efficiency, dtype=float).ravel()
    problems: list[Problem] = []
    if q.size == 0 or q.size != eta.size:
        problems.append(
            Problem(source_file, key, "need the same non-zero number of airflows and efficiencies", (q.size, eta.size))
        )
    else:
        if (~np.isfinite(q) | (q <= 0)).any():
            problems.append(Problem(source_file, f"{key}.airflow_Sm3_h", "airflows must be finite and > 0", q.tolist()))
        if (~np.isfinite(eta) | (eta <= 0) | (eta > 1)).any():
            problems.append(Problem(source_file, f"{key}.efficiency", "efficiencies must be in (0, 1]", eta.tolist()))
    if problems:
        raise InputError(problems)

    q_ref = float(q.max())
    x = q / q_ref
    degree = min(np.unique(q).size - 1, 2)
    n_par = degree + 1

    def model(p: np.ndarray, xx: np.ndarray) -> np.ndarray:
        c = np.zeros(3)
        c[:n_par] = p
        return c[0] + xx * (c[1] + xx * c[2])

    lo = np.full(n_par, -np.inf)
    hi = np.full(n_par, np.inf)
    if degree == 2:
        hi[2] = 0.0
    start = np.zeros(n_par)
    start[0] = float(eta.mean())
    result = least_squares(lambda p: model(p, x) - eta, start, bounds=(lo, hi), xtol=1e-14, ftol=1e-14)
    coefficients = np.zeros(3)
    coefficients[:n_par] = result.x
    grid = np.linspace(float(x.min()), float(x.max()), 201)
    fitted = model(result.x, grid)
    if fitted.min() <= 0 or fitted.max() > 1:
        raise InputError(
            Problem(source_file, key, "fitted efficiency leaves (0, 1] within the data range", float(fitted.min()))
        )
    return EfficiencyCurve(
        name=name,
        coefficients=tuple(float(c) for c in coefficients),
        airflow_ref_Sm3_h=q_ref,
        airflow_range=(float(q.min()), float(q.max())),
        residuals=tuple(float(r) for r in model(result.x, x) - eta),
    )


def _efficiency_value(efficiency, airflow_Sm3_h):
    if isinstance(efficiency, EfficiencyCurve):
        return efficiency.efficiency(airflow_Sm3_h)
    return efficiency


def blower_power_kW(airflow_Sm3_h, inlet_temperature_C, inlet_pressure_kPa, discharge_pressure_kPa, efficiency):
    """Electrical (wire-to-air) blower power, kW.

    Parameters
    ----------
    airflow_Sm3_h : float, ndarray or Pyomo expression
        Total airflow, Sm3/h (dry air at 20 degC, 101.325 kPa).
    inlet_temperature_C : float, ndarray or Pyomo expression
        Air temperature at the blower inlet, degC.
    inlet_pressure_kPa : float, ndarray or Pyomo expression
        Absolute inlet pressure, kPa
        (:func:`airtaper.physics.pressure.blower_inlet_pressure_kPa`).
    discharge_pressure_kPa : float, ndarray or Pyomo expression
        Absolute discharge pressure, kPa
        (:func:`airtaper.physics.pressure.blower_discharge_pressure_kPa`).
    efficiency : float, ndarray, Pyomo expression or EfficiencyCurve
        Wire-to-air efficiency (blower, gearbox, motor and drive), fraction;
        an :class:`EfficiencyCurve` is evaluated at ``airflow_Sm3_h``.

    Notes
    -----
    ``P = m_dot cp T1 ((p2/p1)**((k-1)/k) - 1) / eta``, m_dot the dry-air
    mass flow in kg/s (``Q * 1.2041 kg/Sm3 / 3600``), cp = 1.005 kJ/(kg K),
    k = 1.4. Inlet humidity is neglected (dry-air mass flow).

    References
    ----------
    Ideal-gas isentropic compression (Cengel & Boles, ch. 7); wire-to-air
    efficiency as in Metcalf & Eddy (2014), 5th ed., blower power.
    """
    mass_flow_kg_s = units.Sm3_h_to_kg_s(airflow_Sm3_h)
    work = isentropic_work_kJ_kg(inlet_temperature_C, discharge_pressure_kPa / inlet_pressure_kPa)
    return units.kJ_s_to_kW(mass_flow_kg_s * work) / _efficiency_value(efficiency, airflow_Sm3_h)


def efficiency_from_power(airflow_Sm3_h, inlet_temperature_C, inlet_pressure_kPa, discharge_pressure_kPa,
                          power_kW):
    """Wire-to-air efficiency implied by a measured duty point, fraction.

    Parameters
    ----------
    airflow_Sm3_h : float or ndarray
        Airflow at the duty point, Sm3/h.
    inlet_temperature_C, inlet_pressure_kPa : float or ndarray
        Inlet air temperature (degC) and absolute inlet pressure (kPa).
    discharge_pressure_kPa : float or ndarray
        Absolute discharge pressure at the duty point, kPa.
    power_kW : float or ndarray
        Wire (electrical) power measured or guaranteed at that point, kW.

    Notes
    -----
    ``eta = P_isentropic / P_wire``: the inverse of :func:`blower_power_kW`, so
    the pinned isentropic formula evaluated with this efficiency returns the
    given power exactly.
    """
    ideal_kW = blower_power_kW(airflow_Sm3_h, inlet_temperature_C, inlet_pressure_kPa, discharge_pressure_kPa, 1.0)
    return ideal_kW / power_kW


def blower_power_textbook_kW(airflow_Sm3_h, inlet_temperature_C, inlet_pressure_kPa, discharge_pressure_kPa, efficiency):
    """Blower power by the printed Metcalf & Eddy form, kW (comparison only).

    Notes
    -----
    ``P = w R T1 / (29.7 n e) ((p2/p1)**0.283 - 1)``, w kg/s, R = 8.314,
    T1 K, n = 0.283 (printed form from memory). Relative to
    :func:`blower_power_kW` it is about 2.5-2.6 % lower at pressure ratios
    1.2-2.0 (R / (29.7 n) = 0.989 kJ/(kg K) against cp = 1.005, and 0.283
    against 2/7).

    References
    ----------
    Metcalf & Eddy (2014), Wastewater Engineering, 5th ed., blower power equation.
    """
    mass_flow_kg_s = units.Sm3_h_to_kg_s(airflow_Sm3_h)
    bracket = power(discharge_pressure_kPa / inlet_pressure_kPa, _TEXTBOOK_N) - 1.0
    prefactor = _TEXTBOOK_R * units.C_to_K(inlet_temperature_C) / (_TEXTBOOK_CONSTANT * _TEXTBOOK_N)
    return mass_flow_kg_s * prefactor * bracket / _efficiency_value(efficiency, airflow_Sm3_h)


def energy_kWh(power_kW, hours):
    """Energy over a period, kWh: ``E = P t`` (elementwise; sum over periods yourself)."""
    return units.kW_h_to_kWh(power_kW, hours)
