"""Initialisation of the train models: a start that converges from scratch.

Steady model (:func:`initialise_steady`)
    1. **Sequential pass** through the train in flow order: every zone gets a
       first estimate from the influent it receives and a sludge-age mass
       balance (solids and biomass grown over an assumed SRT, soluble substrate
       and ammonia mostly removed, nitrate from the nitrified ammonia); the
       clarifier layers get the feed's composition at thickened / clarified
       levels; the settling-velocity variables are solved from their own
       equations.
    2. **Full system, pseudo-transient continuation**: implicit Euler steps in
       (pseudo) time on all equations at once with a step that grows
       geometrically; the mass balances are the time derivatives, the algebraic
       equations (settler solids and fluxes, SRT target, imposed DO) are solved
       at every step. Concentrations are kept non-negative. It follows the
       plant's own dynamics toward its steady state, so it keeps the nitrifiers
       the estimate seeded (no jump to the washout solution).
    3. **Newton** on the full square system to full precision.

    Steps 2-3 use :mod:`airtaper.model.numeric` (exact Jacobians by complex
    step); no NLP solver is needed, so the result can also be checked without
    one. Pass the result to :mod:`airtaper.solve` for the solve proper.

Cyclic model (:func:`initialise_cyclic`, then :func:`march_cyclic`)
    The steady state at the day's mean load (with each zone's daily-mean
    airflow) copied to every time point; then a march through the day, step by
    step, with the model's own discretised equations (Newton on each step with
    the state before it given), which lands close to the periodic solution.

References
----------
Kelley, C.T., Keyes, D.E. (1998). Convergence analysis of pseudo-transient
continuation. SIAM Journal on Numerical Analysis 35(2), 508-523.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np
import pyomo.environ as pyo
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from airtaper.errors import ModelError
from airtaper.layout.types import ASM1_COMPONENTS
from airtaper.model.numeric import compile_system
from airtaper.physics import settling as settling_physics
from airtaper.process.stoichiometry import IDX, SOLIDS_COD

#: SRT assumed by the first estimate when the layout fixes the waste flow, d.
#: Common practice (no source): typical of nitrifying plants.
GUESS_SRT_d = 10.0


@dataclass
class InitReport:
    """What the initialisation did."""

    converged: bool
    ptc_steps: int
    newton_iterations: int
    residual_max: float  # max |residual| scaled by the row scale
    seconds: float


# --- step 1: sequential pass ------------------------------------------------------------
def _assumed_srt(m, data) -> float:
    if data.srt_d is not None:
        return float(data.srt_d)
    # SRT ~ V X / (Qw X_u), X_u / X ~ (Qf / Qu) for a good clarifier
    v = float(data.volume_m3.sum())
    qf = float(data.feed_m3_d.mean())
    qu = float(data.ras_m3_d.mean() + data.waste_m3_d.mean())
    srt = v * qu / (qf * float(data.waste_m3_d.mean()))
    return float(np.clip(srt, 3.0, 30.0)) if np.isfinite(srt) else GUESS_SRT_d


def _zone_estimate(m, data, srt_d: float) -> np.ndarray:
    """First estimate of every zone (Z, 13) from the influent and a sludge-age balance."""
    p = data.params[0]
    cin = data.influent_conc.mean(axis=0)
    q = float(data.influent_m3_d.mean())
    v_total = float(data.volume_m3.sum())
    hrt_d = v_total / q
    c = dict(zip(ASM1_COMPONENTS, cin))
    bio_cod = c["SS"] + c["XS"] + c["XBH"]
    tkn = c["SNH"] + c["SND"] + c["XND"] + p.i_XB * (c["XBH"] + c["XBA"]) + p.i_XP * (c["XI"] + c["XP"])
    factor = srt_d / hrt_d  # solids concentration factor of the sludge age
    xbh = p.Y_H * bio_cod * factor / (1.0 + p.b_H * srt_d)
    xba = max(p.Y_A * 0.7 * tkn * factor / (1.0 + p.b_A * srt_d), 0.02 * xbh)
    xp = p.f_P * (p.b_H * xbh + p.b_A * xba) * srt_d
    xi = c["XI"] * factor
    est = np.zeros((len(data.zones), len(ASM1_COMPONENTS)))
    for i, z in enumerate(data.zones):
        aerated = z in m.aeration and (z in m.FIXED_KLA_ZONES or any(
            (m.airflow_Sm3_h[z, pp].value or 0.0) > 0 for pp in m.PERIODS))
        row = {
            "SI": c["SI"], "SS": 2.0, "XI": xi, "XS": 0.03 * xbh, "XBH": xbh, "XBA": xba, "XP": xp,
            "SO": 1.0 if aerated else 0.01, "SNO": 0.3 * tkn if aerated else 0.15 * tkn,
            "SNH": 0.1 * tkn if aerated else 0.25 * tkn, "SND": 0.5, "XND": 0.05 * 0.03 * xbh + 1.0,
            "SALK": max(c["SALK"] - 0.5 * tkn / 14.0, 0.5),
        }
        est[i] = [row[k] for k in ASM1_COMPONENTS]
    return est


def _settler_estimate(m, data, feed: np.ndarray) -> None:
    """Layers: the feed's solubles; particulates thin above the feed layer, thick at the bottom."""
    n, f = m.settler_layers, m.settler_feed_layer
    qf = float(data.feed_m3_d.mean())
    qu = float(data.ras_m3_d.mean() + (data.waste_m3_d.mean() if data.waste_m3_d is not None else 0.01 * qf))
    part = np.zeros(len(ASM1_COMPONENTS), dtype=bool)
    for k in ("XI", "XS", "XBH", "XBA", "XP", "XND"):
        part[IDX[k]] = True
    solids = np.array([1.0 if k in ("XI", "XS", "XBH", "XBA", "XP") else 0.0 for k in ASM1_COMPONENTS])
    for t in m.STEPS:
        for layer in m.LAYERS:
            if layer < f:
                share = 0.004 * 2.0 ** (layer - f + 1)
            elif layer < n:
                share = 0.12
            else:
                share = qf / qu
            row = np.where(part, feed * share, feed)
            for k, c in enumerate(ASM1_COMPONENTS):
                m.settler_conc[t, layer, c].set_value(float(row[k]))
            m.settler_tss[t, layer].set_value(float(m.tss_per_cod * (row @ solids)))
        set_settler_velocities(m, t)


