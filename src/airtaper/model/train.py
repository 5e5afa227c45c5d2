"""Pyomo model of an activated-sludge train: ASM1 in completely mixed zones, field aeration, clarifier.

Build functions
---------------
* :func:`build_steady_model` -- one steady point (at the daily mean load, or at one
  period's load);
* :func:`build_cyclic_model` -- the 24 h periodic day (Radau IIA collocation by default);
* :func:`build_train_model` -- either, from resolved :class:`~airtaper.model.data.TrainData`
  (``steady=True`` turns the time set into a single steady point).

Each ``attach_*`` function adds one group of components and can be reused on its
own; Pyomo rules are module-level functions named after the balance they write.

Time and units
--------------
Inside the balances time is in **days** (ASM1 rates are per day), flows in m3/d,
concentrations in g/m3 (SALK in mol/m3), kLa per day. Airflow is in Sm3/h and the
reported oxygen transfer in kg O2/h. The cyclic day has ``n_periods *
steps_per_period`` steps of length ``h = period_h / steps_per_period`` (d inside
the balances); the time points ``t = 1..N`` are the collocation points of the
steps (Radau IIA: 2 or 3 per step, the last at the step end) or the step ends
(backward Euler, BDF2), see :func:`~airtaper.model.discretisation.time_balance`. Influent, temperature, flows and
airflow hold over each period. Points wrap around the day (the step before the
first is the last), which is the periodic condition ``x(0) = x(24 h)`` with no
extra variables or equations. In a steady model there is one point and the time
derivatives are 0. docs/model.md gives the equations and the measured accuracy.

Zone balances (zone z, component i, volume V, throughflow Q_z)::

    dC_z,i/dt = (sum_in Q_k C_k,i - Q_z C_z,i) / V + sum_j nu_j,i rho_j(C_z) + [i = SO] kLa_z (C*_z - SO_z)

inflows k: forward flow of the zone upstream, the zone's share of the influent,
internal recycles ending in z, the return sludge (clarifier underflow) if it
ends in z. Aeration: zones with a diffuser grid get
``kLa_z = 24 kLa_field(airflow)`` and ``C*_z`` from :mod:`airtaper.physics.transfer`
(airflow -> clean-water SOTE -> SOTR -> alpha F theta^(T-20) -> field kLa, and
tau beta Omega C*inf20); zones with a fixed kLa use the given kLa and
saturation; anoxic zones get no oxygen. Swing zones have a grid and take
either role with their airflow (zero airflow: no oxygen).

Wasting: fixed waste flow per period, or a target SRT (one waste flow for the
whole day, set so that the mean solids inventory of the zones over the mean
solids leaving with waste and effluent equals the target).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
import pyomo.environ as pyo

from airtaper import units
from airtaper.errors import ModelError
from airtaper.layout.types import ASM1_COMPONENTS, Layout
from airtaper.model.asm1_rates import asm1_process_rates
from airtaper.model.clarifier import attach_ideal_separator, attach_layered_settler
from airtaper.model.data import FixedAeration, GridAeration, TrainData, mean_load, single_period, train_data
from airtaper.model.discretisation import StepSlice, switched_balance, time_balance
from airtaper.process.stoichiometry import PARTICULATES, PROCESSES, SOLIDS_COD, n_composition
from airtaper.plant import ResolvedPlant



@dataclass(frozen=True)
class _Aux:
    """Plain-Python lookups the rules read (no numpy scalars reach Pyomo expressions)."""

    zone_index: dict
    volume: list  # [zone]
    influent_load: list  # [period][zone][component] g/d entering with the influent
    through: list  # [period][zone] m3/d
    forward: list  # [period][zone] m3/d
    recycles_into: list  # [zone] -> list of (source zone id, [period] flow)
    ras_zone: str
    ras: list  # [period]
    nu: list  # [period][component] -> list of (process name, coefficient)


def _aux(data: TrainData) -> _Aux:
    zones = data.zones
    P = data.n_periods
    load = data.influent_m3_d[:, None, None] * data.feed_fraction[None, :, None] * data.influent_conc[:, None, :]
    nu = []
    for p in range(P):
        per = {}
        for k, c in enumerate(ASM1_COMPONENTS):
            per[c] = [(PROCESSES[j], float(data.nu[p, j, k])) for j in range(len(PROCESSES)) if data.nu[p, j, k] != 0]
        nu.append(per)
    rec_into = [[] for _ in zones]
    for src, dst, q in data.recycles:
        rec_into[dst].append((zones[src], [float(v) for v in q]))
    return _Aux(
        zone_index={z: i for i, z in enumerate(zones)},
        volume=[float(v) for v in data.volume_m3],
        influent_load=[[{c: float(load[p, i, k]) for k, c in enumerate(ASM1_COMPONENTS)} for i in range(len(zones))]
                       for p in range(P)],
        through=data.zone_flow_m3_d.tolist(),
        forward=data.forward_m3_d.tolist(),
        recycles_into=rec_into,
        ras_zone=zones[data.ras_zone],
        ras=[float(v) for v in data.ras_m3_d],
        nu=nu,
    )


# --- sets and time --------------------------------------------------------------------
#: Time schemes of the cyclic model: Radau IIA collocation with 2 or 3 points per step
#: (orders 3 and 5), backward Euler, BDF2. All implicit and L-stable.
SCHEMES = ("radau2", "radau3", "euler", "bdf2")


def radau_collocation(n_points: int) -> tuple[np.ndarray, np.ndarray]:
    """Radau IIA nodes ``c`` (in (0, 1], the last is 1) and the collocation matrix ``A``.

    Notes
    -----
    The nodes are the roots of ``d^(K-1)/dx^(K-1) [x^(K-1) (x - 1)^K]``;
    ``A[k, j] = integral_0^c_k l_j(s) ds`` with ``l_j`` the Lagrange polynomials on
    the nodes. The last row of ``A`` holds the quadrature weights.

    References
    ----------
    Hairer, E., Wanner, G. (1996). Solving Ordinary Differential Equations II, 2nd ed.,
    section IV.5 (Radau IIA methods).
    """
    k = int(n_points)
    poly = np.polynomial.Polynomial([0.0, 1.0]) ** (k - 1) * np.polynomial.Polynomial([-1.0, 1.0]) ** k
    c = np.sort(poly.deriv(k - 1).roots().real)
    c[-1] = 1.0
    a = np.zeros((k, k))
    for j in range(k):
        others = [c[i] for i in range(k) if i != j]
        lj = np.polynomial.Polynomial.fromroots(others) / np.prod([c[j] - o for o in others])
        integral = lj.integ()
        a[:, j] = integral(c) - integral(0.0)
    return c, a


def attach_sets(m, data: TrainData, steady: bool, scheme: str = "radau2") -> None:
    """Sets, the time grid and the maps between time points, steps and periods.

    Time points ``t in STEPS`` are the collocation points (Radau) or the step ends
    (Euler, BDF2); ``point_hour[t]`` is the time of the point (0 < h <= 24),
    ``point_weight[t]`` its quadrature weight as a fraction of the day (sum 1),
    ``period_of_step[t]`` its period, ``step_points[t]`` the points of its step and
    ``step_start[t]`` the point that starts its step (the last point of the step before).
    """
    if scheme not in SCHEMES:
        raise ModelError(f"unknown time scheme {scheme!r}; expected one of {', '.join(SCHEMES)}")
    m.steady = bool(steady)
    m.scheme = "steady" if steady else scheme
    P = data.n_periods
    if steady and P != 1:
        raise ModelError("a steady model needs one period (use mean_load or single_period)")
    spp = 1 if steady else data.steps_per_period
    n_steps = 1 if steady else P * spp
    k = int(scheme[-1]) if (scheme.startswith("radau") and not steady) else 1
    n_points = n_steps * k
    m.COMPONENTS = pyo.Set(initialize=ASM1_COMPONENTS, ordered=True)
    m.PARTICULATES = pyo.Set(initialize=PARTICULATES, ordered=True)
    m.PROCESSES = pyo.Set(initialize=PROCESSES, ordered=True)
    m.ZONES = pyo.Set(initialize=data.zones, ordered=True)
    m.PERIODS = pyo.RangeSet(P)
    m.STEPS = pyo.RangeSet(n_points)
    m.points_per_step = k
    step_h = data.period_h / spp
    m.dt_d = step_h / units.HOURS_PER_DAY if not steady else 1.0  # step length, d
    m.step_hours = 0.0 if steady else step_h
    if k > 1:
        nodes, a = radau_collocation(k)
    else:
        nodes, a = np.array([1.0]), np.array([[1.0]])
    m.collocation_matrix = a.tolist()
    # length of the sub-step that ends at each stage (from the step's start or the stage before), d:
    # the positive-preserving balance of switched zones (see switched_balance)
    m.substep_d = [float(c - (nodes[i - 1] if i > 0 else 0.0)) * m.dt_d for i, c in enumerate(nodes)]
    step_of = {t: (t - 1) // k + 1 for t in range(1, n_points + 1)}
    m.stage_of_point = {t: (t - 1) % k for t in range(1, n_points + 1)}
    m.period_of_step = {t: (step_of[t] - 1) // spp + 1 for t in range(1, n_points + 1)}
    m.step_points = {t: [(step_of[t] - 1) * k + j + 1 for j in range(k)] for t in range(1, n_points + 1)}
    m.step_start = {t: ((step_of[t] - 1) * k if step_of[t] > 1 else n_points) for t in range(1, n_points + 1)}
    m.prev_step = {t: (t - 1 if t > 1 else n_points) for t in range(1, n_points + 1)}
    m.point_hour = {t: (0.0 if steady else (step_of[t] - 1 + nodes[m.stage_of_point[t]]) * step_h)
                    for t in range(1, n_points + 1)}
    weights = a[-1] / n_steps
    m.point_weight = {t: float(weights[m.stage_of_point[t]]) for t in range(1, n_points + 1)}
    m.tss_per_cod = float(data.clarifier.tss_per_cod)


# --- aeration -------------------------------------------------------------------------
def _grid_kla_rule(m, z, p):
    """The plant's kLa rule (:meth:`airtaper.plant.DiffusedZone.kla_per_d`) on the airflow Var."""
    return m.aeration[z].kla_per_d(m.airflow_Sm3_h[z, p], m.temperature_C[p], m.diffuser_count[z])


