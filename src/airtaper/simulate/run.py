"""Public entry points: the steady state at mean load and the periodic (cyclic) day.

:func:`steady_state` solves the plant at constant mean inputs by a Newton-type
root solve (:mod:`airtaper.simulate.steady`). :func:`periodic` starts from
that steady state and simulates whole days with a stiff solver
(``scipy.integrate.solve_ivp``, BDF, with the sparse grouped-difference
Jacobian, factorised dense for a small plant) until the state at the end of a day matches the state at its start
within ``tol``; inputs are constant within each period (influent, flows,
temperature, airflow or DO setpoint), so every period is integrated on its own
and no discontinuity falls inside a solver step.

Aeration choices, per zone (see :func:`resolve_aeration`): a fixed kLa (from the
layout), a scheduled airflow, or ideal DO control to a setpoint.
"""

from __future__ import annotations

import dataclasses

import time
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy.integrate import solve_ivp

from airtaper import units
from airtaper.layout.types import ASM1_COMPONENTS
from airtaper.plant import ResolvedPlant, resolve_plant
from airtaper.process.stoichiometry import IDX, cod_composition, n_composition, tkn_composition, tss_composition
from airtaper.simulate.plant import Inputs, PlantData
from airtaper.simulate.steady import solve_steady
from airtaper.simulate.system import NC, System

EFFLUENT_COLUMNS = ("tss_mg_L", "cod_mg_L", "tkn_mg_L", "tn_mg_L")
#: Solver tolerances (rtol = atol) of the days that seek the repeating day (:func:`periodic`, ``seek``): loose
#: enough that BDF takes fewer, longer steps, tight enough that the state they reach repeats within the
#: day-repeat tolerance under the requested tolerances too. Common practice (no source).
SEEKING_RTOL = 1e-4
#: The seek runs only for a day-repeat tolerance at least this many times SEEKING_RTOL: a day integrated to
#: SEEKING_RTOL cannot be told to repeat much closer than that, and the loose days would run to the day limit.
#: Common practice (no source).
SEEKING_MARGIN = 10.0


# --- aeration inputs ------------------------------------------------------------
def _per_zone(plant: ResolvedPlant, value, what: str, default=np.nan) -> np.ndarray:
    nz = plant.n_zones
    if value is None:
        return np.full(nz, default, dtype=float)
    if isinstance(value, dict):
        out = np.full(nz, default, dtype=float)
        for key, v in value.items():
            if key not in plant.zone_ids:
                raise ValueError(f"{what}: no zone with the id {key!r} (the plant's zones: "
                                 f"{', '.join(plant.zone_ids)})")
            out[plant.zone_index(key)] = np.nan if v is None else float(v)
        return out
    arr = np.asarray(value, dtype=float)
    if arr.ndim == 0:
        return np.full(nz, float(arr))
    if arr.shape != (nz,):
        raise ValueError(f"{what}: one value per zone expected, got shape {arr.shape} for {nz} zones")
    return arr


def resolve_aeration(plant, schedule=None, do_setpoint_mg_L=None):
    """Per-period airflow (periods, zones) and DO setpoints (zones,) of a plant from the caller's choice.

    ``plant``: a :class:`ResolvedPlant` (a validated Layout is resolved first).

    * ``do_setpoint_mg_L`` float: every zone of kind "aerated" with diffusers
      or a fixed kLa is DO-controlled (swing zones stay unaerated unless named);
      a dict ``{zone_id: setpoint}`` controls just those zones;
    * ``schedule``: airflow (Sm3/h) as an array (periods, zones), one (zones,)
      for every period, or a dict ``{zone_id: sequence or float}``;
    * neither: the plant's baseline DO setpoint on every aerated diffused zone;
      fixed-kLa zones (benchmark plants) keep their kLa.
    Zones with a fixed kLa use it unless DO-controlled.

    The arguments come from code past the input boundary (the CLI's schedule reader checks
    a schedule file row by row and names it): a schedule or setpoint that does not fit the
    plant is a caller's mistake and raises ``ValueError``.
    """
    plant = resolve_plant(plant)
    nz, n = plant.n_zones, plant.n_periods
    air = np.zeros((n, nz))
    if schedule is not None:
        if isinstance(schedule, dict):
            for key, v in schedule.items():
                if key not in plant.zone_ids:
                    raise ValueError(f"schedule: no zone with the id {key!r} (the plant's zones: "
                                     f"{', '.join(plant.zone_ids)})")
                air[:, plant.zone_index(key)] = np.broadcast_to(np.asarray(v, dtype=float), (n,))
        else:
            arr = np.asarray(schedule, dtype=float)
            if arr.shape == (nz,):
                arr = np.broadcast_to(arr, (n, nz))
            if arr.shape != (n, nz):
                raise ValueError(f"schedule: airflow per period and zone expected, got shape {arr.shape}, "
                                 f"expected ({n}, {nz})")
            air = np.array(arr, dtype=float)
        if np.any(~np.isfinite(air)) or np.any(air < 0.0):
            raise ValueError("schedule: airflows must be finite and not negative")
    if do_setpoint_mg_L is None and schedule is None:
        do_setpoint_mg_L = {z.id: plant.operation.baseline_do_setpoint_mg_L for z in plant.zones
                            if z.kind == "aerated" and plant.has_diffusers(z)}
    if isinstance(do_setpoint_mg_L, (int, float)):
        do_setpoint_mg_L = {z.id: float(do_setpoint_mg_L) for z, a in zip(plant.zones, plant.aeration)
                            if z.kind == "aerated" and a is not None}
    sp = _per_zone(plant, do_setpoint_mg_L, "do_setpoint")
    for i, z in enumerate(plant.zones):
        if np.isfinite(sp[i]) and not z.aerated:
            raise ValueError(f"do_setpoint: zone {z.id} is anoxic and cannot be DO-controlled")
    return air, sp


