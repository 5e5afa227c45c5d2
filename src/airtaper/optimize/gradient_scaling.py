"""Scaling of the optimisation for Ipopt: variables by magnitude, rows by their scaled gradient.

Why. Airflows are thousands of Sm3/h while the objective (energy over its baseline
value) is about 1, so its gradient per airflow is about 1e-5. Ipopt's default
gradient-based scaling only scales *down* large gradients; with such small
gradients the regularised Newton steps of the nonconvex problem are a few Sm3/h
and the solve crawls. Scaling the variables to order one fixes that.

Rule (all factors multiply: scaled = factor x original)::

    variables    s_x = 1 / max(|x0|, typical)      typical: airflow -> zone maximum,
                                                   header -> 10 kPa, others -> 1
    constraints  s_g = 1 / max_j |dg/dx_j / s_x_j|  clipped to [1e-8, 1e4]
    objective    s_f = 1 / max_j |df/dx_j / s_x_j|  clipped to [1, 1e4]

evaluated once at the initial point (Ipopt's own gradient-based rule, applied after
the variable scaling and in both directions). The factors go into the model's
``scaling_factor`` suffix, which :func:`airtaper.solve.solve_nlp` passes to Ipopt
(``user-scaling``).
"""

from __future__ import annotations

import numpy as np
import pyomo.environ as pyo

from airtaper.solve import nlp as _nlp

ROW_SCALE_BOUNDS = (1e-8, 1e4)
OBJECTIVE_SCALE_BOUNDS = (1.0, 1e4)


def _typical(m, var) -> float:
    comp = var.parent_component()
    if comp is m.airflow_Sm3_h:
        z = var.index()[0]
        return max(m.aeration[z].airflow_max_Sm3_h, 1.0)
    if comp is getattr(m.opt, "header_gauge_kPa", None):
        return 10.0
    return 1.0


def apply_scaling(m) -> dict:
    """Compute and store scaling factors for the active problem of ``m`` (see module notes).

    Returns a dict with the ranges used (for the solver report).
    """
    structure, _ = _nlp.get_structure(m)
    tape = structure.tape
    ev = structure.evaluator
    ev.set_parameters(structure.parameter_values())
    x0 = np.array([0.0 if v.value is None else float(v.value) for v in tape.variables])
    typical = np.array([_typical(m, v) for v in tape.variables])
    sx = 1.0 / np.maximum(np.abs(x0), typical)
    fns = structure.functions
    vals = np.abs(ev.jacobian(x0)) / sx[fns.jac_cols]
    row_max = np.zeros(fns.m)
    np.maximum.at(row_max, fns.jac_rows, vals)
    sg = np.clip(1.0 / np.where(row_max > 0, row_max, 1.0), *ROW_SCALE_BOUNDS)
    grad = np.abs(ev.gradient(x0)) / sx
    gmax = float(grad.max()) if grad.size else 1.0
    sf = float(np.clip(1.0 / gmax if gmax > 0 else 1.0, *OBJECTIVE_SCALE_BOUNDS))
    suffix = m.component("scaling_factor")
    if suffix is None:
        m.scaling_factor = suffix = pyo.Suffix(direction=pyo.Suffix.EXPORT)
    for v, f in zip(tape.variables, sx.tolist()):
        suffix[v] = f
    for c, f in zip(tape.constraints, sg.tolist()):
        suffix[c] = f
    if tape.objective is not None:
        suffix[tape.objective] = sf
    return dict(variable_scale=(float(sx.min()), float(sx.max())), row_scale=(float(sg.min()), float(sg.max())),
                objective_scale=sf)


__all__ = ["apply_scaling"]