def _kla_rule(m, z, p):
    """Field kLa of an aerated zone, 1/d: from the airflow, or the given fixed kLa."""
    if z in m.GRID_ZONES:
        return _grid_kla_rule(m, z, p)
    return m.kla_fixed_per_d[z, p]


def _do_sat_init(m, z, p):
    a = m.aeration[z]
    if isinstance(a, GridAeration):
        return float(a.do_sat_mg_L[p - 1])
    return float(a.do_sat_mg_L)


def attach_aeration(m, data: TrainData, airflow=None, diffuser_count=None) -> None:
    """Airflow (grid zones) and fixed-kLa handles, the field kLa and saturation per zone and period.

    ``airflow_Sm3_h[zone, period]`` is a Var, fixed to the schedule for simulation
    (``airflow``: mapping zone -> number or per-period sequence; default the middle
    of the zone's allowed range). ``kla_fixed_per_d[zone, period]`` is a Var fixed
    to the layout's kLa (freed when a DO setpoint is imposed on such a zone).
    ``diffuser_count``: an indexed Var (grid zone -> count) held outside ``m`` that the
    kLa and the grid limits follow instead of the layout's counts (a design study shares
    one such Var between the models of its load days).
    """
    m.aeration = {z: a for z, a in zip(data.zones, data.aeration) if a is not None}
    m.zone_volume_m3 = pyo.Param(m.ZONES, initialize={z: float(v) for z, v in zip(data.zones, data.volume_m3)},
                                 doc="zone volume, m3")
    m.temperature_C = pyo.Param(m.PERIODS, initialize={p + 1: float(t) for p, t in enumerate(data.temperature_C)},
                                doc="water temperature, C")
    grid = [z for z, a in m.aeration.items() if isinstance(a, GridAeration)]
    fixed = [z for z, a in m.aeration.items() if isinstance(a, FixedAeration)]
    m.GRID_ZONES = pyo.Set(initialize=grid, ordered=True)
    m.FIXED_KLA_ZONES = pyo.Set(initialize=fixed, ordered=True)
    m.AERATED_ZONES = pyo.Set(initialize=[z for z in data.zones if z in m.aeration], ordered=True)

    def bounds(m, z, p):
        hi = m.aeration[z].airflow_max_Sm3_h
        return (0.0, hi if hi > 0 else None)

    m.airflow_Sm3_h = pyo.Var(m.GRID_ZONES, m.PERIODS, bounds=bounds, doc="zone airflow, Sm3/h")
    m.kla_fixed_per_d = pyo.Var(m.FIXED_KLA_ZONES, m.PERIODS, bounds=(0.0, None), doc="given kLa, 1/d")
    for z in fixed:
        for p in m.PERIODS:
            m.kla_fixed_per_d[z, p].fix(m.aeration[z].kla_per_d)
    for z in grid:
        lo, hi = m.aeration[z].airflow_range_Sm3_h
        given = None if airflow is None else airflow.get(z)
        for p in m.PERIODS:
            if given is None:
                v = 0.5 * (lo + hi)
            elif np.ndim(given) == 0:
                v = float(given)
            else:
                v = float(given[p - 1])
            m.airflow_Sm3_h[z, p].fix(v)
    # the diffuser count of each grid: the layout's, a parameter a design study may change
    if diffuser_count is None:
        m.diffuser_count = pyo.Param(m.GRID_ZONES, mutable=True,
                                     initialize={z: float(m.aeration[z].diffusers) for z in grid})
    else:
        m.diffuser_count = pyo.Reference(diffuser_count)
    m.kla_per_d = pyo.Expression(m.AERATED_ZONES, m.PERIODS, rule=_kla_rule)
    m.do_sat_mg_L = pyo.Param(m.AERATED_ZONES, m.PERIODS, initialize=_do_sat_init, mutable=False)