# --- results --------------------------------------------------------------------
def effluent_quantities(c: np.ndarray, params, tss_per_cod: float) -> dict[str, np.ndarray]:
    """TSS, total COD, TKN and TN of concentrations (..., 13).

    TN = TKN + SNO with TKN = SNH + SND + XND + i_XB (XBH + XBA) + i_XP (XP + XI)
    (the BSM1 effluent definitions, Alex et al. 2008 section 6).
    """
    cod = cod_composition(params)
    cod[IDX["SO"]] = 0.0
    cod[IDX["SNO"]] = 0.0
    return {
        "tss_mg_L": c @ tss_composition(tss_per_cod),
        "cod_mg_L": c @ cod,
        "tkn_mg_L": c @ tkn_composition(params),
        "tn_mg_L": c @ n_composition(params),
    }


@dataclass
class SteadyResult:
    """Steady state of the plant at constant inputs.

    ``zones``: one row per zone (13 components, airflow_Sm3_h, kla_per_h, otr_kg_h,
    tss_mg_L); ``effluent`` and ``underflow``: component dicts plus TSS, COD,
    TKN, TN; ``layers``: clarifier layers from the top (layered only);
    ``balance``: external COD/N flows (g/d, see :meth:`System.balance`); ``clarifier``:
    the layered clarifier checked physically (:meth:`System.clarifier_profile`: solids per
    layer, blanket, underflow, limiting flux, ``overloaded`` and its ``message``), None for
    an ideal separator.
    """

    y: np.ndarray
    zones: pd.DataFrame
    effluent: dict[str, float]
    underflow: dict[str, float]
    layers: pd.DataFrame | None
    q_waste_m3_d: float
    q_effluent_m3_d: float
    srt_d: float
    balance: dict[str, float]
    iterations: int
    residual: float
    seconds: float
    clarifier: dict | None = None


def _stream(c, params, tss_per_cod) -> dict[str, float]:
    out = {k: float(v) for k, v in zip(ASM1_COMPONENTS, c)}
    out.update({k: float(v) for k, v in effluent_quantities(np.asarray(c), params, tss_per_cod).items()})
    return out


def _steady_result(system: System, inp: Inputs, solve, seconds: float) -> SteadyResult:
    y = solve.y
    _, info = system.rhs(y, inp, detail=True)
    B = system.blocks(y)
    zones = pd.DataFrame(B[: system.nz], columns=list(ASM1_COMPONENTS))
    zones.insert(0, "zone", list(system.plant.plant.zone_ids))
    zones["airflow_Sm3_h"] = system.airflow_Sm3_h(inp, info["kla_per_d"])
    zones["kla_per_h"] = units.per_day_to_per_hour(info["kla_per_d"])
    zones["otr_kg_h"] = units.g_to_kg(units.kg_d_to_kg_h(info["otr_g_m3_d"] * system.V))
    zones["tss_mg_L"] = system.tss(B[: system.nz].T)
    layers = None
    if system.layered:
        layers = pd.DataFrame(B[system.nz:], columns=list(ASM1_COMPONENTS))
        layers.insert(0, "layer", np.arange(1, system.n_layers + 1))
        layers["tss_mg_L"] = system.tss(B[system.nz:].T)
    return SteadyResult(
        y=y, zones=zones,
        effluent=_stream(info["c_effluent"], inp.params, system.tss_per_cod),
        underflow=_stream(info["c_underflow"], inp.params, system.tss_per_cod),
        layers=layers, q_waste_m3_d=float(info["q_waste_m3_d"]), q_effluent_m3_d=float(info["q_effluent_m3_d"]),
        srt_d=float(info["srt_d"]), balance=system.balance(y, inp, info), iterations=solve.iterations,
        residual=solve.residual, seconds=seconds, clarifier=system.clarifier_profile(y, inp),
    )


