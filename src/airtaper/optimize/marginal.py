"""Marginal costs of the limits, from the duals of the optimum.

The solver bridge returns every dual as ``d f* / d b``, the derivative of the
optimal objective with respect to the limit's bound (:mod:`airtaper.solve.ipopt`).
The objective is ``goal / reference + smoothing``, so ``reference x dual`` is the
change of the goal (kWh/d, or cost/d under a tariff) per unit of the limit.

Sign convention of the reported figures (docs/optimization.md):

* effluent limits and DO minima: ``kWh_per_day`` is the change of the daily energy
  when the limit is **tightened by 0.1 mg/L** (an effluent limit lowered, a DO
  minimum raised); positive means the tighter limit costs more;
* diffusers: the change of the daily energy when **one diffuser is added** to the
  zone's grid (airflow per diffuser and diffuser density follow); negative means
  the extra diffuser saves energy.

A limit that does not bind has a marginal cost of 0. ``nh4_max`` moves the limit
of every period together (the sum of the period duals); a zone's DO minimum moves
at every time step together. When the objective is energy, the cost figure is the
energy figure times the day's mean price (cost / energy at the optimum), and the
other way round for a cost objective; that conversion is marked ``"estimated"``.
"""

from __future__ import annotations

import numpy as np
import pyomo.environ as pyo

from airtaper.solve import nlp as _nlp

#: Step of the limits in the report, mg/L.
STEP_mg_L = 0.1
#: Relative step of the central difference in :func:`parameter_sensitivity`.
PARAMETER_STEP = 1e-4


def _dual(result, con) -> float:
    try:
        return float(result.dual(con))
    except KeyError:
        return 0.0


def parameter_sensitivity(m, result, params) -> list[float]:
    """d f* / d q of the optimal objective for mutable Params ``q`` of the solved problem.

    Envelope theorem: at a KKT point ``d f*/d q = df/dq - sum_c dual_c d body_c/d q``
    with the bridge's duals ``dual_c = d f*/d b_c`` (moving a constraint body up by
    ``delta`` is moving its bound down by ``delta``). The partial derivatives are
    central differences of the bridge's own objective and constraint functions at the
    solution, with the parameter moved by :data:`PARAMETER_STEP` of its value.
    """
    structure, _ = _nlp.get_structure(m)
    tape, ev = structure.tape, structure.evaluator
    x = np.array([float(v.value) for v in tape.variables])
    p0 = structure.parameter_values()
    where = {id(q): i for i, q in enumerate(tape.parameters)}
    duals = np.array([result.constraint_duals.get(c, 0.0) for c in tape.constraints])
    out = []
    try:
        for q in params:
            i = where.get(id(q))
            if i is None:  # the parameter does not enter the active problem
                out.append(0.0)
                continue
            h = PARAMETER_STEP * max(abs(p0[i]), 1.0)
            vals = []
            for sign in (1.0, -1.0):
                p = p0.copy()
                p[i] += sign * h
                ev.set_parameters(p)
                vals.append((tape.sense * ev.objective(x), ev.constraints(x).copy()))
            dfdq = (vals[0][0] - vals[1][0]) / (2 * h)
            dgdq = (vals[0][1] - vals[1][1]) / (2 * h)
            out.append(float(dfdq - duals @ dgdq))
    finally:
        ev.set_parameters(p0)
    return out