# --- zones ----------------------------------------------------------------------------
def _process_rates(m, data: TrainData) -> dict:
    out = {}
    for t in m.STEPS:
        p = m.period_of_step[t]
        for z in m.ZONES:
            c = {k: m.conc[t, z, k] for k in ASM1_COMPONENTS}
            for name, rho in zip(PROCESSES, asm1_process_rates(c, data.params[p - 1])):
                out[t, z, name] = rho
    return out


def zone_rhs(m, a: _Aux, ts, p, z, c, rates):
    """Right-hand side of a zone balance, g/m3/d: state of step ``ts``, inputs of period ``p``.

    ``a``: the train's flows and loads (:func:`_aux`); ``rates``: process name -> rate
    expression at that state (parameters of period ``p``).
    """
    i = a.zone_index[z]
    pi = p - 1
    flow_in = a.influent_load[pi][i][c]
    if i > 0:
        flow_in = flow_in + a.forward[pi][i - 1] * m.conc[ts, m.ZONES.at(i), c]
    for src, q in a.recycles_into[i]:
        flow_in = flow_in + q[pi] * m.conc[ts, src, c]
    if z == a.ras_zone:
        flow_in = flow_in + a.ras[pi] * m.underflow_at(ts, p, c)
    rhs = (flow_in - a.through[pi][i] * m.conc[ts, z, c]) / a.volume[i]
    for j, coef in a.nu[pi][c]:
        rhs = rhs + coef * rates[j]
    if c == "SO" and z in m.aeration:
        rhs = rhs + m.kla_per_d[z, p] * (m.do_sat_mg_L[z, p] - m.conc[ts, z, "SO"])
    return rhs