def steady_state(plant, airflow_Sm3_h=None, do_setpoint_mg_L=None, *, tol: float = 1e-10) -> SteadyResult:
    """Steady state at the mean load of the day.

    Parameters
    ----------
    plant : ResolvedPlant (a validated Layout is resolved first)
    airflow_Sm3_h : None, dict {zone_id: airflow} or array (zones,)
        Constant zone airflows (ignored for DO-controlled and fixed-kLa zones).
    do_setpoint_mg_L : None, float or dict {zone_id: setpoint}
        Ideal DO control (see :func:`resolve_aeration` for the defaults).
    tol : float
        Scaled residual of the root solve, 1/d.

    Notes
    -----
    Mean load: mean flows, flow-weighted mean influent concentrations, mean
    temperature (the parameters corrected to it when the layout asks).
    """
    t0 = time.perf_counter()
    plant = resolve_plant(plant)
    data = PlantData(plant)
    system = System(data)
    air = None if airflow_Sm3_h is None else _per_zone(plant, airflow_Sm3_h, "airflow", default=0.0)
    _, sp = resolve_aeration(plant, None if air is None else air, do_setpoint_mg_L)
    inp = data.inputs(None, airflow_Sm3_h=air, do_setpoint_mg_L=sp)
    solve = solve_steady(system, inp, tol=tol)
    return _steady_result(system, inp, solve, time.perf_counter() - t0)


@dataclass
class PeriodicResult:
    """The periodic (cyclic) day.

    ``timeseries``: tidy, one row per output time and zone: time_h, zone, the
    13 components, airflow_Sm3_h, kla_per_h, otr_kg_h. ``effluent``: one row
    per output time: time_h, the 13 components, tss/cod/tkn/tn_mg_L,
    q_influent_m3_d, q_effluent_m3_d, q_waste_m3_d, srt_d. Output times are the
    ``steps_per_period`` equal steps of every period, starting at 0 h.
    ``quadrature``: the day at Gauss-Legendre nodes of every solver step (the means
    integrate it, :class:`DayQuadrature`); ``do_extremes``: the lowest and highest DO
    of every zone and period over continuous time (:func:`do_extremes`).
    ``day_change``: max over states of |y(24 h) - y(0)| / max(|y(0)|, 1) of the
    last day; ``balance``: the COD and N closure over the last day. ``start``: the
    mean-load steady state the first day started from, None when the caller gave
    ``start_state`` (it is then not solved).
    """

    timeseries: pd.DataFrame
    effluent: pd.DataFrame
    days: int
    converged: bool
    day_change: float
    balance: dict[str, float]
    start: SteadyResult | None
    seconds: float
    y_start: np.ndarray
    y_end: np.ndarray
    period_h: float
    plant: ResolvedPlant | None = field(repr=False, default=None)
    quadrature: "DayQuadrature | None" = field(repr=False, default=None)
    do_extremes: pd.DataFrame | None = field(repr=False, default=None)
    setpoints_mg_L: dict = field(default_factory=dict)  # zone id -> DO setpoint of the DO-controlled zones
    #: clarifier layers (top first) at the output times of ``timeseries``, (times, layers, 13); None for an
    #: ideal separator
    layer_states: np.ndarray | None = field(repr=False, default=None)