def settler_velocities(m, t) -> np.ndarray:
    """Effective settling velocity out of each layer but the last at time point ``t``, m/d: ``J_l / X_l``.

    The solution of the model's ``settler_flux_definition[t, l]`` (``w_l X_l = J_l``,
    :mod:`airtaper.model.clarifier`) for ``w_l`` at the current layer solids and feed, evaluated
    once for all layers with numpy through the same physics functions the constraint is built
    from (:mod:`airtaper.physics.settling`), instead of a Pyomo expression walk and a root solve
    per interface (``calculate_variable_from_constraint``): BSM1's steady initialisation took
    0.83-0.88 CPU s with those, 0.60-0.69 with this (4 runs each, 2-core machine at a load of 6).
    """
    s = m.settler
    f = m.settler_feed_layer  # 1-based, as the model's LAYERS
    z = m.ZONES.last()
    feed_tss = m.tss_per_cod * sum(float(m.conc[t, z, c].value) for c in SOLIDS_COD)
    x = np.array([float(m.settler_tss[t, layer].value) for layer in m.LAYERS])
    flux = settling_physics.layer_interface_fluxes_g_m2_d(x, f - 1, s.fns * feed_tss, s.v0_max_m_d, s.v0_m_d,
                                                          s.rh_m3_g, s.rp_m3_g, s.x_threshold_g_m3)
    return flux / x[:-1]