def _zone_rhs_rule(a: _Aux):
    """dC/dt of a zone at step t (inflows - outflow + reactions + aeration), g/m3/d."""
    return lambda m, t, z, c: zone_rhs(m, a, t, m.period_of_step[t], z, c, {j: m.rate[t, z, j] for j in PROCESSES})


def _zone_mass_balance_rule(switched_zones: frozenset):
    """Completely mixed zone: inflows - outflow + reactions (+ aeration for SO) = accumulation.

    ``switched_zones``: zones whose air may switch off (:func:`switched_balance` under Radau).
    """
    def rule(m, t, z, c):
        if z in switched_zones and not m.steady and m.scheme.startswith("radau"):
            return switched_balance(m, t, StepSlice(m.conc, z, c), StepSlice(m.zone_rhs, z, c))
        return time_balance(m, t, StepSlice(m.conc, z, c), StepSlice(m.zone_rhs, z, c))

    return rule


def attach_zone_states(m, data: TrainData) -> None:
    """Zone concentrations ``conc[t, zone, component]`` (declared before the clarifier uses them)."""
    m.conc = pyo.Var(m.STEPS, m.ZONES, m.COMPONENTS, bounds=(0.0, None), initialize=1.0,
                     doc="zone concentration, g/m3 (SALK mol/m3)")