def periodic(plant, schedule=None, do_setpoint_mg_L=None, *, max_days: int = 30, tol: float = 1e-3,
             rtol: float = 1e-5, atol: float = 1e-5, start_state=None,
             start_waste_m3_d: float | None = None, start_period: int = 0,
             extrapolate: bool = True, seek: bool = True) -> PeriodicResult:
    """Simulate whole days from the mean-load steady state until the day repeats.

    Parameters
    ----------
    plant : ResolvedPlant (a validated Layout is resolved first)
    schedule : None, array (periods, zones) or (zones,), or dict {zone_id: airflows}
        Zone airflows in Sm3/h, constant within each period.
    do_setpoint_mg_L : None, float or dict {zone_id: setpoint}
        Ideal DO control (controlled zones ignore the schedule).
    max_days : int
        Give up (``converged=False``) after this many days.
    tol : float
        The day repeats when max |y(t + 24 h) - y(t)| / max(|y(t)|, 1) < tol.
    rtol, atol : float
        Tolerances of the BDF solver.
    start_state : None or mapping
        Where the first day starts instead of the mean-load steady state (for example
        the state a periodic optimum gives at 0 h, so that fewer days are needed):
        ``{"zones": {zone_id: 13 components}, "layers": (layers, 13) from the top}``
        (``layers`` only for a layered clarifier), g/m3 and SALK mol/m3. The
        simulator still runs whole days of its own equations until the day repeats.
        The mean-load steady state is then not solved (``start`` of the result is None).
    start_waste_m3_d : float, optional
        With a target SRT, the first day's waste flow (default: the mean-load steady
        state's; with ``start_state``, the flow holding the SRT at that state and mean load).
    start_period : int
        0-based period at whose start the start state holds (default 0: at 0 h). The
        simulator first runs the rest of that day from it (a lead-in, not recorded), so
        that the first whole day starts from its own state at 0 h: a state taken some
        hours before the day's end (e.g. from the optimiser) sheds its fast components'
        differences (DO within minutes, NH4-N and NO3-N within hours) on the way.
    extrapolate : bool
        Start a day beyond the last one's end where one slow mode is heading
        (:class:`DayExtrapolation`); the day is still simulated in full and accepted by the
        same test. False: plain day after day.
    seek : bool
        Seek the repeating day with the loose solver tolerances :data:`SEEKING_RTOL` first (the lead-in
        too), then go on from where they end with ``rtol``, ``atol`` until the day repeats again: the day
        returned, its tables and its test are always of the requested tolerances (at least one such day;
        ``days`` counts both kinds). Most days of a start far from the repeating day then cost less; a
        start already on it pays one loose day more. Nothing changes when ``rtol`` and ``atol`` are no
        tighter than :data:`SEEKING_RTOL`, or ``tol`` is below :data:`SEEKING_MARGIN` times it.
    """
    t_start = time.perf_counter()
    plant = resolve_plant(plant)
    data = PlantData(plant)
    system = System(data)
    air, sp = resolve_aeration(plant, schedule, do_setpoint_mg_L)
    mean_inp = data.inputs(None, airflow_Sm3_h=air.mean(axis=0), do_setpoint_mg_L=sp)
    start = None
    if start_state is None:
        t0 = time.perf_counter()
        start = _steady_result(system, mean_inp, solve_steady(system, mean_inp), 0.0)
        start.seconds = time.perf_counter() - t0
        y = start.y.copy()
    else:
        y = _state_vector(system, start_state)
    inputs = [data.inputs(k, airflow_Sm3_h=air[k], do_setpoint_mg_L=sp) for k in range(plant.n_periods)]
    wcod, wn = system.inventory_weights(inputs[0])
    period_d = data.period_d
    steps = plant.horizon.steps_per_period
    srt_target = plant.hydraulics.srt_d
    if srt_target is not None:
        # An SRT target is met on the daily mean with one waste flow for the whole day, as
        # operators waste and as the Pyomo model states it: start from the mean-load value
        # (without a steady state: the flow that holds the SRT at the start state and mean load).
        if start_waste_m3_d is not None:
            q_waste = float(start_waste_m3_d)
        elif start is not None:
            q_waste = start.q_waste_m3_d
        else:
            q_waste = float(system.rhs(y, mean_inp, detail=True)[1]["q_waste_m3_d"])
        inputs = [dataclasses.replace(inp, q_waste=q_waste) for inp in inputs]
    phases = [(rtol, atol)]  # (rtol, atol) of each phase of days, the requested ones last
    if seek and min(rtol, atol) < SEEKING_RTOL and tol >= SEEKING_MARGIN * SEEKING_RTOL:
        phases.insert(0, (SEEKING_RTOL, SEEKING_RTOL))
    if start_period:  # the lead-in: the rest of the day from the state at the start of ``start_period``
        if not 0 < start_period < len(inputs):
            raise ValueError(f"start_period {start_period} is not a period of the day (0 to {len(inputs) - 1})")
        z_end, _, _ = _simulate_day_recorded(system, inputs[start_period:], np.concatenate((y, [0.0, 0.0])),
                                             period_d, steps, *phases[0], wcod, wn)
        y = z_end[: system.n]
    converged = False
    change = np.inf
    days = 0
    rec = None
    for phase, (rtol_k, atol_k) in enumerate(phases):
        last = phase == len(phases) - 1
        converged = False
        speed = DayExtrapolation()  # (a new phase's first step is no step of the same iteration)
        # the seeking phase leaves the last day to the requested tolerances
        while days < (max_days if last else max_days - 1):
            days += 1
            z0 = np.concatenate((y, [0.0, 0.0]))
            z_end, rec_try, dense = _simulate_day_recorded(system, inputs, z0, period_d, steps, rtol_k, atol_k,
                                                           wcod, wn)
            y_end = z_end[: system.n]
            change = float(np.max(np.abs(y_end - y) / np.maximum(np.abs(y), 1.0)))
            rec = (y.copy(), z_end, rec_try, dense)
            y = y_end
            waste_change = 0.0
            q_before = q_waste if srt_target is not None else None
            if srt_target is not None:
                q_new = _daily_waste_for_srt(system, inputs, rec_try, srt_target)
                waste_change = abs(q_new - q_waste) / max(q_waste, 1e-9)
                if waste_change >= tol:
                    q_waste = q_new
                    inputs = [dataclasses.replace(inp, q_waste=q_waste) for inp in inputs]
            if change < tol and waste_change < tol:
                converged = True
                break
            q_after = q_waste if srt_target is not None else None
            jump = speed.factor(rec[0], y, q_before, q_after) if extrapolate else 0.0
            if jump:  # the next day starts beyond this one's end, where the slow mode is heading
                y = np.maximum(y + jump * (y - rec[0]), 0.0)
                if srt_target is not None and q_waste != q_before:
                    q_waste = max(q_waste + jump * (q_waste - q_before), 0.0)
                    inputs = [dataclasses.replace(inp, q_waste=q_waste) for inp in inputs]
    y0_day, z_end, records, dense = rec
    y1_day = z_end[: system.n]
    # COD and N closure over the recorded day: the net inflows integrated by the solver
    # against the change of the plant's inventory (i_XB and i_XP do not vary by period)
    d_cod = float(wcod @ (y1_day - y0_day))
    d_n = float(wn @ (y1_day - y0_day))
    cod_in = sum(inp.q_influent * float(cod_composition(inp.params) @ inp.c_influent) for inp in inputs) * period_d
    n_in = sum(inp.q_influent * float(n_composition(inp.params) @ inp.c_influent) for inp in inputs) * period_d
    balance = dict(
        cod_in_g=cod_in, cod_net_in_g=float(z_end[-2]), cod_inventory_change_g=d_cod,
        cod_closure=abs(float(z_end[-2]) - d_cod) / cod_in,
        n_in_g=n_in, n_net_in_g=float(z_end[-1]), n_inventory_change_g=d_n,
        n_closure=abs(float(z_end[-1]) - d_n) / n_in,
    )
    ts, eff = _tables(system, inputs, records)
    layer_states = None
    if system.layered:
        layer_states = np.array([system.blocks(y_i)[system.nz:] for y_i in records[1]])
    quad = day_quadrature(system, inputs, dense)
    extremes = do_extremes(system, dense)
    return PeriodicResult(timeseries=ts, effluent=eff, days=days, converged=converged, day_change=change,
                          balance=balance, start=start, seconds=time.perf_counter() - t_start,
                          y_start=y0_day, y_end=y1_day, period_h=plant.period_h, plant=plant,
                          quadrature=quad, do_extremes=extremes,
                          setpoints_mg_L={z.id: float(v) for z, v in zip(plant.zones, sp) if np.isfinite(v)},
                          layer_states=layer_states)