def set_settler_velocities(m, t) -> None:
    """Set ``settler_velocity[t, :]`` from its definition at the current layers (:func:`settler_velocities`)."""
    for layer, w in zip(m.INTERFACES, settler_velocities(m, t)):
        m.settler_velocity[t, layer].set_value(float(w), skip_validation=True)


def set_layer_state(m, t, layers) -> None:
    """Put known clarifier layers (layers, 13) from the top into time point ``t`` of a layered model.

    Concentrations are clipped at 0; the layers' solids and effective settling velocities follow
    from their own definitions (so those equations hold exactly at ``t``).
    """
    solids = [IDX[k] for k in ("XI", "XS", "XBH", "XBA", "XP")]
    for layer, row in zip(m.LAYERS, np.asarray(layers, dtype=float)):
        for k, c in enumerate(ASM1_COMPONENTS):
            m.settler_conc[t, layer, c].set_value(max(float(row[k]), 0.0), skip_validation=True)
        m.settler_tss[t, layer].set_value(max(float(m.tss_per_cod * row[solids].sum()), 1e-6),
                                          skip_validation=True)
    set_settler_velocities(m, t)


def set_start_state(m, start: dict) -> None:
    """Put a known steady state into a steady model's states (for example the simulator's).

    ``start``: ``{"zones": {zone_id: 13 components}, "layers": (layers, 13) from the top (layered
    only), "waste_m3_d": float (optional)}``, g/m3 and SALK mol/m3. Settler solids and effective
    velocities follow from their own definitions; what ``start`` does not give keeps its value.
    """
    for t in m.STEPS:
        for z, row in start["zones"].items():
            for k, c in enumerate(ASM1_COMPONENTS):
                var = m.conc[t, z, c]
                if not var.fixed:
                    var.set_value(max(float(row[k]), 0.0), skip_validation=True)
        if hasattr(m, "settler_conc") and start.get("layers") is not None:
            set_layer_state(m, t, start["layers"])
    if start.get("waste_m3_d") is not None and not m.waste_m3_d[1].fixed:
        for p in m.PERIODS:
            m.waste_m3_d[p].set_value(float(start["waste_m3_d"]))


def sequential_pass(m) -> None:
    """Step 1 of :func:`initialise_steady`: estimates zone by zone, then the clarifier."""
    data = m.train_data
    est = _zone_estimate(m, data, _assumed_srt(m, data))
    for t in m.STEPS:
        for i, z in enumerate(data.zones):
            for k, c in enumerate(ASM1_COMPONENTS):
                var = m.conc[t, z, c]
                if not var.fixed:
                    var.set_value(float(est[i, k]))
    if hasattr(m, "settler_conc"):
        _settler_estimate(m, data, est[-1])
    for z in m.GRID_ZONES:  # DO setpoint mode: airflow unknown
        for p in m.PERIODS:
            if m.airflow_Sm3_h[z, p].value is None:
                lo, hi = m.aeration[z].airflow_range_Sm3_h
                m.airflow_Sm3_h[z, p].set_value(0.5 * (lo + hi))
    if not m.waste_m3_d[1].fixed:
        for p in m.PERIODS:
            m.waste_m3_d[p].set_value(float(pyo.value(m.solids_inventory_g[1])) / data.srt_d
                                      / max(float(pyo.value(m.underflow_tss_g_m3[1])), 1.0))


