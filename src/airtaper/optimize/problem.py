"""The diurnal aeration optimisation, attached to the cyclic train model.

:func:`attach_problem` takes a model from :func:`airtaper.model.train.build_cyclic_model`
and adds, in a block ``m.opt``, the decisions, limits and objective of the tapered
schedule (docs/optimization.md gives the full statement):

Decisions
    ``airflow_Sm3_h[z, p]`` of every diffused zone (the model's Var, unfixed) and
    ``header_gauge_kPa[p]``, the header gauge pressure. The diffuser count of every grid is
    the model's mutable Param ``diffuser_count[z]``; the model's kLa expressions follow
    it (airflow per diffuser and diffuser density, :meth:`airtaper.plant.DiffusedZone.kla_per_d`),
    and so do the per-diffuser airflow limits and the diffuser headloss. The value of one more
    diffuser is the sensitivity of the optimum to this parameter, from the duals
    (:func:`airtaper.optimize.marginal.parameter_sensitivity`). A count *variable* held
    by an equality (whose dual is the same number) gave the same values but doubled the
    derivative-building time on the three-tank layout (6.7 s against 3.5 s, one run).

Limits (each a named constraint group; :data:`LIMIT_GROUPS` lists them)
    DO minimum / maximum at every time point of aerated zones; effluent NH4-N flow-weighted
    daily mean and every period's mean; effluent TN daily mean; airflow per diffuser
    within the diffuser type's range; mixing minimum per floor area; valve/drop-leg
    capacity; total airflow within the blowers' turndown and capacity; valve loss
    ``header - p_zone >= min valve loss`` for every zone; blower discharge pressure
    within the highest blower's limit.

Objective
    ``energy (or cost) / reference + w sum_z,p ((Q_z,p - Q_z,p-1) / Q_z,max)^2``,
    the reference being the baseline's value (so the objective is about 1) and ``w``
    the smoothing weight (cyclic: period 1 follows the last period).

Every limit carries an elastic slack variable, fixed at 0 in a normal solve (a
fixed variable is a constant to the solver: no cost). :mod:`airtaper.optimize.elastic`
frees them and adds their penalty.

The block holds Pyomo components only. What the optimiser keeps beside it (the settings, the
blowers, whether they are staged, the effluent weights of the daily means, the swing zones'
on/off states once decided) is the :class:`Problem` that :func:`attach_problem` returns and the
optimiser passes along.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pyomo.environ as pyo

from airtaper.errors import ModelError
from airtaper.layout.types import Layout
from airtaper.plant import ResolvedPlant, resolve_plant
from airtaper.optimize.dispatch import envelope_lines, machines_of, max_lines
from airtaper.physics.blower import blower_power_kW

#: Numerical box on airflow, as a multiple of the zone's hardware maximum: wide enough
#: that the elastic solve can ask for more air than the hardware passes, and keeps
#: Ipopt away from absurd values. Common practice (no source).
AIRFLOW_BOX_FACTOR = 3.0


@dataclass(frozen=True)
class LimitGroup:
    """One family of limits: its constraint and slack components and how to describe it."""

    name: str  # constraint name in m.opt
    slack: str  # slack variable name in m.opt
    kind: str  # "process" or "equipment" (elastic penalty class)
    index: str  # "zone_step", "zone_period", "period", "scalar", "zone"
    unit: str  # slack unit: "mg/L", "fraction", "kPa"
    text: str  # short description for messages


#: Every limit of the problem (see docs/optimization.md, section "Limits").
LIMIT_GROUPS: tuple[LimitGroup, ...] = (
    LimitGroup("do_min", "do_min_slack", "process", "zone_step", "mg/L", "DO minimum"),
    LimitGroup("do_max", "do_max_slack", "process", "zone_step", "mg/L", "DO maximum"),
    LimitGroup("nh4_mean", "nh4_mean_slack", "process", "scalar", "mg/L", "effluent NH4-N daily mean limit"),
    LimitGroup("nh4_max", "nh4_max_slack", "process", "period", "mg/L", "effluent NH4-N period mean limit"),
    LimitGroup("tn_mean", "tn_mean_slack", "process", "scalar", "mg/L", "effluent TN daily mean limit"),
    LimitGroup("diffuser_max", "diffuser_max_slack", "equipment", "zone_period", "fraction",
               "maximum airflow per diffuser"),
    LimitGroup("diffuser_min", "diffuser_min_slack", "equipment", "zone_period", "fraction",
               "minimum airflow per diffuser"),
    LimitGroup("mixing_min", "mixing_min_slack", "equipment", "zone_period", "fraction", "mixing minimum airflow"),
    LimitGroup("valve_max", "valve_max_slack", "equipment", "zone_period", "fraction", "valve/drop-leg capacity"),
    LimitGroup("blower_max", "blower_max_slack", "equipment", "period", "fraction", "installed blower capacity"),
    LimitGroup("blower_min", "blower_min_slack", "equipment", "period", "fraction", "blower turndown"),
    LimitGroup("pressure_max", "pressure_max_slack", "equipment", "period", "kPa", "blower pressure limit"),
)


@dataclass
class ProblemSettings:
    """Choices of one optimisation (defaults from the plant's [operation] and zones)."""

    objective: str  # "energy" or "cost"
    smoothing_weight: float
    reference: float  # objective normaliser (baseline energy, kWh/d, or cost/d)
    mixing_airflow_min_Sm3_h_m2: dict = field(default_factory=dict)  # zone -> value (override)
    staging: bool = True  # False: the blowers as one machine at the aggregate efficiency, swing zones relaxed


def settings_for(plant: ResolvedPlant | Layout, reference: float, *, objective: str | None = None,
                 smoothing_weight: float | None = None, mixing_airflow_min_Sm3_h_m2: float | None = None,
                 staging: bool = True) -> ProblemSettings:
    """Settings from the plant's [operation], with optional overrides (a layout is resolved first)."""
    plant = resolve_plant(plant)
    obj = objective or plant.operation.objective
    if obj == "cost" and plant.tariff is None:
        raise ModelError("a cost objective needs a tariff in the layout")
    w = plant.operation.smoothing_weight if smoothing_weight is None else float(smoothing_weight)
    mix = {}
    for z in plant.zones:
        if z.aerated:
            mix[z.id] = z.mixing_airflow_min_Sm3_h_m2 if mixing_airflow_min_Sm3_h_m2 is None \
                else float(mixing_airflow_min_Sm3_h_m2)
    if not reference > 0:
        raise ModelError(f"objective reference must be positive, got {reference!r}")
    return ProblemSettings(obj, w, float(reference), mix, bool(staging))


@dataclass
class Problem:
    """One optimisation problem: the model, whose block ``m.opt`` holds its Pyomo components, and what
    the optimiser keeps beside it (module notes)."""

    m: Any  # the cyclic model (airtaper.model.train.build_cyclic_model) with the block m.opt
    settings: ProblemSettings
    machines: tuple  # the plant's blowers (airtaper.optimize.dispatch.machines_of)
    staged: bool  # blowers staged (power lines of the running machines): some in service and settings.staging
    effluent_weights: dict  # period -> effluent flow, m3/d: the weights of the daily means (effluent_weights)
    swing_states: dict | None = None  # swing zone -> (n_periods,) bool once decided; None: relaxed

    @property
    def block(self):
        """The Pyomo block ``m.opt``."""
        return self.m.opt

    @property
    def reference(self) -> float:
        """The objective's normaliser (the baseline's energy, kWh/d, or cost per day)."""
        return self.settings.reference

    @property
    def objective(self) -> str:
        """``"energy"`` or ``"cost"``."""
        return self.settings.objective


# --- helpers read by rules ----------------------------------------------------------------


def steps_of_period(m, p) -> list[int]:
    """Time points of period ``p`` (collocation points or step ends, see the model's notes)."""
    return [t for t in m.STEPS if m.period_of_step[t] == p]


def point_weights(m) -> dict:
    """Quadrature weight of every time point as a fraction of the day (sum 1)."""
    return {t: float(m.point_weight[t]) for t in m.STEPS}


def effluent_weights(m) -> dict:
    """Effluent flow of every period at the current waste flow, m3/d: the weights of the daily means.

    Held constant in the optimisation: with a target SRT the waste flow is a variable,
    and weighting by it would couple every effluent state with every waste flow (a
    dense Hessian block); the waste flow is a percent or two of the effluent flow,
    so fixing it in the weights changes a daily mean by far less than 0.1 %.
    """
    return {p: float(pyo.value(m.effluent_m3_d[p])) for p in m.PERIODS}


def flow_weighted_mean(m, expr, weights: dict):
    """Flow-weighted daily mean of a per-point effluent expression: quadrature weight x effluent flow."""
    w = point_weights(m)
    ww = {t: w[t] * weights[m.period_of_step[t]] for t in m.STEPS}
    total = sum(ww.values())
    return sum(ww[t] / total * expr[t] for t in m.STEPS)


def period_mean(m, expr, p):
    """Time mean of a per-point expression over period ``p`` (quadrature weights)."""
    w = point_weights(m)
    pts = steps_of_period(m, p)
    total = sum(w[t] for t in pts)
    return sum(w[t] / total * expr[t] for t in pts)


# --- the attachment -----------------------------------------------------------------------
def attach_problem(m, settings: ProblemSettings) -> Problem:
    """Add decisions, limits and objective to a cyclic model in its block ``m.opt`` (see module notes);
    returns the :class:`Problem`.

    Everything about the plant is read from the model's resolved plant (``m.train_data.plant``).
    """
    if m.steady:
        raise ModelError("the diurnal optimisation needs the cyclic model (build_cyclic_model)")
    if hasattr(m, "opt"):
        raise ModelError("the model already has an optimisation block")
    plant = m.train_data.plant
    air = plant.air
    grid = [z for z in m.GRID_ZONES]
    if not grid:
        raise ModelError("the layout has no diffused zones: there is no airflow to optimise")
    m.opt = b = pyo.Block()
    b.ZONES = pyo.Set(initialize=grid, ordered=True)
    do_zones = [z for z in grid if plant.zone(z).do_min_mg_L is not None]
    do_max_zones = [z for z in grid if plant.zone(z).do_max_mg_L is not None]
    b.DO_ZONES = pyo.Set(initialize=do_zones, ordered=True)
    b.DO_MAX_ZONES = pyo.Set(initialize=do_max_zones, ordered=True)
    b.MIN_ZONES = pyo.Set(initialize=grid, ordered=True)
    b.SWING_ZONES = pyo.Set(initialize=[z for z in grid if plant.zone(z).kind == "swing"], ordered=True)
    b.VALVE_ZONES = pyo.Set(initialize=[z for z in grid if plant.zone(z).valve_capacity_Sm3_h is not None],
                            ordered=True)
    P = list(m.PERIODS)

    # --- swing zones: on/off per period as fixed 0/1 variables (a relaxed solve has them 0 and the
    # airflow free from 0; :mod:`airtaper.optimize.staging` fixes the states and re-solves) ------
    b.swing_on = pyo.Var(b.SWING_ZONES, m.PERIODS, bounds=(0.0, 1.0), initialize=0.0)
    b.swing_do_on = pyo.Var(m.STEPS, b.SWING_ZONES, bounds=(0.0, 1.0), initialize=0.0)  # DO minimum held
    for v in list(b.swing_on.values()) + list(b.swing_do_on.values()):
        v.fix()

    b.swing_air = pyo.Var(b.SWING_ZONES, m.PERIODS, bounds=(0.0, 1.0), initialize=1.0)  # 0: off, valve shut
    for v in b.swing_air.values():
        v.fix()

    def on(z, p):
        return b.swing_on[z, p] if z in b.SWING_ZONES else 1.0

    def air_on(z, p):
        return b.swing_air[z, p] if z in b.SWING_ZONES else 1.0

    # --- decisions ------------------------------------------------------------------------
    for z in grid:  # every airflow has a value: the model fixes each one when it is built
        hi = air.zone(z).airflow_max_Sm3_h
        for p in P:
            v = m.airflow_Sm3_h[z, p]
            v.unfix()
            v.setlb(0.0)
            v.setub(AIRFLOW_BOX_FACTOR * hi)

    b.total_airflow_Sm3_h = pyo.Expression(m.PERIODS, rule=lambda b, p: sum(m.airflow_Sm3_h[z, p] for z in grid))
    b.zone_pressure_gauge_kPa = pyo.Expression(
        b.ZONES, m.PERIODS,
        rule=lambda b, z, p: air.zone_required_pressure_gauge_kPa(z, m.airflow_Sm3_h[z, p], m.diffuser_count[z]))
    b.header_gauge_kPa = pyo.Var(m.PERIODS, bounds=(0.0, None), initialize=lambda b, p: max(
        pyo.value(b.zone_pressure_gauge_kPa[z, p]) for z in grid) + air.header.min_valve_loss_kPa)
    b.valve_loss = pyo.Constraint(  # a swing zone switched off has its valve shut (swing_air 0)
        b.ZONES, m.PERIODS,
        rule=lambda b, z, p: b.header_gauge_kPa[p] - air_on(z, p) * b.zone_pressure_gauge_kPa[z, p]
        >= air_on(z, p) * air.header.min_valve_loss_kPa)
    # --- blower power --------------------------------------------------------------------
    # Staged: the power of the period's running machines is the largest of the lines of their
    # least-power curve (convex, see airtaper.optimize.dispatch), in equivalent airflow
    # a + b Q, times the isentropic kW per Sm3/h at the period's discharge pressure. The line
    # coefficients and the set's airflow range and pressure limit are fixed variables (values
    # change between staging rounds, the derivative structure does not); the first solve uses
    # the convex envelope over every set of machines (and no air).
    machines = machines_of(plant)
    in_service = any(not mm.out_of_service for mm in machines)
    staged = in_service and settings.staging
    b.LINES = pyo.RangeSet(max_lines(machines) if staged else 1)
    b.line_a = pyo.Var(m.PERIODS, b.LINES, initialize=0.0)
    b.line_b = pyo.Var(m.PERIODS, b.LINES, initialize=0.0)
    avail = [mm for mm in machines if not mm.out_of_service]
    b.staging_min_Sm3_h = pyo.Var(m.PERIODS, initialize=min((mm.airflow_min_Sm3_h for mm in avail), default=0.0))
    b.staging_max_Sm3_h = pyo.Var(m.PERIODS, initialize=sum(mm.airflow_max_Sm3_h for mm in avail))
    b.staging_pressure_max_kPa = pyo.Var(
        m.PERIODS, initialize=max((mm.pressure_max_gauge_kPa for mm in avail), default=0.0))
    for comp in (b.line_a, b.line_b, b.staging_min_Sm3_h, b.staging_max_Sm3_h, b.staging_pressure_max_kPa):
        for v in comp.values():
            v.fix()
    if staged:
        set_power_lines(b, {p: envelope_lines(machines) for p in P})
        b.power_kW = pyo.Var(m.PERIODS, bounds=(0.0, None))
        b.power_line_kW = pyo.Expression(m.PERIODS, b.LINES, rule=lambda b, p, k: blower_power_kW(
            b.line_a[p, k] + b.line_b[p, k] * b.total_airflow_Sm3_h[p], float(air.inlet_temperature_C[p - 1]),
            air.inlet_pressure_kPa, air.discharge_pressure_kPa(b.header_gauge_kPa[p], b.total_airflow_Sm3_h[p]),
            1.0))
        b.power_curve = pyo.Constraint(m.PERIODS, b.LINES, rule=lambda b, p, k: b.power_kW[p] >= b.power_line_kW[p, k])
        for p in P:
            b.power_kW[p].set_value(max_power_line_kW(b, p))
    else:
        b.power_kW = pyo.Expression(
            m.PERIODS, rule=lambda b, p: air.power_kW(b.total_airflow_Sm3_h[p], b.header_gauge_kPa[p], p - 1))
    b.energy_kWh_per_day = pyo.Expression(expr=sum(b.power_kW[p] for p in P) * air.period_h)

    # --- limits, each with a slack fixed at zero ---------------------------------------
    def slack(name, *index_sets):
        var = pyo.Var(*index_sets, bounds=(0.0, None), initialize=0.0) if index_sets else \
            pyo.Var(bounds=(0.0, None), initialize=0.0)
        b.add_component(name, var)
        for v in var.values():
            v.fix(0.0)
        return var

    so = lambda t, z: m.conc[t, z, "SO"]  # noqa: E731
    b.do_min_mg_L = pyo.Param(b.DO_ZONES, mutable=True,
                              initialize={z: float(plant.zone(z).do_min_mg_L) for z in do_zones})
    # back-offs inside the DO range per zone and time point (0 unless the re-simulation asks for
    # them: airtaper.optimize.backoff holds the range between the time points)
    b.do_backoff_mg_L = pyo.Param(b.DO_ZONES, m.STEPS, mutable=True, initialize=0.0)
    s = slack("do_min_slack", m.STEPS, b.DO_ZONES)
    b.do_min = pyo.Constraint(m.STEPS, b.DO_ZONES, rule=lambda b, t, z: (
        so(t, z) + s[t, z] >= (b.do_min_mg_L[z] + b.do_backoff_mg_L[z, t])
        * (b.swing_do_on[t, z] if z in b.SWING_ZONES else 1.0)))
    b.do_max_mg_L = pyo.Param(b.DO_MAX_ZONES, mutable=True,
                              initialize={z: float(plant.zone(z).do_max_mg_L) for z in do_max_zones})
    b.do_max_backoff_mg_L = pyo.Param(b.DO_MAX_ZONES, m.STEPS, mutable=True, initialize=0.0)
    s2 = slack("do_max_slack", m.STEPS, b.DO_MAX_ZONES)
    b.do_max = pyo.Constraint(m.STEPS, b.DO_MAX_ZONES, rule=lambda b, t, z: (
        so(t, z) - s2[t, z] <= b.do_max_mg_L[z] - b.do_max_backoff_mg_L[z, t]))

    lim = plant.limits
    weights = effluent_weights(m)
    b.nh4_mean_expr = pyo.Expression(expr=flow_weighted_mean(m, m.effluent_nh4_mg_L, weights))
    b.nh4_period_expr = pyo.Expression(m.PERIODS, rule=lambda b, p: period_mean(m, m.effluent_nh4_mg_L, p))
    b.tn_mean_expr = pyo.Expression(expr=flow_weighted_mean(m, m.effluent_tn_mg_L, weights))
    b.nh4_mean_limit = pyo.Param(mutable=True, initialize=lim.nh4_mean_mg_L if lim.nh4_mean_mg_L else 0.0)
    b.nh4_max_limit = pyo.Param(mutable=True, initialize=lim.nh4_max_mg_L if lim.nh4_max_mg_L else 0.0)
    b.tn_mean_limit = pyo.Param(mutable=True, initialize=lim.tn_mean_mg_L if lim.tn_mean_mg_L else 0.0)
    s3 = slack("nh4_mean_slack")
    s4 = slack("nh4_max_slack", m.PERIODS)
    s5 = slack("tn_mean_slack")
    b.nh4_mean = pyo.Constraint(expr=b.nh4_mean_expr - s3 <= b.nh4_mean_limit)
    b.nh4_max = pyo.Constraint(m.PERIODS, rule=lambda b, p: b.nh4_period_expr[p] - s4[p] <= b.nh4_max_limit)
    b.tn_mean = pyo.Constraint(expr=b.tn_mean_expr - s5 <= b.tn_mean_limit)
    if lim.nh4_mean_mg_L is None:
        b.nh4_mean.deactivate()
    if lim.nh4_max_mg_L is None:
        b.nh4_max.deactivate()
    if lim.tn_mean_mg_L is None:
        b.tn_mean.deactivate()

    q = m.airflow_Sm3_h
    s6 = slack("diffuser_max_slack", b.ZONES, m.PERIODS)
    b.diffuser_max = pyo.Constraint(b.ZONES, m.PERIODS, rule=lambda b, z, p: (
        q[z, p] <= m.diffuser_count[z] * air.zone(z).diffuser_airflow_max_Sm3_h * (1.0 + s6[z, p])))
    s7 = slack("diffuser_min_slack", b.MIN_ZONES, m.PERIODS)
    b.diffuser_min = pyo.Constraint(b.MIN_ZONES, m.PERIODS, rule=lambda b, z, p: (
        q[z, p] >= on(z, p) * m.diffuser_count[z] * air.zone(z).diffuser_airflow_min_Sm3_h * (1.0 - s7[z, p])))
    s8 = slack("mixing_min_slack", b.MIN_ZONES, m.PERIODS)
    b.mixing_min = pyo.Constraint(b.MIN_ZONES, m.PERIODS, rule=lambda b, z, p: (
        q[z, p] >= on(z, p) * settings.mixing_airflow_min_Sm3_h_m2[z] * plant.zone(z).area_m2 * (1.0 - s8[z, p])))
    s9 = slack("valve_max_slack", b.VALVE_ZONES, m.PERIODS)
    b.valve_max = pyo.Constraint(b.VALVE_ZONES, m.PERIODS, rule=lambda b, z, p: (
        q[z, p] <= plant.zone(z).valve_capacity_Sm3_h * (1.0 + s9[z, p])))
    s10 = slack("blower_max_slack", m.PERIODS)
    s11 = slack("blower_min_slack", m.PERIODS)
    s12 = slack("pressure_max_slack", m.PERIODS)
    if in_service:
        b.blower_max = pyo.Constraint(m.PERIODS, rule=lambda b, p: (
            b.total_airflow_Sm3_h[p] <= b.staging_max_Sm3_h[p] * (1.0 + s10[p])))
        b.blower_min = pyo.Constraint(m.PERIODS, rule=lambda b, p: (
            b.total_airflow_Sm3_h[p] >= b.staging_min_Sm3_h[p] * (1.0 - s11[p])))
        b.pressure_max = pyo.Constraint(m.PERIODS, rule=lambda b, p: (
            air.discharge_gauge_kPa(b.header_gauge_kPa[p], b.total_airflow_Sm3_h[p]) - s12[p]
            <= b.staging_pressure_max_kPa[p]))

    # --- objective --------------------------------------------------------------------------
    if settings.objective == "cost":
        b.peak_kW = pyo.Var(bounds=(0.0, None), initialize=max(pyo.value(b.power_kW[p]) for p in P))
        b.peak = pyo.Constraint(m.PERIODS, rule=lambda b, p: b.peak_kW >= b.power_kW[p])
        if air.demand_rate_per_kW_day == 0.0:
            b.peak.deactivate()
            b.peak_kW.fix(0.0)
        b.goal = pyo.Expression(expr=air.day_cost([b.power_kW[p] for p in P], air.period_h, peak_kW=b.peak_kW))
    else:
        b.goal = pyo.Expression(expr=b.energy_kWh_per_day)
    qmax = {z: air.zone(z).airflow_max_Sm3_h for z in grid}
    prev = {p: (p - 1 if p > 1 else P[-1]) for p in P}
    b.smoothing_weight = pyo.Param(mutable=True, initialize=settings.smoothing_weight)
    b.smoothing = pyo.Expression(expr=sum(((q[z, p] - q[z, prev[p]]) / qmax[z]) ** 2 for z in grid for p in P)
                                 if len(P) > 1 else 0.0)
    b.objective = pyo.Objective(expr=b.goal / settings.reference + b.smoothing_weight * b.smoothing,
                                sense=pyo.minimize)
    return Problem(m, settings, tuple(machines), staged, weights)


def set_swing_states(prob: Problem, states: dict | None) -> None:
    """Fix the on/off state of every swing zone per period (None: relaxed, airflow free from 0).

    Off: airflow fixed at 0 (no air: the zone's kinetics are anoxic by the ASM1 switching
    functions). On: the diffuser and mixing minima hold, and the DO minimum holds from the
    second integration step of a spell (the first step after switching on is the DO's
    rise from about 0; its length is a fraction of the period).
    """
    m = prob.m
    b = m.opt
    prob.swing_states = None if states is None else {z: np.asarray(states[z], dtype=bool) for z in b.SWING_ZONES}
    n = len(m.PERIODS)
    for z in b.SWING_ZONES:
        on = np.zeros(n, dtype=bool) if states is None else prob.swing_states[z]
        for p in m.PERIODS:
            b.swing_on[z, p].fix(float(on[p - 1]))
            b.swing_air[z, p].fix(float(states is None or on[p - 1]))
            v = m.airflow_Sm3_h[z, p]
            if states is not None and not on[p - 1]:
                v.fix(0.0)
            elif v.fixed:
                v.unfix()
        for t in m.STEPS:
            p = m.period_of_step[t]
            hold = on[p - 1] and (on[p - 2] or t not in m.step_points.get(_first_step(m, p), ()))
            b.swing_do_on[t, z].fix(float(hold))


def _first_step(m, p):
    """The first point of period ``p``'s first step (key of ``m.step_points``)."""
    return min(steps_of_period(m, p))


def set_power_lines(b, lines_by_period: dict) -> None:
    """Set the power-curve lines of every period (unused rows get the zero line, ``power >= 0``)."""
    for p, lines in lines_by_period.items():
        if len(lines) > len(b.LINES):
            raise ModelError(f"period {p}: {len(lines)} power-curve lines, room for {len(b.LINES)}")
        for k in b.LINES:
            a, c = lines[k - 1] if k <= len(lines) else (0.0, 0.0)
            b.line_a[p, k].fix(float(a))
            b.line_b[p, k].fix(float(c))


def relax_staging(prob: Problem) -> None:
    """The blower side as before any dispatch: the convex envelope of the least power of every set of machines
    in service (and of no air), the whole set's airflow range and its highest pressure limit (the relaxed
    solve's; :mod:`airtaper.optimize.staging` fixes a dispatch over it)."""
    b = prob.block
    avail = [mm for mm in prob.machines if not mm.out_of_service]
    periods = list(prob.m.PERIODS)
    for p in periods:
        b.staging_min_Sm3_h[p].fix(min((mm.airflow_min_Sm3_h for mm in avail), default=0.0))
        b.staging_max_Sm3_h[p].fix(sum(mm.airflow_max_Sm3_h for mm in avail))
        b.staging_pressure_max_kPa[p].fix(max((mm.pressure_max_gauge_kPa for mm in avail), default=0.0))
    set_power_lines(b, {p: envelope_lines(prob.machines) for p in periods})
    for p in periods:
        b.power_kW[p].set_value(max_power_line_kW(b, p))
    if b.component("peak_kW") is not None and not b.peak_kW.fixed:
        b.peak_kW.set_value(max(b.power_kW[p].value for p in periods))


def max_power_line_kW(b, p) -> float:
    """The largest power line of period ``p`` at the current airflow and header pressure, kW."""
    return max(0.0, max(float(pyo.value(b.power_line_kW[p, k])) for k in b.LINES))


def active_limit_groups(b):
    """(group, slack variable) of every limit group whose constraint is present and active in ``b``."""
    for g in LIMIT_GROUPS:
        con = b.component(g.name)
        if con is not None and con.active:
            yield g, b.component(g.slack)


def free_slacks(b) -> None:
    """Unfix every slack of an active limit (elastic mode)."""
    for _, slack in active_limit_groups(b):
        for v in slack.values():
            v.unfix()


def fix_slacks(b) -> None:
    """Fix every slack at zero (normal mode)."""
    for g in LIMIT_GROUPS:
        for v in b.component(g.slack).values():
            v.fix(0.0)


__all__ = ["LIMIT_GROUPS", "LimitGroup", "Problem", "ProblemSettings", "active_limit_groups", "attach_problem", "fix_slacks", "free_slacks",
           "effluent_weights", "flow_weighted_mean", "period_mean", "point_weights", "relax_staging", "settings_for", "steps_of_period"]