class DayExtrapolation:
    """Extrapolation of the day-to-day iteration along its slowest mode (Aitken's delta-squared, vector form).

    Day after day the start state ``y_k`` (and the waste flow holding an SRT target) approaches the
    periodic day geometrically; once one mode is left, ``y_k+1 - y_k = r (y_k - y_k-1)`` with one
    ratio ``r``, and the periodic state is ``y_k+1 + r / (1 - r) (y_k+1 - y_k)``. The ratio comes
    from the last two day-to-day steps (scaled as the day-repeat test scales them); the jump is
    taken only when three steps agree: the last two parallel within :data:`PARALLEL` (cosine) and
    the ratio of the last two pairs within :data:`RATIO_AGREE` of each other, between 0 and
    :data:`RATIO_MAX`. After a jump it waits for three new steps. On a demo plant at 12 C the
    nitrifiers' mode has a ratio of 0.86 and took 20 days to repeat within 1e-3.

    The jump only chooses where the next day starts: the day is still simulated in full and
    accepted by the same day-repeat test, so the periodic day found is the simulator's own.

    References: A. C. Aitken (1926), On Bernoulli's numerical solution of algebraic equations,
    Proc. R. Soc. Edinb. 46, 289-305, doi:10.1017/S0370164600022070 (from memory).
    """

    PARALLEL = 0.99
    RATIO_AGREE = 0.02
    RATIO_MAX = 0.95

    def __init__(self):
        self.steps: list[np.ndarray] = []
        self.ratios: list[float] = []

    def factor(self, y0, y1, q0=None, q1=None) -> float:
        """The jump factor ``r / (1 - r)`` after the day from ``y0`` (waste flow ``q0``) to ``y1`` (``q1``),
        or 0.0 (no jump)."""
        d = np.asarray(y1, dtype=float) - np.asarray(y0, dtype=float)
        scale = np.maximum(np.abs(y1), 1.0)
        if q0 is not None:
            d = np.append(d, q1 - q0)
            scale = np.append(scale, max(abs(q1), 1e-9))
        self.steps.append(d)
        if len(self.steps) < 2:
            return 0.0
        a, b = self.steps[-2] / scale, self.steps[-1] / scale  # both scaled alike (by the latest state)
        aa = float(a @ a)
        if aa <= 0.0:
            return 0.0
        r = float(a @ b) / aa
        cos = float(a @ b) / np.sqrt(aa * float(b @ b)) if float(b @ b) > 0.0 else 0.0
        self.ratios.append(r if cos >= self.PARALLEL else np.nan)
        if len(self.ratios) < 2:
            return 0.0
        r0, r1 = self.ratios[-2], self.ratios[-1]
        if not (np.isfinite(r0) and np.isfinite(r1) and 0.0 < r1 <= self.RATIO_MAX
                and abs(r1 - r0) <= self.RATIO_AGREE):
            return 0.0
        self.steps.clear()
        self.ratios.clear()
        return r1 / (1.0 - r1)


