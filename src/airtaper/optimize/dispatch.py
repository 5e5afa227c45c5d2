"""Blower staging and swing-zone states: the integer decisions of the diurnal schedule.

Dispatch (a mixed-integer linear program, solved by HiGHS through Pyomo,
:func:`airtaper.solve.highs.solve_milp`). Given, per period ``p``, the airflow the
process asks for ``D_p`` (the nonlinear schedule's total), the blower discharge gauge
pressure ``d_p`` and the kW per Sm3/h of equivalent airflow ``w_p`` at that pressure and
the inlet temperature (:mod:`airtaper.physics.blower`), choose which machines run::

    y[j,p] in {0,1}           machine j runs in period p (0 when out of service or d_p > its limit)
    q[j,p] = qmin_j y + sum_k f[j,k,p],   0 <= f[j,k,p] <= len_jk y        its airflow
    g[j,p] = g_j(qmin_j) y + sum_k s_jk f[j,k,p]                            equivalent airflow (convex: s rising)
    sum_j q[j,p] = D_p + e_p - u_p,   0 <= e_p <= E_p,  u_p >= 0           delivered air
    P_p = w_p sum_j g[j,p];   peak >= P_p
    start[j,p] >= y[j,p] - y[j,p-1],  stop[j,p] >= y[j,p-1] - y[j,p]      (around the periodic day)
    sum_{t = p-U+1..p} start[j,t] <= y[j,p];  sum_{t = p-L+1..p} stop[j,t] <= 1 - y[j,p]   min up/down
    sum_p start[j,p] <= max starts per day
    minimise  sum_p price_p P_p h + demand rate x peak + sum start cost x start + M sum_p u_p

``e_p`` is air the zones can still take (up to their maxima) when the set's minimum is
above the demand; ``u_p`` is air the machines cannot deliver (above their capacity, or no
machine allowed at the pressure), priced far above any energy: a period with ``u_p > 0``
is a finding, not a solver failure. With ``objective = "energy"`` the price is 1 per kWh,
there is no demand charge and start costs are left out (a tiny weight on starts keeps the
fewest among equal-energy dispatches).

Swing zones (:func:`swing_states`): rounding of the relaxed schedule. A swing zone's
relaxed airflow as a fraction ``f_p`` of its minimum when on (grid and mixing minimum) is
rounded to the on/off pattern nearest in ``sum |y_p - f_p|`` that keeps the zone's
switches per day within its limit (a small MILP; without a limit, ``y_p = f_p >= 1/2``).
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field

import numpy as np
import pyomo.environ as pyo

from airtaper.errors import SolverError
from airtaper.layout.types import Layout
from airtaper.plant import ResolvedPlant, resolve_plant
from airtaper.physics.blower import (EquivalentCurve, aggregate_curve, equivalent_curve, lower_convex_hull,
                                    split_airflow)
from airtaper.solve.highs import solve_milp

#: Price of one Sm3/h of undelivered air, as a multiple of the dearest kW of the day: far above
#: any energy or demand cost, so the MILP only leaves air undelivered when nothing can deliver it.
SHORTFALL_WEIGHT = 1e4
#: Weight of one start in the energy objective (kWh per start): breaks ties towards fewer starts.
START_TIEBREAK_kWh = 1e-3
#: Relative MIP gap of the dispatch (HiGHS ``mip_rel_gap``).
DISPATCH_GAP = 1e-6
#: Airflow below which a shortfall is round-off, Sm3/h.
SHORTFALL_TOL_Sm3_h = 1e-3


@dataclass(frozen=True)
class Machine:
    """One blower as the dispatch sees it (from the layout's :class:`~airtaper.layout.types.Blower`)."""

    id: str
    curve: EquivalentCurve
    pressure_max_gauge_kPa: float
    out_of_service: bool
    min_up: int  # periods
    min_down: int  # periods
    max_starts: int | None
    start_cost: float
    range_points: tuple = ()  # (discharge gauge kPa, min, max) of the airflow range; empty: the curve's range

    @property
    def airflow_min_Sm3_h(self) -> float:
        return self.curve.airflow_min_Sm3_h

    @property
    def airflow_max_Sm3_h(self) -> float:
        return self.curve.airflow_max_Sm3_h

    def range_at(self, discharge_gauge_kPa: float) -> tuple[float, float]:
        """(min, max) airflow when running at a discharge pressure (linear between points, held beyond)."""
        if not self.range_points:
            return (self.airflow_min_Sm3_h, self.airflow_max_Sm3_h)
        d, lo, hi = (np.array(c, dtype=float) for c in zip(*self.range_points))
        return (float(np.interp(discharge_gauge_kPa, d, lo)), float(np.interp(discharge_gauge_kPa, d, hi)))

    def curve_at(self, discharge_gauge_kPa: float) -> EquivalentCurve:
        """The power curve on the airflow range at a discharge pressure."""
        if not self.range_points:
            return self.curve
        lo, hi = self.range_at(discharge_gauge_kPa)
        q = np.asarray(self.curve.airflow_Sm3_h)
        xs = np.concatenate([[lo], q[(q > lo) & (q < hi)], [hi]])
        return EquivalentCurve(tuple(float(x) for x in xs), tuple(float(v) for v in self.curve.equivalent(xs)))


def machines_of(plant) -> tuple[Machine, ...]:
    """The blowers of a resolved plant (or a layout) as dispatch machines (min up/down times rounded up to whole
    periods); reads ``horizon`` and ``blowers`` only."""
    h = plant.horizon.period_h
    n = plant.horizon.n_periods
    out = []
    for b in plant.blowers:
        curve = equivalent_curve(b.airflow_min_Sm3_h, b.airflow_max_Sm3_h, b.efficiency,
                                 [(e.airflow_Sm3_h, e.efficiency) for e in b.efficiency_points])
        out.append(Machine(b.id, curve, b.pressure_max_gauge_kPa, b.out_of_service,
                           min(n, math.ceil(b.min_up_h / h - 1e-9)), min(n, math.ceil(b.min_down_h / h - 1e-9)),
                           b.max_starts_per_day, b.start_cost,
                           tuple((r.discharge_gauge_kPa, r.airflow_min_Sm3_h, r.airflow_max_Sm3_h)
                                 for r in b.range_points)))
    return tuple(out)


@dataclass
class Bill:
    """Prices of a dispatch: ``price_per_kWh`` per period, the demand rate per kW and day, start costs on."""

    price_per_kWh: np.ndarray
    demand_per_kW_day: float
    with_start_costs: bool
    cost: bool  # False: energy objective (price 1, no demand charge, no start costs)

    @classmethod
    def of(cls, plant: ResolvedPlant | Layout, objective: str) -> "Bill":
        """The prices of ``objective`` under the plant's tariff (a layout is resolved first)."""
        plant = resolve_plant(plant)
        n = plant.n_periods
        air = plant.air
        if objective == "cost" and air.tariff is not None:
            return cls(np.asarray(air.tariff.price_per_kWh, dtype=float), air.demand_rate_per_kW_day, True, True)
        return cls(np.ones(n), 0.0, False, False)


@dataclass
class Dispatch:
    """Which machines run in each period, their airflow and power, and the day's bill."""

    machines: tuple[Machine, ...]
    running: np.ndarray  # (machines, periods) bool
    airflow_Sm3_h: np.ndarray  # (machines, periods)
    power_kW: np.ndarray  # (machines, periods)
    discharge_gauge_kPa: np.ndarray  # (periods,)
    demand_Sm3_h: np.ndarray  # (periods,) what was asked
    shortfall_Sm3_h: np.ndarray  # (periods,) what no machine set could deliver
    period_h: float
    status: str = "optimal"
    seconds: float = 0.0
    findings: list = field(default_factory=list)

    @property
    def starts(self) -> np.ndarray:
        """(machines, periods) bool: started at the beginning of the period (around the periodic day)."""
        return self.running & ~np.roll(self.running, 1, axis=1)

    @property
    def total_power_kW(self) -> np.ndarray:
        return self.power_kW.sum(axis=0)

    def bill(self, plant: ResolvedPlant | Layout) -> dict:
        """Energy, energy cost, demand charge, start costs, peak kW and its period (0-based), under the plant's
        tariff (a layout is resolved first)."""
        p = self.total_power_kW
        energy = float(p.sum() * self.period_h)
        starts = self.starts.sum(axis=1)
        out = {"energy_kWh_per_day": energy, "peak_kW": float(p.max()), "peak_period": int(np.argmax(p)),
               "starts": {m.id: int(s) for m, s in zip(self.machines, starts)},
               "running_h": {m.id: float(r.sum() * self.period_h) for m, r in zip(self.machines, self.running)}}
        air = resolve_plant(plant).air
        if air.tariff is None:
            out.update(energy_cost=None, demand_charge=None, start_costs=None, cost_per_day=None)
            return out
        ec = float(air.energy_cost([float(x) for x in p], self.period_h))
        dc = float(air.demand_charge(float(p.max())))
        sc = float(sum(m.start_cost * s for m, s in zip(self.machines, starts)))
        out.update(energy_cost=ec, demand_charge=dc, start_costs=sc, cost_per_day=ec + dc + sc)
        return out

    def same_decisions(self, other: "Dispatch") -> bool:
        return other is not None and self.running.shape == other.running.shape and \
            bool((self.running == other.running).all())


def _allowed(m: Machine, d_kPa: float) -> bool:
    return not m.out_of_service and d_kPa <= m.pressure_max_gauge_kPa * (1.0 + 1e-9)


def evaluate(machines, running: np.ndarray, demand_Sm3_h, discharge_gauge_kPa, kw_per_equivalent, period_h: float,
             **kw) -> Dispatch:
    """Airflow split and power of given on/off decisions (the least-power split of each period's airflow).

    The airflow is clipped into the running set's range; what is outside the range is the
    shortfall (positive: not delivered) reported with the dispatch.
    """
    running = np.asarray(running, dtype=bool)
    demand = np.asarray(demand_Sm3_h, dtype=float)
    pressure = np.asarray(discharge_gauge_kPa, dtype=float)
    nm, n = running.shape
    q = np.zeros((nm, n))
    pw = np.zeros((nm, n))
    short = np.zeros(n)
    for p in range(n):
        on = [j for j in range(nm) if running[j, p]]
        if not on:
            short[p] = demand[p]
            continue
        curves = [machines[j].curve_at(pressure[p]) for j in on]
        agg = aggregate_curve(curves)
        total = min(max(demand[p], agg.airflow_min_Sm3_h), agg.airflow_max_Sm3_h)
        short[p] = max(0.0, demand[p] - total)
        split = split_airflow(curves, total)
        for j, c, qj in zip(on, curves, split):
            q[j, p] = qj
            pw[j, p] = kw_per_equivalent[p] * c.equivalent(qj)
    return Dispatch(tuple(machines), running, q, pw, np.asarray(discharge_gauge_kPa, dtype=float), demand, short,
                    period_h, **kw)


def solve_dispatch(machines, demand_Sm3_h, discharge_gauge_kPa, kw_per_equivalent, bill: Bill, period_h: float,
                   excess_max_Sm3_h=None, *, time_limit: float = 60.0) -> Dispatch:
    """The least-cost dispatch of a day (see module notes); never raises for a demand it cannot meet."""
    t0 = time.perf_counter()
    machines = tuple(machines)
    D = np.asarray(demand_Sm3_h, dtype=float)
    d = np.asarray(discharge_gauge_kPa, dtype=float)
    w = np.asarray(kw_per_equivalent, dtype=float)
    n = D.size
    E = np.zeros(n) if excess_max_Sm3_h is None else np.maximum(0.0, np.asarray(excess_max_Sm3_h, dtype=float))
    J = range(len(machines))
    P = range(n)
    m = pyo.ConcreteModel(name="dispatch")
    curve = {(j, p): machines[j].curve_at(d[p]) for j in J for p in P}
    segs = {jp: list(zip(c.slopes(), np.diff(c.airflow_Sm3_h))) for jp, c in curve.items()}
    m.y = pyo.Var(J, P, domain=pyo.Binary)
    m.start = pyo.Var(J, P, bounds=(0.0, 1.0))
    m.stop = pyo.Var(J, P, bounds=(0.0, 1.0))
    m.f = pyo.Var([(j, k, p) for j in J for p in P for k in range(len(segs[j, p]))], bounds=(0.0, None))
    m.excess = pyo.Var(P, bounds=lambda m, p: (0.0, float(E[p])))
    m.short = pyo.Var(P, bounds=(0.0, None))
    m.peak = pyo.Var(bounds=(0.0, None))
    for j in J:
        for p in P:
            if not _allowed(machines[j], d[p]):
                m.y[j, p].fix(0)
    m.seg_cap = pyo.Constraint([(j, k, p) for j in J for p in P for k in range(len(segs[j, p]))],
                               rule=lambda m, j, k, p: m.f[j, k, p] <= float(segs[j, p][k][1]) * m.y[j, p])

    def airflow(j, p):
        return curve[j, p].airflow_min_Sm3_h * m.y[j, p] + sum(m.f[j, k, p] for k in range(len(segs[j, p])))

    def equivalent(j, p):
        return curve[j, p].equivalent_Sm3_h[0] * m.y[j, p] + sum(
            float(s) * m.f[j, k, p] for k, (s, _) in enumerate(segs[j, p]))

    m.power = pyo.Expression(P, rule=lambda m, p: float(w[p]) * sum(equivalent(j, p) for j in J))
    m.balance = pyo.Constraint(P, rule=lambda m, p: sum(airflow(j, p) for j in J) == float(D[p]) + m.excess[p]
                               - m.short[p])
    m.peak_def = pyo.Constraint(P, rule=lambda m, p: m.peak >= m.power[p])
    prev = {p: (p - 1) % n for p in P}
    m.start_def = pyo.Constraint(J, P, rule=lambda m, j, p: m.start[j, p] >= m.y[j, p] - m.y[j, prev[p]])
    m.stop_def = pyo.Constraint(J, P, rule=lambda m, j, p: m.stop[j, p] >= m.y[j, prev[p]] - m.y[j, p])

    def window(p, length):
        return [(p - i) % n for i in range(length)]

    m.min_up = pyo.Constraint(
        [(j, p) for j in J for p in P if machines[j].min_up > 1],
        rule=lambda m, j, p: sum(m.start[j, t] for t in window(p, machines[j].min_up)) <= m.y[j, p])
    m.min_down = pyo.Constraint(
        [(j, p) for j in J for p in P if machines[j].min_down > 1],
        rule=lambda m, j, p: sum(m.stop[j, t] for t in window(p, machines[j].min_down)) <= 1 - m.y[j, p])
    m.max_starts = pyo.Constraint(
        [j for j in J if machines[j].max_starts is not None],
        rule=lambda m, j: sum(m.start[j, p] for p in P) <= machines[j].max_starts)
    price = np.asarray(bill.price_per_kWh, dtype=float)
    dear = float(max(price.max(), 1e-9) * max(w.max(), 1e-9))
    tiebreak = START_TIEBREAK_kWh * float(price.mean())
    starts_cost = sum(((machines[j].start_cost if bill.with_start_costs else 0.0) + tiebreak) * m.start[j, p]
                      for j in J for p in P)
    m.obj = pyo.Objective(expr=sum(float(price[p]) * period_h * m.power[p] for p in P)
                          + bill.demand_per_kW_day * m.peak + starts_cost
                          + SHORTFALL_WEIGHT * dear * sum(m.short[p] for p in P))
    r = solve_milp(m, time_limit=time_limit, rel_gap=DISPATCH_GAP)
    if not r.has_solution:
        raise SolverError(f"the blower dispatch found no solution ({r.message})")
    running = _canonical(machines, np.array([[pyo.value(m.y[j, p]) > 0.5 for p in P] for j in J],
                                            dtype=bool).reshape(len(machines), n))
    delivered = D + np.array([pyo.value(m.excess[p]) for p in P]) - np.array([pyo.value(m.short[p]) for p in P])
    out = evaluate(machines, running, delivered, d, w, period_h, status=r.status.value)
    out.demand_Sm3_h = D
    out.shortfall_Sm3_h = np.maximum(0.0, D - out.airflow_Sm3_h.sum(axis=0))
    out.seconds = time.perf_counter() - t0
    out.findings = shortfall_findings(out)
    return out


def _canonical(machines, running: np.ndarray) -> np.ndarray:
    """Among identical machines, give the earlier one the pattern that runs first (the dispatch is symmetric
    in them): equal-cost answers then compare equal between rounds."""
    running = running.copy()
    groups: dict = {}
    for j, mm in enumerate(machines):
        key = (mm.curve, mm.pressure_max_gauge_kPa, mm.out_of_service, mm.min_up, mm.min_down, mm.max_starts,
               mm.start_cost, mm.range_points)
        groups.setdefault(key, []).append(j)
    for idx in groups.values():
        if len(idx) > 1:
            patterns = sorted((tuple(running[j]) for j in idx), reverse=True)
            for j, pat in zip(idx, patterns):
                running[j] = pat
    return running


def shortfall_findings(dp: Dispatch) -> list[dict]:
    """One finding per period whose demand no allowed machine set can deliver, with the reason."""
    out = []
    for p in np.flatnonzero(dp.shortfall_Sm3_h > SHORTFALL_TOL_Sm3_h):
        d = float(dp.discharge_gauge_kPa[p])
        allowed = [mm for mm in dp.machines if _allowed(mm, d)]
        if not allowed:
            why = (f"no blower in service can deliver {d:.1f} kPa gauge (limits "
                   + ", ".join(f"{mm.id} {mm.pressure_max_gauge_kPa:g}" for mm in dp.machines if not mm.out_of_service)
                   + " kPa)")
        elif dp.demand_Sm3_h[p] > sum(mm.range_at(d)[1] for mm in allowed):
            why = (f"above the capacity of the blowers that can run at {d:.1f} kPa "
                   f"({sum(mm.range_at(d)[1] for mm in allowed):.0f} Sm3/h)")
        elif dp.demand_Sm3_h[p] < min(mm.range_at(d)[0] for mm in allowed):
            smallest = min(allowed, key=lambda mm: mm.range_at(d)[0])
            why = (f"below the smallest blower's minimum ({smallest.id} {smallest.range_at(d)[0]:.0f} Sm3/h at "
                   f"{d:.1f} kPa) and no other zone can take the extra air")
        else:
            why = "blocked by the blowers' minimum run/rest times or starts limit"
        out.append({"limit": "blower_staging", "period": int(p) + 1, "shortfall_Sm3_h": float(dp.shortfall_Sm3_h[p]),
                    "demand_Sm3_h": float(dp.demand_Sm3_h[p]),
                    "message": f"period {int(p) + 1}: the blowers cannot deliver {dp.demand_Sm3_h[p]:.0f} Sm3/h: "
                               f"{dp.shortfall_Sm3_h[p]:.0f} Sm3/h short, {why}"})
    return out


def curve_lines(curve: EquivalentCurve) -> list[tuple[float, float]]:
    """``(a, b)`` of the lines ``g = a + b Q`` of a convex piecewise-linear curve (its maximum on its range)."""
    q, g = curve.airflow_Sm3_h, curve.equivalent_Sm3_h
    return [(g[i] - s * q[i], float(s)) for i, s in enumerate(curve.slopes())]


def set_lines(machines, running, discharge_gauge_kPa: float) -> list[tuple[float, float]]:
    """Lines of the least equivalent airflow of the running machines sharing a total airflow at a pressure."""
    return curve_lines(aggregate_curve([mm.curve_at(discharge_gauge_kPa) for mm, on in zip(machines, running) if on]))


def envelope_lines(machines) -> list[tuple[float, float]]:
    """Lines of the convex envelope of the least equivalent airflow over every set of machines in service
    and of no air at all (the origin): a convex under-estimate of the staged power, for the relaxed solve
    (on the nominal airflow ranges, which contain the range at any pressure)."""
    avail = [mm for mm in machines if not mm.out_of_service]
    pts = [(0.0, 0.0)]
    for mask in range(1, 2 ** len(avail)):
        agg = aggregate_curve([mm.curve for i, mm in enumerate(avail) if mask >> i & 1])
        pts.extend(zip(agg.airflow_Sm3_h, agg.equivalent_Sm3_h))
    hull = lower_convex_hull(pts)
    lines: list[tuple[float, float]] = []
    for (x0, y0), (x1, y1) in zip(hull, hull[1:]):
        b = (y1 - y0) / (x1 - x0)
        if lines and abs(b - lines[-1][1]) <= 1e-9 * abs(b):  # collinear up to round-off
            continue
        lines.append((y0 - b * x0, b))
    return lines


def max_lines(machines) -> int:
    """Most lines any set of machines (or the envelope) needs: the size of the NLP's power-curve rows."""
    return max(sum(len(mm.curve.slopes()) for mm in machines), len(envelope_lines(machines)), 1)


def swing_states(fraction, max_switches: int | None) -> np.ndarray:
    """On/off of a swing zone per period nearest to the relaxed ``fraction`` (module notes)."""
    f = np.clip(np.asarray(fraction, dtype=float), 0.0, 1.0)
    n = f.size
    plain = f >= 0.5
    if max_switches is None or n < 2 or int(np.sum(plain != np.roll(plain, 1))) <= max_switches:
        return plain
    m = pyo.ConcreteModel(name="swing")
    P = range(n)
    m.y = pyo.Var(P, domain=pyo.Binary)
    m.s = pyo.Var(P, bounds=(0.0, 1.0))
    m.up = pyo.Constraint(P, rule=lambda m, p: m.s[p] >= m.y[p] - m.y[(p - 1) % n])
    m.down = pyo.Constraint(P, rule=lambda m, p: m.s[p] >= m.y[(p - 1) % n] - m.y[p])
    m.limit = pyo.Constraint(expr=sum(m.s[p] for p in P) <= max_switches)
    # |y - f| = y (1 - 2 f) + f for binary y; ties (f = 1/2) lean to on (the conservative state)
    m.obj = pyo.Objective(expr=sum((1.0 - 2.0 * float(f[p]) - 1e-6) * m.y[p] for p in P))
    r = solve_milp(m, rel_gap=0.0)
    if not r.has_solution:
        raise SolverError(f"the swing-zone rounding found no solution ({r.message})")
    return np.array([pyo.value(m.y[p]) > 0.5 for p in P])


__all__ = ["Bill", "Dispatch", "Machine", "curve_lines", "envelope_lines", "evaluate", "machines_of", "max_lines",
           "set_lines", "shortfall_findings", "solve_dispatch", "swing_states"]
