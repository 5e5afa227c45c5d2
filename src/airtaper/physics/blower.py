"""Blower power: adiabatic (isentropic) compression of the air mass flow, over a wire-to-air efficiency.

Pinned formula (see docs/physics.md): the exact ideal-gas isentropic form with
k = 1.4 and cp = 1.005 kJ/(kg K) (:func:`blower_power_kW`). The Metcalf & Eddy
printed form with the constant 29.7 is kept for comparison
(:func:`blower_power_textbook_kW`); it gives about 2.5-2.6 % less power at
pressure ratios 1.2-2.0.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from airtaper import units
from airtaper.physics.backend import power

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
    efficiency : float, ndarray or Pyomo expression
        Wire-to-air efficiency (blower, gearbox, motor and drive), fraction.

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
    return units.kJ_s_to_kW(mass_flow_kg_s * work) / efficiency


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
    return mass_flow_kg_s * prefactor * bracket / efficiency


def energy_kWh(power_kW, hours):
    """Energy over a period, kWh: ``E = P t`` (elementwise; sum over periods yourself)."""
    return units.kW_h_to_kWh(power_kW, hours)


# --- per-machine power curves for staging -----------------------------------------------------
#
# At one discharge pressure and inlet temperature the isentropic power is linear in the
# airflow, so a machine's wire power is ``P = w(T1, p2/p1) x g(q)`` with the
# *equivalent airflow* ``g(q) = q / eta(q)`` (Sm3/h): the airflow an ideal machine would
# compress for the same power. The wire-to-air efficiency is taken as independent of the
# discharge pressure over the operating band (the efficiency points are one curve), so the
# same ``g`` serves every period's header pressure; ``w`` carries the pressure and
# temperature. ``g`` is the piecewise-linear interpolation of the efficiency points,
# extended linearly to the machine's airflow range. It must be convex (power rising at a
# non-falling rate): then the best split of a total airflow among running machines fills
# the cheapest segments first, the aggregate curve of a set of machines is convex too,
# and the dispatch needs no special-ordered sets.


@dataclass(frozen=True)
class EquivalentCurve:
    """Convex piecewise-linear equivalent airflow ``g(q) = q / eta(q)`` of one machine, Sm3/h.

    ``airflow_Sm3_h`` are the breakpoints (increasing, first the machine's minimum, last
    its maximum), ``equivalent_Sm3_h`` the values of ``g`` there.
    """

    airflow_Sm3_h: tuple[float, ...]
    equivalent_Sm3_h: tuple[float, ...]

    @property
    def airflow_min_Sm3_h(self) -> float:
        return self.airflow_Sm3_h[0]

    @property
    def airflow_max_Sm3_h(self) -> float:
        return self.airflow_Sm3_h[-1]

    def slopes(self) -> np.ndarray:
        q, g = np.asarray(self.airflow_Sm3_h), np.asarray(self.equivalent_Sm3_h)
        return np.diff(g) / np.diff(q)

    def equivalent(self, airflow_Sm3_h):
        """``g(q)`` (numbers or arrays), linear between the breakpoints and beyond the ends."""
        q = np.asarray(airflow_Sm3_h, dtype=float)
        xs, gs = np.asarray(self.airflow_Sm3_h), np.asarray(self.equivalent_Sm3_h)
        if xs.size == 1:
            return np.full_like(q, gs[0]) if q.ndim else float(gs[0])
        s = self.slopes()
        out = np.interp(q, xs, gs)
        out = np.where(q < xs[0], gs[0] + s[0] * (q - xs[0]), out)
        out = np.where(q > xs[-1], gs[-1] + s[-1] * (q - xs[-1]), out)
        return out if out.ndim else float(out)

    def efficiency(self, airflow_Sm3_h):
        """Wire-to-air efficiency ``q / g(q)`` consistent with the curve (q > 0)."""
        q = np.asarray(airflow_Sm3_h, dtype=float)
        return q / self.equivalent(q)


def equivalent_curve(airflow_min_Sm3_h: float, airflow_max_Sm3_h: float, efficiency=None,
                     points=()) -> EquivalentCurve:
    """The equivalent-airflow curve of a machine from a constant efficiency or efficiency points.

    Parameters
    ----------
    airflow_min_Sm3_h, airflow_max_Sm3_h : float
        The machine's airflow range when running, Sm3/h.
    efficiency : float, optional
        Constant wire-to-air efficiency (then ``g = q / eta``, a straight line).
    points : sequence of (airflow_Sm3_h, efficiency)
        Efficiency points with increasing airflow; ``g`` is interpolated through
        ``q_i / eta_i`` and extended along the end segments to the range.

    Notes
    -----
    Not checked here: :func:`power_curve_problems` says whether the curve can be used.
    """
    lo, hi = float(airflow_min_Sm3_h), float(airflow_max_Sm3_h)
    if efficiency is not None:
        return EquivalentCurve((lo, hi), (lo / efficiency, hi / efficiency))
    q = np.array([p[0] for p in points], dtype=float)
    g = q / np.array([p[1] for p in points], dtype=float)
    base = EquivalentCurve(tuple(q.tolist()), tuple(g.tolist()))
    inside = (q > lo) & (q < hi)
    xs = np.concatenate([[lo], q[inside], [hi]])
    return EquivalentCurve(tuple(float(x) for x in xs), tuple(float(v) for v in base.equivalent(xs)))


#: Relative tolerance of the convexity check of a power curve (round-off of the points).
CONVEXITY_RTOL = 1e-9


def power_curve_problems(curve: EquivalentCurve) -> list[str]:
    """Why a machine's power curve cannot be used for staging (empty when it can).

    The wire power must be positive over the range, rise with airflow, and rise at a
    non-falling rate (convex); see the notes above :class:`EquivalentCurve`.
    """
    q, g = np.asarray(curve.airflow_Sm3_h), np.asarray(curve.equivalent_Sm3_h)
    out = []
    if g[0] < 0 or (g[0] == 0 and q[0] > 0) or (g <= 0)[1:].any():
        out.append(f"wire power is not positive over the range (at {q[int(np.argmin(g))]:g} Sm3/h)")
        return out
    s = curve.slopes()
    if (s <= 0).any():
        i = int(np.argmax(s <= 0))
        out.append(f"wire power does not rise with airflow between {q[i]:g} and {q[i + 1]:g} Sm3/h")
        return out
    for i in range(1, s.size):
        if s[i] < s[i - 1] * (1.0 - CONVEXITY_RTOL):
            out.append(f"wire power rises more slowly above {q[i]:g} Sm3/h than below it (not convex: "
                       f"efficiency climbs too steeply there)")
            break
    return out


def aggregate_curve(curves) -> EquivalentCurve:
    """Least equivalent airflow of a set of running machines sharing a total airflow (convex PWL).

    Every machine starts at its minimum; the extra airflow fills the machines' segments
    in order of rising slope (optimal for convex curves: the infimal convolution).
    """
    curves = list(curves)
    q0 = sum(c.airflow_min_Sm3_h for c in curves)
    g0 = sum(c.equivalent_Sm3_h[0] for c in curves)
    segs = sorted((s, dq) for c in curves for s, dq in zip(c.slopes(), np.diff(c.airflow_Sm3_h)))
    xs, gs = [q0], [g0]
    for s, dq in segs:
        xs.append(xs[-1] + float(dq))
        gs.append(gs[-1] + float(s * dq))
    return EquivalentCurve(tuple(xs), tuple(gs))


def split_airflow(curves, total_Sm3_h: float) -> np.ndarray:
    """Airflow of each running machine at the least total power for a total airflow, Sm3/h.

    The total is clipped into the set's range; fills segments by rising slope as
    :func:`aggregate_curve`.
    """
    curves = list(curves)
    q = np.array([c.airflow_min_Sm3_h for c in curves], dtype=float)
    rest = max(0.0, float(total_Sm3_h) - float(q.sum()))
    segs = sorted((s, j, dq) for j, c in enumerate(curves) for s, dq in zip(c.slopes(), np.diff(c.airflow_Sm3_h)))
    for _, j, dq in segs:
        take = min(rest, float(dq))
        q[j] += take
        rest -= take
        if rest <= 0:
            break
    return q


def lower_convex_hull(points) -> list[tuple[float, float]]:
    """Lower convex hull of (x, y) points, by increasing x (Andrew's monotone chain)."""
    lowest: dict[float, float] = {}
    for x, y in points:
        x, y = float(x), float(y)
        lowest[x] = min(y, lowest.get(x, y))
    hull: list[tuple[float, float]] = []
    for p in sorted(lowest.items()):
        while len(hull) >= 2:
            (x1, y1), (x2, y2) = hull[-2], hull[-1]
            if (x2 - x1) * (p[1] - y1) - (y2 - y1) * (p[0] - x1) <= 0:
                hull.pop()
            else:
                break
        hull.append(p)
    return hull