def _state_vector(system: System, state) -> np.ndarray:
    """The simulator's state vector from per-zone (and per-layer) concentrations."""
    blocks = [np.asarray(state["zones"][zid], dtype=float) for zid in system.plant.plant.zone_ids]
    if system.layered:
        blocks.extend(np.asarray(state["layers"], dtype=float))
    y = np.concatenate(blocks)
    if y.shape != (system.n,) or not np.all(np.isfinite(y)):
        raise ValueError(f"start_state has {y.size} finite values, the plant has {system.n} states")
    return np.maximum(y, 0.0)


def _daily_waste_for_srt(system: System, inputs, records, srt_target_d: float) -> float:
    """The one waste flow that makes the day's mean solids inventory equal SRT x mean solids leaving.

    ``mean(M) = SRT (Q_w mean(X_u) + mean(Q_e X_e))`` over the recorded output times
    (equal steps of every period), with ``M`` the suspended solids in the zones, g.
    """
    _, Y, K = records
    nz = system.nz
    inventory, xu, qe_xe = (np.empty(len(K)) for _ in range(3))
    for k in np.unique(K):  # a period's recorded states in one call, as columns
        at = np.flatnonzero(K == k)
        cols = Y[at].T
        _, info = system.rhs(cols, inputs[k], detail="balance")
        cz = system.blocks(cols)[:nz]  # (zones, 13, m)
        inventory[at] = (system.V[:, None] * system.tss(cz.transpose(1, 0, 2))).sum(axis=0)
        xu[at] = system.tss(info["c_underflow"])
        qe_xe[at] = info["q_effluent_m3_d"] * system.tss(info["c_effluent"])
    q = (np.mean(inventory) / srt_target_d - np.mean(qe_xe)) / max(np.mean(xu), 1e-9)
    return float(max(q, 0.0))


#: Largest system (states including the two accumulators) whose Jacobian BDF factorises dense.
DENSE_LU_MAX_STATES = 120


def _simulate_day_recorded(system, inputs, z0, period_d, steps, rtol, atol, wcod, wn):
    """One day, period by period.

    Returns the end state, the states at the output times and the dense output of
    every period, ``[(period, solver step times (d), OdeSolution)]``.
    """
    import scipy.sparse as sps

    n = system.n
    z = z0
    out_t, out_y, out_k = [], [], []
    dense = []
    zero_col = sps.csc_matrix((n, 2))
    zero_corner = sps.csc_matrix((2, 2))
    # A small system's Jacobian is factorised dense (LAPACK): for a few hundred states that costs less
    # than the sparse factorisation's setup, and BDF takes the same steps either way.
    dense_lu = n + 2 <= DENSE_LU_MAX_STATES
    # The two accumulators (net COD and N inflow, g) are differences of large flows, so their
    # rates carry round-off of about 1e-9 of the daily inflow; their absolute tolerance is set
    # relative to that inflow so they never drive the step size. (The closure itself does not
    # depend on the tolerance: BDF keeps the linear invariant inventory + accumulator.)
    b0 = system.balance(z0[:n], inputs[0])
    tol_vec = np.concatenate((np.full(n, atol), [atol * b0["cod_in"], atol * b0["n_in"]]))
    for k, inp in enumerate(inputs):
        t0, t1 = k * period_d, (k + 1) * period_d

        def fun(t, zz, inp=inp):
            return system.rhs_with_balance(zz, inp)

        def jac(t, zz, inp=inp):
            J = system.jacobian(zz[:n], inp)
            if dense_lu:
                full = np.zeros((n + 2, n + 2))
                full[:n, :n] = J.toarray()
                full[n, :n] = wcod @ J
                full[n + 1, :n] = wn @ J
                return full
            rows = sps.csc_matrix(np.vstack((wcod @ J, wn @ J)))
            return sps.bmat([[J, zero_col], [rows, zero_corner]], format="csc")

        # Every period starts with the step BDF chooses from the derivative there (scipy's initial-step
        # rule): the inputs jump at the period's start, so the step the last period ended with says
        # nothing of the new transient. Starting with it was rejected down about 100-fold at every
        # period start; on the demo's day the default start takes 9 % more steps but 17 % fewer
        # right-hand sides and 39 % fewer factorisations, with the day's mean airflow and NH4-N within
        # 1.2e-6 and 0.9e-6 of a run at rtol = atol = 1e-8 (the old start: 0.6e-6 and 5.2e-6).
        sol = solve_ivp(fun, (t0, t1), z, method="BDF", jac=jac, rtol=rtol, atol=tol_vec, dense_output=True)
        if not sol.success:
            raise RuntimeError(f"simulation failed in period {k + 1}: {sol.message}")
        for j in range(steps):
            t = t0 + (t1 - t0) * j / steps
            out_t.append(t)
            out_y.append(sol.sol(t)[:n] if j else z[:n].copy())
            out_k.append(k)
        z = sol.y[:, -1]
        dense.append((k, sol.t, sol.sol))
    return z, (np.array(out_t), np.array(out_y), np.array(out_k)), dense