def limit_derivative(result, constraints, param) -> float:
    """d f* / d q of the optimum for a mutable Param ``q`` that enters ``constraints`` linearly, in a bound or in the
    body, from their duals.

    A dual is ``d f* / d b`` for the bound ``b`` the constraint holds (:mod:`airtaper.solve.ipopt`); moving the body
    up by ``delta`` is moving that bound down by ``delta``. So ``d f*/d q = sum_c dual_c (d b_c/d q - d body_c/d q)``.
    Which side ``q`` lands on is Pyomo's choice, not ours: ``so >= do_min`` keeps ``do_min`` as the lower bound, but
    ``so >= do_min * held`` with ``held`` a (fixed) variable, as a swing zone's DO minimum is written, becomes
    ``do_min * held - so <= 0``, where the dual's sign is the other way round and a raised minimum moves the body.
    Summing the duals there reported a tighter swing-zone minimum as a saving. The partial derivatives are taken
    as differences of a unit step of ``q`` (the constraints are linear in it, so the difference is exact).
    """
    q0 = float(pyo.value(param))

    def parts():
        return np.array([[float(pyo.value(c.lower)) if c.has_lb() else 0.0,
                          float(pyo.value(c.upper)) if c.has_ub() else 0.0,
                          float(pyo.value(c.body))] for c in constraints]).reshape(-1, 3)

    before = parts()
    try:
        param.set_value(q0 + 1.0)
        after = parts()
    finally:
        param.set_value(q0)
    d = after - before
    total = 0.0
    for c, (d_lower, d_upper, d_body) in zip(constraints, d):
        dual = _dual(result, c)
        if dual == 0.0:
            continue
        # the bound that binds: a lower bound's dual is >= 0 and an upper bound's <= 0 for a minimum
        # (the module notes of airtaper.solve.ipopt); an equality has both and they move together
        d_bound = d_lower if c.has_lb() and (not c.has_ub() or dual > 0.0) else d_upper
        total += dual * (d_bound - d_body)
    return total


def raw_derivatives(prob, result) -> dict:
    """d goal / d limit (goal units per mg/L, or per diffuser), keyed like the report entries, of the solved
    :class:`~airtaper.optimize.problem.Problem`."""
    m, b = prob.m, prob.block
    ref = prob.reference
    out = {}
    if b.nh4_mean.active:
        out[("nh4_mean_mg_L", None)] = ref * _dual(result, b.nh4_mean)
    if b.nh4_max.active:
        out[("nh4_max_mg_L", None)] = ref * sum(_dual(result, b.nh4_max[p]) for p in m.PERIODS)
    if b.tn_mean.active:
        out[("tn_mean_mg_L", None)] = ref * _dual(result, b.tn_mean)
    for z in b.DO_ZONES:
        out[("do_min_mg_L", z)] = ref * limit_derivative(result, [b.do_min[t, z] for t in m.STEPS],
                                                         b.do_min_mg_L[z])
    zones = list(b.ZONES)
    for z, d in zip(zones, parameter_sensitivity(m, result, [m.diffuser_count[z] for z in zones])):
        out[("diffusers", z)] = ref * d
    return out


def marginal_costs(prob, result, *, energy_kWh_per_day: float, cost_per_day: float | None) -> list[dict]:
    """Report entries (see module notes) of the solved :class:`~airtaper.optimize.problem.Problem`;
    ``energy``/``cost`` at the optimum set the mean price."""
    b = prob.block
    objective = prob.objective
    price = (cost_per_day / energy_kWh_per_day) if (cost_per_day is not None and energy_kWh_per_day > 0) else None
    out = []
    for (limit, zone), d in raw_derivatives(prob, result).items():
        if limit == "diffusers":
            change = d  # one more diffuser
            per = "per extra diffuser"
            where = zone
        elif limit == "do_min_mg_L":
            change = d * STEP_mg_L  # raised by 0.1
            per = "per 0.1 mg/L higher DO minimum"
            where = zone
        else:
            change = -d * STEP_mg_L  # lowered by 0.1
            per = "per 0.1 mg/L tighter limit"
            where = "effluent"
        if objective == "cost":
            cost = change
            kwh = change / price if price else None
            estimated = "kWh_per_day"
        else:
            kwh = change
            cost = change * price if price is not None else None
            estimated = "cost_per_day" if price is not None else None
        entry = {"limit": limit, "where": where, "kWh_per_day": kwh, "cost_per_day": cost, "per": per,
                 "estimated": estimated, "binding": abs(d) > 1e-9 * max(1.0, prob.reference)}
        if limit in ("nh4_mean_mg_L", "nh4_max_mg_L", "tn_mean_mg_L"):
            entry["limit_value_mg_L"] = pyo.value({"nh4_mean_mg_L": b.nh4_mean_limit, "nh4_max_mg_L": b.nh4_max_limit,
                                                   "tn_mean_mg_L": b.tn_mean_limit}[limit])
        elif limit == "do_min_mg_L":
            entry["limit_value_mg_L"] = pyo.value(b.do_min_mg_L[zone])
        out.append(entry)
    return out


__all__ = ["PARAMETER_STEP", "STEP_mg_L", "limit_derivative", "marginal_costs", "parameter_sensitivity",
           "raw_derivatives"]