def attach_zone_balances(m, data: TrainData, switched_zones=()) -> None:
    """The ASM1 process rates, the zone right-hand sides and the zone mass balances.

    ``switched_zones``: see :func:`build_train_model`.
    """
    m.rate = pyo.Expression(m.STEPS, m.ZONES, m.PROCESSES, initialize=_process_rates(m, data),
                            doc="ASM1 process rate, g/m3/d")
    m.zone_rhs = pyo.Expression(m.STEPS, m.ZONES, m.COMPONENTS, rule=_zone_rhs_rule(_aux(data)))
    m.zone_balance = pyo.Constraint(m.STEPS, m.ZONES, m.COMPONENTS,
                                    rule=_zone_mass_balance_rule(frozenset(switched_zones)))


def attach_clarifier(m, data: TrainData) -> None:
    """The layout's clarifier: layered settler or ideal separator."""
    if data.clarifier.kind == "layered":
        attach_layered_settler(m, data)
    else:
        attach_ideal_separator(m, data)


# --- flows, wasting -------------------------------------------------------------------
def _effluent_flow_rule(m, p):
    return m.feed_m3_d[p] - m.underflow_m3_d[p]


def _underflow_rule(m, p):
    return m.return_m3_d[p] + m.waste_m3_d[p]


def _zone_tss_rule(m, t, z):
    return m.tss_per_cod * sum(m.conc[t, z, c] for c in SOLIDS_COD)


def _solids_inventory_rule(m, t):
    """Suspended solids held in the zones, g."""
    return sum(m.zone_volume_m3[z] * m.zone_tss_g_m3[t, z] for z in m.ZONES)


def _solids_out_rule(m, t):
    """Suspended solids leaving with the waste and the effluent, g/d."""
    p = m.period_of_step[t]
    return m.waste_m3_d[p] * m.underflow_tss_g_m3[t] + m.effluent_m3_d[p] * m.effluent_tss_mg_L[t]


def _daily_mean(m, expr):
    """Time mean over the day of a per-point expression (the points' quadrature weights)."""
    return sum(m.point_weight[t] * expr[t] for t in m.STEPS)


def _srt_target_rule(m, srt_target_d: float):
    """Daily mean solids inventory = target SRT x daily mean solids leaving (waste + effluent)."""
    return _daily_mean(m, m.solids_inventory_g) == srt_target_d * _daily_mean(m, m.solids_out_g_d)


def _constant_waste_rule(m, p):
    if p == 1:
        return pyo.Constraint.Skip
    return m.waste_m3_d[p] == m.waste_m3_d[1]


def _srt_rule(m):
    return _daily_mean(m, m.solids_inventory_g) / _daily_mean(m, m.solids_out_g_d)