#: Gauss-Legendre nodes per solver step of the day quadrature: exact for polynomials of
#: degree 5, the highest order of the BDF dense output (Shampine & Reichelt 1997,
#: "The MATLAB ODE suite", SIAM J. Sci. Comput. 18(1), doi:10.1137/S1064827594276424).
QUADRATURE_NODES = 3
#: Samples per solver step where the DO extremes are first looked for (then refined).
_EXTREME_SAMPLES = 8
#: Samples of each refinement of the bracket around an extreme sample.
_REFINE_SAMPLES = 17


@dataclass
class DayQuadrature:
    """The simulated day at Gauss-Legendre nodes of every solver step (dense output).

    ``weight`` is each node's share of the day (sum 1), so a daily time mean is
    ``weight @ value`` and a flow-weighted mean ``(weight * q) @ value / (weight @ q)``,
    exact for the solver's piecewise-polynomial solution up to the nodes' degree.
    ``effluent``: the columns of :attr:`PeriodicResult.effluent` at the nodes;
    ``do``, ``airflow_Sm3_h``, ``otr_kg_h``: (nodes, zones).
    """

    time_h: np.ndarray
    weight: np.ndarray
    period: np.ndarray  # 0-based
    effluent: pd.DataFrame
    do: np.ndarray
    airflow_Sm3_h: np.ndarray
    otr_kg_h: np.ndarray

    def mean(self, values, flow_weighted: bool = False) -> float:
        """Daily mean of per-node values (time mean, or weighted by the effluent flow)."""
        w = self.weight * (self.effluent["q_effluent_m3_d"].to_numpy() if flow_weighted else 1.0)
        return float(w @ np.asarray(values, dtype=float) / w.sum())

    def period_means(self, values) -> np.ndarray:
        """Time mean of per-node values in every period, (periods,)."""
        v = np.asarray(values, dtype=float)
        n = int(self.period.max()) + 1
        return np.array([(self.weight[self.period == k] @ v[self.period == k]) / self.weight[self.period == k].sum()
                         for k in range(n)])


_QUADRATURE_COLUMNS = (*ASM1_COMPONENTS, *EFFLUENT_COLUMNS, "q_influent_m3_d", "q_effluent_m3_d", "q_waste_m3_d", "srt_d")


def day_quadrature(system: System, inputs, dense, nodes: int = QUADRATURE_NODES) -> DayQuadrature:
    """The day at ``nodes`` Gauss-Legendre nodes of every solver step (see :class:`DayQuadrature`)."""
    x, w = np.polynomial.legendre.leggauss(nodes)
    n, nz = system.n, system.nz
    t_all, w_all, k_all, eff_rows, so, air, otr = [], [], [], [], [], [], []
    for k, ts, sol in dense:
        a, b = ts[:-1], ts[1:]
        half = 0.5 * (b - a)
        t = ((a + b)[:, None] * 0.5 + half[:, None] * x[None, :]).ravel()
        wt = (half[:, None] * w[None, :]).ravel()
        Y = sol(t)[:n]
        inp = inputs[k]
        _, info = system.rhs(Y, inp, detail=True)
        ce = info["c_effluent"]
        q = effluent_quantities(ce.T, inp.params, system.tss_per_cod)
        m = t.size
        rows = np.empty((m, len(_QUADRATURE_COLUMNS)))  # one frame at the end: far cheaper than a frame per period
        rows[:, :NC] = ce.T
        for j, c in enumerate(EFFLUENT_COLUMNS):
            rows[:, NC + j] = q[c]
        rows[:, -4] = inp.q_influent
        rows[:, -3] = info["q_effluent_m3_d"]
        rows[:, -2] = info["q_waste_m3_d"]
        rows[:, -1] = info["srt_d"]
        eff_rows.append(rows)
        B = system.blocks(Y)
        so.append(B[:nz, IDX["SO"]].T)
        air.append(system.airflow_Sm3_h(inp, info["kla_per_d"]).T)
        otr.append((units.g_to_kg(units.kg_d_to_kg_h(info["otr_g_m3_d"] * system.V[:, None]))).T)
        t_all.append(t)
        w_all.append(wt)
        k_all.append(np.full(m, k))
    t = np.concatenate(t_all)
    weight = np.concatenate(w_all)
    eff = pd.DataFrame(np.concatenate(eff_rows), columns=list(_QUADRATURE_COLUMNS))
    eff.insert(0, "time_h", t * units.HOURS_PER_DAY)
    return DayQuadrature(time_h=t * units.HOURS_PER_DAY, weight=weight / weight.sum(), period=np.concatenate(k_all),
                         effluent=eff, do=np.concatenate(so), airflow_Sm3_h=np.concatenate(air),
                         otr_kg_h=np.concatenate(otr))