def _solve_linear(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Solve a dense-stored but sparse square system with SuperLU (single-threaded, no BLAS contention)."""
    x = spla.spsolve(sp.csc_matrix(a), b)
    if not np.all(np.isfinite(x)):
        raise np.linalg.LinAlgError("singular matrix")
    return x


# --- steps 2 and 3: full system ---------------------------------------------------------
def _pairing(m, system) -> tuple[np.ndarray, np.ndarray]:
    """Mass-matrix diagonal (1 where a row is the time derivative of its column) and row scales."""
    col = {id(v): k for k, v in enumerate(system.variables)}
    rows, cols = [], []
    for r, con in enumerate(system.constraints):
        comp = con.parent_component()
        idx = con.index()
        var = None
        if comp is getattr(m, "zone_balance", None):
            var = m.conc[idx]
        elif comp is getattr(m, "settler_balance", None):
            var = m.settler_conc[idx]
        if var is not None and id(var) in col:
            rows.append(r)
            cols.append(col[id(var)])
    return np.array(rows, dtype=int), np.array(cols, dtype=int)


def _row_scale(system, x) -> np.ndarray:
    """Residual scale per row: the largest term magnitude, estimated from the Jacobian."""
    jac = system.jacobian(x)
    mag = np.abs(jac) * np.maximum(np.abs(x), 1e-2)[None, :]
    return 1.0 / np.maximum(mag.max(axis=1), 1e-8)


def _lower_bounds(system) -> np.ndarray:
    return np.array([-np.inf if v.lb is None else float(v.lb) for v in system.variables])


#: Pseudo-time step control of step 2: the largest relative change of a state a step may make
#: (a step changing more is rejected and retried shorter), and the change the next step aims at.
_MAX_CHANGE = 0.5
_TARGET_CHANGE = 0.15
#: Pseudo time (d) the continuation may spend before it gives up: about 30 times the slowest
#: mode of a nitrifying plant (the nitrifiers, ~100 d). Common practice (no source).
MAX_PSEUDO_TIME_d = 3000.0
#: Scaled residual below which the continuation hands over to Newton.
_HANDOVER = 1e-6


def _newton(system, x, scale, lb, tol, max_iter=30):
    """Newton with backtracking on the scaled max-norm residual; returns (x, residual, iterations)."""
    f = system.residual(x)
    res = float(np.max(np.abs(f * scale)))
    for it in range(1, max_iter + 1):
        if res < tol:
            return x, res, it - 1
        try:
            dx = _solve_linear(system.jacobian(x), -f)
        except np.linalg.LinAlgError:
            return x, res, it
        alpha = 1.0
        while alpha > 1e-3:
            x_try = np.maximum(x + alpha * dx, lb)
            f_try = system.residual(x_try)
            r_try = float(np.max(np.abs(f_try * scale))) if np.all(np.isfinite(f_try)) else np.inf
            if r_try < (1 - 1e-4 * alpha) * res:
                break
            alpha *= 0.5
        else:
            return x, res, it  # no descent: Newton has stalled here
        x, f, res = x_try, f_try, r_try
    return x, res, max_iter


def initialise_steady(m, *, sequential: bool = True, max_ptc_steps: int = 2000, tol: float = 1e-10,
                      start: dict | None = None) -> InitReport:
    """Initialise a steady model from scratch (see the module notes); values are left in ``m``.

    Parameters
    ----------
    m : model from :func:`airtaper.model.train.build_steady_model`
    sequential : bool
        Run the sequential pass first (False: start from the model's current values).
    start : dict, optional
        A known steady state to start from instead of the sequential pass (see
        :func:`set_start_state`), for example the independent simulator's at the same airflows.
    max_ptc_steps : int
        Limit on pseudo-transient steps (accepted or rejected).
    tol : float
        Newton stops when every scaled residual is below ``tol``.

    Notes
    -----
    The pseudo-transient steps are linearly implicit Euler steps in pseudo time
    ``(M / dtau - J) dx = f`` on the balances (``M``: 1 where a row is the time
    derivative of its column). Their length is controlled by what they change,
    as an integrator controls its step: a step that changes some state by more
    than :data:`_MAX_CHANGE` of its size is rejected and retried shorter, and
    the next ``dtau`` aims at :data:`_TARGET_CHANGE`. Near the steady state the
    changes are small, so ``dtau`` grows and the steps become Newton steps;
    where the equations have a near-kink (the minimum of two settling fluxes
    under a sludge blanket) the steps stay short enough to follow the plant's
    own dynamics instead of oscillating. When the residual is small Newton
    finishes; if Newton stalls, the continuation goes on from where it was.
    Pseudo time only moves forward, so the iteration cannot stall: it ends at a
    steady state or after :data:`MAX_PSEUDO_TIME_d` of pseudo time.

    Raises
    ------
    ModelError
        If the model is not square or no steady state was found (plain words: the
        residual left and the pseudo time spent).
    """
    if not m.steady:
        raise ModelError("initialise_steady needs a steady model (build_steady_model)")
    t0 = time.perf_counter()
    if start is not None:
        sequential_pass(m)  # every variable gets a value; then the known state replaces the estimates
        set_start_state(m, start)
    elif sequential:
        sequential_pass(m)
    system = compile_system(m)
    n_rows, n_cols = system.shape
    if n_rows != n_cols:
        raise ModelError(f"steady model is not square: {n_rows} equations, {n_cols} unknowns")
    rows, cols = _pairing(m, system)
    lb = _lower_bounds(system)
    x = system.values()
    x = np.where(np.isnan(x), 1.0, x)
    scale = _row_scale(system, x)
    mass = np.zeros((n_rows, n_cols))
    mass[rows, cols] = 1.0
    with np.errstate(all="ignore"):
        x, res, steps, newton, tau = _continue_and_polish(system, x, scale, lb, mass, cols, tol, max_ptc_steps)
    converged = res < tol
    system.store(x)
    report = InitReport(converged, steps, newton, res, time.perf_counter() - t0)
    if not converged:
        raise ModelError(
            f"the train model's steady state was not found: scaled residual {res:.3g} after {tau:.0f} d of "
            f"pseudo time ({steps} steps, {newton} Newton iterations)")
    return report


def _continue_and_polish(system, x, scale, lb, mass, cols, tol, max_steps):
    """Steps 2 and 3 (see :func:`initialise_steady`); returns (x, residual, steps, Newton iterations, tau)."""
    dtau = 1e-3  # d
    tau = 0.0
    steps = newton = 0
    f = system.residual(x)
    res = float(np.max(np.abs(f * scale))) if np.all(np.isfinite(f)) else np.inf
    next_try = _HANDOVER
    floor = np.maximum(np.abs(x[cols]), 1.0)  # change measure of the states: relative, 1 g/m3 floor
    while steps < max_steps and tau < MAX_PSEUDO_TIME_d:
        if res < next_try:
            x_n, res_n, k = _newton(system, x, scale, lb, tol)
            newton += k
            if res_n < tol:
                return x_n, res_n, steps, newton, tau
            next_try = max(0.01 * min(res, next_try), 10 * tol)  # go on in pseudo time first
            if res_n < res:
                x, res = x_n, res_n
                f = system.residual(x)
        steps += 1
        try:
            dx = _solve_linear(mass / dtau - system.jacobian(x), f)
        except np.linalg.LinAlgError:
            dtau *= 0.25
            continue
        x_new = np.maximum(x + dx, lb)
        f_new = system.residual(x_new)
        floor = np.maximum(np.abs(x[cols]), 1.0)
        change = float(np.max(np.abs(x_new[cols] - x[cols]) / floor)) if cols.size else 0.0
        if not np.all(np.isfinite(f_new)) or change > _MAX_CHANGE:
            dtau *= 0.5 * (_MAX_CHANGE / change if np.isfinite(change) and change > 0 else 0.5)
            continue
        x, f = x_new, f_new
        tau += dtau
        res = float(np.max(np.abs(f * scale)))
        dtau = min(dtau * float(np.clip(_TARGET_CHANGE / max(change, 1e-12), 0.2, 2.0)), 1e6)
    x_n, res_n, k = _newton(system, x, scale, lb, tol)
    newton += k
    if res_n < res:
        x, res = x_n, res_n
    return x, res, steps, newton, tau


def copy_steady_to_cyclic(steady, cyclic) -> None:
    """Every time point of ``cyclic`` takes the values of the (one-point) ``steady`` model."""
    for name in ("conc", "settler_conc", "settler_tss", "settler_velocity"):
        src = getattr(steady, name, None)
        dst = getattr(cyclic, name, None)
        if src is None or dst is None:
            continue
        vals = {idx[1:]: v.value for idx, v in src.items()}
        for idx, v in dst.items():
            if not v.fixed:
                v.set_value(vals[idx[1:]], skip_validation=True)
    if not cyclic.waste_m3_d[1].fixed:
        w = steady.waste_m3_d[1].value
        for p in cyclic.PERIODS:
            cyclic.waste_m3_d[p].set_value(w)


def initialise_cyclic(m, steady=None, start: dict | None = None) -> InitReport:
    """Initialise a cyclic model from the steady state at the day's mean load.

    ``steady``: an already initialised or solved steady model at mean load; when
    None one is built from the cyclic model's layout with each zone's daily-mean
    airflow and initialised with :func:`initialise_steady` (from ``start``, a known
    steady state, when given).
    """
    from airtaper.model.train import build_steady_model

    t0 = time.perf_counter()
    report = None
    if steady is None:
        airflow = {z: [m.airflow_Sm3_h[z, p].value for p in m.PERIODS] for z in m.GRID_ZONES}
        steady = build_steady_model(m.train_data.plant, airflow=airflow)
        report = initialise_steady(steady, start=start)
    copy_steady_to_cyclic(steady, m)
    if report is None:
        return InitReport(True, 0, 0, float("nan"), time.perf_counter() - t0)
    report.seconds = time.perf_counter() - t0
    return report


# --- cyclic model: march through the day ---------------------------------------------------
_STATE_NAMES = ("conc", "settler_conc", "settler_tss", "settler_velocity")


def _step_constraints(m, points) -> list:
    cons = []
    for t in points:
        cons += [m.zone_balance[t, z, c] for z in m.ZONES for c in m.COMPONENTS]
        if hasattr(m, "settler_balance"):
            cons += [m.settler_balance[t, layer, c] for layer in m.LAYERS for c in m.COMPONENTS]
            cons += [m.settler_tss_definition[t, layer] for layer in m.LAYERS]
            cons += [m.settler_flux_definition[t, layer] for layer in m.INTERFACES]
    return cons


class _StepTemplate:
    """The equations of one time step (all its points), compiled once, reused for every step of a period.

    Variables are keyed by (component, index without the time point, relative
    point): 0..K-1 for the step's own points (the unknowns), -1, -2 for the points
    before the step (given).
    """

    def __init__(self, m, t0: int):
        points = m.step_points[t0]
        n = len(m.STEPS)
        self.system = compile_system(m, _step_constraints(m, points))
        self.keys = []
        for v in self.system.variables:
            comp = v.parent_component()
            idx = v.index()
            if comp.local_name not in _STATE_NAMES:
                raise ModelError(f"march: unexpected free variable {v.name} in the step equations")
            u = idx[0]
            rel = points.index(u) if u in points else -((t0 - u) % n)
            self.keys.append((comp.local_name, idx[1:], rel))
        self.current = np.array([k for k, key in enumerate(self.keys) if key[2] >= 0], dtype=int)
        self.lb = np.array([(-np.inf if v.lb is None else v.lb) for v in self.system.variables])[self.current]
        where = {key: k for k, key in enumerate(self.keys)}
        pairs = [(k, where[(name, rest, -1)]) for k, (name, rest, rel) in enumerate(self.keys)
                 if rel >= 0 and (name, rest, -1) in where]
        self.predict_to = np.array([a for a, _ in pairs], dtype=int)  # the step's points ...
        self.predict_from = np.array([b for _, b in pairs], dtype=int)  # ... start from the point before

    def variables(self, m, t0):
        points = m.step_points[t0]
        n = len(m.STEPS)
        at = lambda rel: points[rel] if rel >= 0 else (t0 + rel - 1) % n + 1  # noqa: E731
        return [getattr(m, name)[(at(rel),) + rest] for name, rest, rel in self.keys]


#: Newton iterations one step of :func:`march_cyclic` may take.
_MARCH_ITERATIONS = 50


def _march_step(tpl, x, tol, t):
    """Damped Newton on one step's equations (see :func:`march_cyclic`); returns (x, iterations)."""
    cur = tpl.current
    system = tpl.system
    with np.errstate(all="ignore"):
        f = system.residual(x)
        jac = system.jacobian(x, cur)
        scale = 1.0 / np.maximum((np.abs(jac) * np.maximum(np.abs(x[cur]), 1e-2)[None, :]).max(axis=1), 1e-8)
        norm = float(np.linalg.norm(f * scale))
        for it in range(1, _MARCH_ITERATIONS + 1):
            if not np.isfinite(norm):
                break
            if float(np.max(np.abs(f * scale))) < tol:
                return x, it - 1
            try:
                dx = _solve_linear(jac, -f)
            except np.linalg.LinAlgError:
                break
            alpha = 1.0
            while alpha > 1e-4:
                x_try = x.copy()
                x_try[cur] = np.maximum(x[cur] + alpha * dx, tpl.lb)
                f_try = system.residual(x_try)
                n_try = float(np.linalg.norm(f_try * scale))
                if np.isfinite(n_try) and n_try < (1.0 - 1e-4 * alpha) * norm:
                    break
                alpha *= 0.5
            else:
                break  # no descent along the Newton direction
            change = float(np.max(np.abs(x_try[cur] - x[cur]) / np.maximum(np.abs(x_try[cur]), 1e-2)))
            x, f, norm = x_try, f_try, n_try
            if change < tol and alpha == 1.0:
                return x, it
            jac = system.jacobian(x, cur)
    raise ModelError(f"march_cyclic: Newton did not converge at step {t} (scaled residual {norm:.3g})")


def march_cyclic(m, days: int = 1, tol: float = 1e-9) -> int:
    """March a cyclic model through the day(s), step by step, from its current values.

    Each step's equations (all its collocation points) are solved by Newton with
    the state before the step given (the waste flow held at its current value):
    a simulation with the model's own discretised equations. Started from the
    mean-load steady state (or a simulated day) it lands close to the periodic
    solution. Returns the number of Newton iterations.

    Newton is damped: a step is halved until the scaled residual's 2-norm falls
    (near the kinks of a layered clarifier's fluxes a full Newton step can
    overshoot onto the other branch and cycle). A step ends when the Newton
    change is below ``tol`` relative or every scaled residual below ``tol``; one
    that cannot descend, or does not end in :data:`_MARCH_ITERATIONS`, raises
    :class:`ModelError`, values left as they were before that step.
    """
    waste_free = [v for v in m.waste_m3_d.values() if not v.fixed]
    for v in waste_free:
        v.fix()
    templates = {}
    total = 0
    firsts = [t for t in m.STEPS if m.stage_of_point[t] == 0]
    try:
        for _ in range(days):
            for t in firsts:
                p = m.period_of_step[t]
                if p not in templates:
                    templates[p] = _StepTemplate(m, t)
                tpl = templates[p]
                var = tpl.variables(m, t)
                x = np.array([v.value for v in var], dtype=float)
                x[tpl.predict_to] = x[tpl.predict_from]  # start from the state before the step
                x, iterations = _march_step(tpl, x, tol, t)
                total += iterations
                for k in tpl.current:
                    var[k].set_value(float(x[k]), skip_validation=True)
    finally:
        for v in waste_free:
            v.unfix()
    return total