def attach_flows(m, data: TrainData) -> None:
    """Clarifier feed, return sludge, waste (Var), underflow and effluent flows per period."""
    m.feed_m3_d = {p + 1: float(q) for p, q in enumerate(data.feed_m3_d)}
    m.return_m3_d = {p + 1: float(q) for p, q in enumerate(data.ras_m3_d)}
    m.waste_m3_d = pyo.Var(m.PERIODS, bounds=(0.0, None), doc="waste sludge flow, m3/d")
    if data.waste_m3_d is not None:
        for p in m.PERIODS:
            m.waste_m3_d[p].fix(float(data.waste_m3_d[p - 1]))
    else:
        m.waste_m3_d.set_values({p: 0.01 * m.feed_m3_d[p] for p in m.PERIODS})
    m.underflow_m3_d = pyo.Expression(m.PERIODS, rule=_underflow_rule)
    m.effluent_m3_d = pyo.Expression(m.PERIODS, rule=_effluent_flow_rule)


def attach_wasting(m, data: TrainData) -> None:
    """Solids inventory and SRT expressions; the SRT-target equations when the layout asks for one."""
    m.zone_tss_g_m3 = pyo.Expression(m.STEPS, m.ZONES, rule=_zone_tss_rule)
    m.underflow_tss_g_m3 = pyo.Expression(
        m.STEPS, rule=lambda m, t: m.tss_per_cod * sum(m.underflow_conc[t, c] for c in SOLIDS_COD))
    m.solids_inventory_g = pyo.Expression(m.STEPS, rule=_solids_inventory_rule)
    m.solids_out_g_d = pyo.Expression(m.STEPS, rule=_solids_out_rule)
    m.srt_d = pyo.Expression(rule=_srt_rule, doc="sludge retention time (zones' solids / solids leaving), d")
    if data.waste_m3_d is None:
        m.srt_target = pyo.Constraint(rule=lambda m: _srt_target_rule(m, float(data.srt_d)))
        m.constant_waste = pyo.Constraint(m.PERIODS, rule=_constant_waste_rule)


# --- named outputs --------------------------------------------------------------------
def _otr_rule(m, t, z):
    """Oxygen transferred into zone z, kg O2/h."""
    p = m.period_of_step[t]
    g_d = m.kla_per_d[z, p] * (m.do_sat_mg_L[z, p] - m.conc[t, z, "SO"]) * m.zone_volume_m3[z]
    return units.kg_d_to_kg_h(units.g_to_kg(g_d))


def attach_outputs(m, data: TrainData) -> None:
    """Named expressions the optimiser and the reports use (per step)."""
    m.otr_kg_h = pyo.Expression(m.STEPS, m.AERATED_ZONES, rule=_otr_rule)
    m.effluent_nh4_mg_L = pyo.Expression(m.STEPS, rule=lambda m, t: m.effluent_conc[t, "SNH"])
    # total nitrogen per unit of each component (stoichiometric: the same in every period)
    n_per = {c: float(v) for c, v in zip(ASM1_COMPONENTS, n_composition(data.params[0])) if float(v) != 0.0}
    m.effluent_tn_mg_L = pyo.Expression(m.STEPS, rule=lambda m, t: sum(w * m.effluent_conc[t, c]
                                                                      for c, w in n_per.items()))
    m.effluent_tss_mg_L = pyo.Expression(
        m.STEPS, rule=lambda m, t: m.tss_per_cod * sum(m.effluent_conc[t, c] for c in SOLIDS_COD))


def build_train_model(data: TrainData, *, steady: bool, airflow=None, scheme: str = "radau2",
                      name: str = "airtaper_train", switched_zones=(), diffuser_count=None):
    """The Pyomo model of a train from resolved data (see the module notes).

    Parameters
    ----------
    data : TrainData
        From :func:`airtaper.model.data.train_data` (and :func:`~airtaper.model.data.mean_load`
        or :func:`~airtaper.model.data.single_period` for a steady point).
    steady : bool
        One steady point (``data`` must have one period) instead of the cyclic day.
    airflow : mapping, optional
        Zone id -> airflow (Sm3/h) or per-period airflows, fixed in ``airflow_Sm3_h``.
    scheme : "radau2" (default), "radau3", "euler" or "bdf2"
        Time discretisation of the cyclic model (ignored for a steady point).
    switched_zones : sequence of zone ids, optional
        Zones whose air may switch off (swing zones): their balances are
        :func:`switched_balance` under a Radau scheme.

    Notes
    -----
    ``m.train_data`` is ``data``: the numbers the model was built from, and through
    ``m.train_data.plant`` the resolved plant, which is all a layer attaching to the
    model (the optimiser, the calibration) reads about the plant.
    """
    m = pyo.ConcreteModel(name=name)
    m.train_data = data
    attach_sets(m, data, steady, scheme)
    attach_aeration(m, data, airflow, diffuser_count)
    attach_flows(m, data)
    attach_zone_states(m, data)
    attach_clarifier(m, data)
    attach_zone_balances(m, data, switched_zones)
    attach_outputs(m, data)
    attach_wasting(m, data)
    m.scaling_factor = pyo.Suffix(direction=pyo.Suffix.EXPORT)
    return m