def do_extremes(system: System, dense) -> pd.DataFrame:
    """Lowest and highest DO of every zone in every period, over continuous time.

    The dense output is sampled at :data:`_EXTREME_SAMPLES` points of every solver
    step; the bracket around the extreme sample is then sampled again, twice, at
    :data:`_REFINE_SAMPLES` points (the bracket shrinks 8-fold each time: the
    extreme's time is found to 1/512 of a solver step, its value to round-off, as the
    dense output is smooth there). One row per period and zone: ``period`` (0-based),
    ``zone``, ``do_min_mg_L``, ``do_min_time_h``, ``do_max_mg_L``, ``do_max_time_h``.
    """
    zone_ids = list(system.plant.plant.zone_ids)
    rows = []
    frac = np.arange(_EXTREME_SAMPLES) / _EXTREME_SAMPLES
    fine = np.linspace(0.0, 1.0, _REFINE_SAMPLES)
    for k, ts, sol in dense:
        a, b = ts[:-1], ts[1:]
        grid = np.append((a[:, None] + (b - a)[:, None] * frac[None, :]).ravel(), ts[-1])
        Y = sol(grid)
        for i, zid in enumerate(zone_ids):
            idx = i * NC + IDX["SO"]
            v = Y[idx]
            out = {"period": k, "zone": zid}
            for sign, key in ((1.0, "do_min"), (-1.0, "do_max")):
                j = int(np.argmin(sign * v))
                best_t, best = float(grid[j]), float(sign * v[j])
                lo, hi = grid[max(j - 1, 0)], grid[min(j + 1, grid.size - 1)]
                for _ in range(2):
                    if not hi > lo:
                        break
                    t = lo + (hi - lo) * fine
                    w = sign * sol(t)[idx]
                    jj = int(np.argmin(w))
                    if w[jj] < best:
                        best_t, best = float(t[jj]), float(w[jj])
                    step = (hi - lo) / (_REFINE_SAMPLES - 1)
                    lo, hi = max(best_t - step, lo), min(best_t + step, hi)
                out[f"{key}_mg_L"] = sign * best
                out[f"{key}_time_h"] = best_t * units.HOURS_PER_DAY
            rows.append(out)
    return pd.DataFrame(rows, columns=["period", "zone", "do_min_mg_L", "do_min_time_h", "do_max_mg_L",
                                       "do_max_time_h"])


def _tables(system: System, inputs, records):
    t, Y, K = records
    nz = system.nz
    zone_ids = list(system.plant.plant.zone_ids)
    rows_y, rows_air, rows_kla, rows_otr = [], [], [], []
    eff_rows = []
    for t_i, y_i, k in zip(t, Y, K):
        inp = inputs[k]
        _, info = system.rhs(y_i, inp, detail=True)
        B = system.blocks(y_i)
        rows_y.append(B[:nz])
        rows_air.append(system.airflow_Sm3_h(inp, info["kla_per_d"]))
        rows_kla.append(units.per_day_to_per_hour(info["kla_per_d"]))
        rows_otr.append(units.g_to_kg(units.kg_d_to_kg_h(info["otr_g_m3_d"] * system.V)))
        ce = info["c_effluent"]
        q = effluent_quantities(ce, inp.params, system.tss_per_cod)
        eff_rows.append([t_i * units.HOURS_PER_DAY, *ce, *(q[c] for c in EFFLUENT_COLUMNS),
                         inp.q_influent, float(info["q_effluent_m3_d"]), float(info["q_waste_m3_d"]),
                         float(info["srt_d"])])
    nt = len(t)
    Yz = np.array(rows_y).reshape(nt * nz, NC)
    ts = pd.DataFrame(Yz, columns=list(ASM1_COMPONENTS))
    ts.insert(0, "zone", np.tile(zone_ids, nt))
    ts.insert(0, "time_h", np.repeat(t * units.HOURS_PER_DAY, nz))
    ts["airflow_Sm3_h"] = np.array(rows_air).reshape(-1)
    ts["kla_per_h"] = np.array(rows_kla).reshape(-1)
    ts["otr_kg_h"] = np.array(rows_otr).reshape(-1)
    eff = pd.DataFrame(eff_rows, columns=["time_h", *ASM1_COMPONENTS, *EFFLUENT_COLUMNS, "q_influent_m3_d",
                                          "q_effluent_m3_d", "q_waste_m3_d", "srt_d"])
    return ts, eff