def build_steady_model(plant: ResolvedPlant | Layout, *, period: int | None = None, airflow=None):
    """A steady-state model of ``plant``: at the daily mean load, or at ``period`` (1-based)'s load.

    ``airflow``: zone -> airflow, Sm3/h (for the mean load a per-period schedule is
    averaged over the day).
    """
    data = train_data(plant)
    if period is None:
        steady = mean_load(data)
        if airflow is not None:
            airflow = {z: float(np.mean(v)) for z, v in airflow.items()}
    else:
        steady = single_period(data, period - 1)
        if airflow is not None:
            airflow = {z: (float(v) if np.ndim(v) == 0 else float(v[period - 1])) for z, v in airflow.items()}
    return build_train_model(steady, steady=True, airflow=airflow, name="airtaper_steady")


def build_cyclic_model(plant: ResolvedPlant | Layout, *, airflow=None, scheme: str = "radau2",
                       steps_per_period: int | None = None, diffuser_count=None):
    """The cyclic diurnal model of ``plant`` (periods and steps from its horizon; a layout is resolved first).

    ``scheme``: "radau2" (Radau IIA, 2 points per step, order 3; default), "radau3"
    (order 5), "euler" (backward Euler) or "bdf2";
    ``steps_per_period`` overrides the layout's. Swing zones get :func:`switched_balance`.
    """
    data = train_data(plant)
    if steps_per_period is not None:
        data = replace(data, steps_per_period=int(steps_per_period))
    return build_train_model(data, steady=False, airflow=airflow, scheme=scheme, name="airtaper_cyclic",
                             switched_zones=[z.id for z in data.plant.zones if z.kind == "swing"],
                             diffuser_count=diffuser_count)


def set_airflow(m, airflow) -> None:
    """Fix the airflow schedule: zone -> number or per-period sequence, Sm3/h."""
    for z, given in airflow.items():
        for p in m.PERIODS:
            v = float(given) if np.ndim(given) == 0 else float(given[p - 1])
            m.airflow_Sm3_h[z, p].fix(v)


def set_do_setpoints(m, do_mg_L) -> None:
    """Steady model: impose DO in the given zones; their airflow (or kLa) becomes the unknown.

    ``do_mg_L``: zone id -> DO setpoint, mg/L. Only for steady models (in the cyclic
    model a DO trajectory is the optimiser's business).
    """
    if not m.steady:
        raise ModelError("DO setpoints fix one DO per zone: only a steady model can take them")
    for z, do in do_mg_L.items():
        if z not in m.aeration:
            raise ModelError(f"zone {z} has no aeration: a DO setpoint cannot be imposed")
        for t in m.STEPS:
            m.conc[t, z, "SO"].fix(float(do))
        for p in m.PERIODS:
            if z in m.GRID_ZONES:
                m.airflow_Sm3_h[z, p].unfix()
            else:
                m.kla_fixed_per_d[z, p].unfix()


def release_do_setpoints(m, zones=None) -> None:
    """Undo :func:`set_do_setpoints`: free DO, fix airflow/kLa at their current values."""
    for z in (zones if zones is not None else list(m.AERATED_ZONES)):
        for t in m.STEPS:
            m.conc[t, z, "SO"].unfix()
        for p in m.PERIODS:
            v = m.airflow_Sm3_h[z, p] if z in m.GRID_ZONES else m.kla_fixed_per_d[z, p]
            v.fix(v.value)
