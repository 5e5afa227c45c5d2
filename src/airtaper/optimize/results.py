"""The results of an aeration study: its tables from the solved model and its summary as a typed structure.

:func:`study_tables` reads the solved model of a
:class:`~airtaper.optimize.diurnal.DiurnalOptimisation` into the three tables of the
output folder (``schedule``, ``header``, ``timeseries``; docs/outputs.md gives every
column); :func:`empty_tables` gives the same tables with no rows, for a run stopped
before it solved. :class:`StudySummary` is ``summary.json``: one field per top-level
key, in the file's order, :meth:`StudySummary.to_dict` writes it and
:meth:`StudySummary.from_dict` reads it back (the report reads a finished folder
through it). Keys of the file that the structure does not know are kept aside
(:attr:`StudySummary.extra`) so that a folder written by a later version still reads.

The nested parts are typed the same way (:class:`SummaryPart`): the baseline and the
complying baseline (:class:`BaselineSummary`), the blowers' dispatch
(:class:`DispatchSummary`), the verification (:class:`VerificationSummary`) and the
solver's record (:class:`SolverSummary`). A part's key that a run does not reach is
left out of the file (the field stays :data:`UNSET`), as the file always had it; a
figure the run reached but could not give is ``None`` (null).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import pyomo.environ as pyo

from airtaper.layout.types import ASM1_COMPONENTS
from airtaper.optimize.attempts import point_hours
from airtaper.optimize.problem import point_weights
from airtaper.plant import ResolvedPlant

#: Columns of ``schedule.csv`` as the optimiser writes them (the baseline's columns follow).
SCHEDULE_COLUMNS = ("period_start_h", "period_end_h", "zone", "aerated", "airflow_Sm3_h", "airflow_per_diffuser_Sm3_h",
                    "do_min_mg_L", "do_mean_mg_L", "nh4_mean_mg_L", "otr_kg_h")
#: Columns of ``header.csv`` (``baseline_power_kW`` follows).
HEADER_COLUMNS = ("period_start_h", "period_end_h", "pressure_gauge_kPa", "airflow_Sm3_h", "power_kW")
#: Columns of ``timeseries.csv``; effluent rows add ``tn_mg_L``.
TIMESERIES_COLUMNS = ("time_h", "zone", *ASM1_COMPONENTS, "airflow_Sm3_h", "otr_kg_h")


def study_tables(study) -> tuple[pd.DataFrame, pd.DataFrame, pd.DataFrame]:
    """``schedule``, ``header`` and ``timeseries`` of a solved study (model values; docs/outputs.md)."""
    m, b = study.m, study.m.opt
    period_h = study.plant.period_h
    sched = []
    w = point_weights(m)
    hours = point_hours(m)
    states = study.problem.swing_states or {}
    for p in m.PERIODS:
        steps = [t for t in m.STEPS if m.period_of_step[t] == p]
        wp = np.array([w[t] for t in steps])
        wp = wp / wp.sum()
        for z in b.ZONES:
            q = float(m.airflow_Sm3_h[z, p].value)
            do = np.array([pyo.value(m.conc[t, z, "SO"]) for t in steps])
            sched.append({
                "period_start_h": (p - 1) * period_h, "period_end_h": p * period_h, "zone": z,
                "aerated": bool(states[z][p - 1]) if z in states else q > 0.0,
                "airflow_Sm3_h": q, "airflow_per_diffuser_Sm3_h": q / pyo.value(m.diffuser_count[z]),
                "do_min_mg_L": float(do.min()), "do_mean_mg_L": float(wp @ do),
                "nh4_mean_mg_L": float(wp @ np.array([pyo.value(m.conc[t, z, "SNH"]) for t in steps])),
                "otr_kg_h": float(wp @ np.array([pyo.value(m.otr_kg_h[t, z]) for t in steps])),
            })
    header = pd.DataFrame([{
        "period_start_h": (p - 1) * period_h, "period_end_h": p * period_h,
        "pressure_gauge_kPa": float(b.header_gauge_kPa[p].value),
        "airflow_Sm3_h": float(pyo.value(b.total_airflow_Sm3_h[p])), "power_kW": float(pyo.value(b.power_kW[p])),
    } for p in m.PERIODS], columns=list(HEADER_COLUMNS))
    rows = []
    for t in m.STEPS:
        p = m.period_of_step[t]
        for z in m.ZONES:
            row = {"time_h": hours[t], "zone": z}
            row.update({c: float(m.conc[t, z, c].value) for c in ASM1_COMPONENTS})
            row["airflow_Sm3_h"] = float(m.airflow_Sm3_h[z, p].value) if z in b.ZONES else 0.0
            row["otr_kg_h"] = float(pyo.value(m.otr_kg_h[t, z])) if z in m.AERATED_ZONES else 0.0
            rows.append(row)
        row = {"time_h": hours[t], "zone": "effluent"}
        row.update({c: float(pyo.value(m.effluent_conc[t, c])) for c in ASM1_COMPONENTS})
        row["tn_mg_L"] = float(pyo.value(m.effluent_tn_mg_L[t]))
        rows.append(row)
    return pd.DataFrame(sched, columns=list(SCHEDULE_COLUMNS)), header, pd.DataFrame(rows)


def empty_tables() -> tuple[pd.DataFrame, pd.DataFrame, pd.DataFrame]:
    """The three tables with their columns and no rows (a run stopped before it solved)."""
    return (pd.DataFrame(columns=[c for c in SCHEDULE_COLUMNS if c != "aerated"]),
            pd.DataFrame(columns=list(HEADER_COLUMNS)), pd.DataFrame(columns=list(TIMESERIES_COLUMNS)))


@dataclass
class EffluentFigures:
    """Effluent figures of a day, mg N/L: flow-weighted daily means and the largest period mean of NH4-N."""

    nh4_mean_mg_L: float | None = None
    nh4_max_mg_L: float | None = None
    tn_mean_mg_L: float | None = None

    @classmethod
    def of(cls, figures: dict) -> EffluentFigures:
        """From compliance figures (:func:`airtaper.optimize.compliance.day_figures`) or their JSON."""
        return cls(**{f.name: figures.get(f.name) for f in dataclasses.fields(cls)})


@dataclass
class Limits:
    """The limits of a run, mg/L: effluent (None when not set) and the DO range by zone."""

    nh4_mean_mg_L: float | None = None
    nh4_max_mg_L: float | None = None
    tn_mean_mg_L: float | None = None
    do_min_mg_L: dict[str, float] = field(default_factory=dict)
    do_max_mg_L: dict[str, float] = field(default_factory=dict)

    @classmethod
    def of_plant(cls, plant: ResolvedPlant) -> Limits:
        lim = plant.limits
        return cls(lim.nh4_mean_mg_L, lim.nh4_max_mg_L, lim.tn_mean_mg_L,
                   {z.id: z.do_min_mg_L for z in plant.zones if z.do_min_mg_L is not None},
                   {z.id: z.do_max_mg_L for z in plant.zones if z.do_max_mg_L is not None})


@dataclass
class Smoothing:
    """The period-to-period airflow change term: its weight and its value at the optimum."""

    weight: float | None = None
    penalty: float | None = None




class _Unset:
    """The value of a summary part's field that the run did not write (left out of the JSON)."""

    _instance = None

    def __new__(cls):
        if cls._instance is None:
            cls._instance = super().__new__(cls)
        return cls._instance

    def __repr__(self) -> str:
        return "UNSET"

    def __bool__(self) -> bool:
        return False

    def __copy__(self):
        return self

    def __deepcopy__(self, memo):
        return self


#: A summary part's field that the run did not write (left out of ``summary.json``; None is written as null).
UNSET = _Unset()


@dataclass
class SummaryPart:
    """A nested part of ``summary.json``: its fields in the file's order, UNSET ones left out.

    :meth:`to_dict` writes the fields that are set (nested parts and figures as objects), then
    :attr:`extra`; :meth:`from_dict` reads a part back, keys it does not know going to :attr:`extra`.
    Subclasses name their nested typed fields in ``_nested``.
    """

    #: keys of the part this structure does not know (a later version's, or a computing module's new key)
    extra: dict = field(default_factory=dict, kw_only=True)

    _nested = {}

    def to_dict(self) -> dict:
        out = {}
        for f in dataclasses.fields(self):
            value = getattr(self, f.name)
            if f.name == "extra" or value is UNSET:
                continue
            out[f.name] = _plain(value)
        out.update(self.extra)
        return out

    @classmethod
    def from_dict(cls, data: dict | None):
        """The part of a dict (None stays None)."""
        if data is None or isinstance(data, cls):
            return data
        names = {f.name for f in dataclasses.fields(cls)} - {"extra"}
        kwargs = {k: _typed(cls._nested.get(k), v) for k, v in data.items() if k in names}
        return cls(**kwargs, extra={k: v for k, v in data.items() if k not in names})


def _plain(value):
    """A field's JSON value: parts and figures as objects."""
    if isinstance(value, SummaryPart):
        return value.to_dict()
    if dataclasses.is_dataclass(value):
        return dataclasses.asdict(value)
    return value


def _typed(kind, value):
    """A nested value read back as its structure (``kind`` None: as it is)."""
    if kind is None or not isinstance(value, dict):
        return value
    if issubclass(kind, SummaryPart):
        return kind.from_dict(value)
    known = {f.name for f in dataclasses.fields(kind)}
    return kind(**{k: v for k, v in value.items() if k in known})


@dataclass
class DispatchSummary(SummaryPart):
    """The blowers' dispatch of a day (:func:`airtaper.optimize.staging.dispatch_summary`): the bill split, the
    peak and per blower its running hours and starts; for the optimum the staging rounds and the swing zones,
    for the baseline the air it could not get."""

    energy_kWh_per_day: float | None = None
    energy_cost: float | None = None
    demand_charge: float | None = None
    start_costs: float | None = None
    cost_per_day: float | None = None
    peak_kW: float | None = None
    peak_period: int | None = None
    peak_period_start_h: float | None = None
    blowers: dict = field(default_factory=dict)  # blower id -> running_h, starts, out_of_service
    rounds: list = UNSET  # the staging rounds (optimum)
    converged: bool = UNSET
    stopped: str = UNSET  # why the rounds stopped
    redispatched_at_final_schedule: bool = UNSET
    swing_zones: dict = UNSET  # zone -> aerated_periods, switches
    feasibility_breaches: list = UNSET  # the post-solve check (a verified optimum only)
    shortfall: list = UNSET  # the baseline's: what the blowers could not deliver, as sentences


@dataclass
class BaselineSummary(SummaryPart):
    """The uniform-DO baseline (:meth:`airtaper.optimize.baseline.Baseline.summary`), billed by the dispatch rule
    when the blowers are staged; for the complying baseline also the optimum's saving against it."""

    control: str | None = None
    setpoint_mg_L: float | None = None
    do_setpoint_mg_L: dict | None = None
    energy_kWh_per_day: float | None = None
    cost_per_day: float | None = None
    effluent: EffluentFigures | None = None
    min_do_margin_mg_L: float | None = None
    compliant: bool | None = None
    violations: list = field(default_factory=list)
    setpoint_not_held: list = field(default_factory=list)
    simulated_days: int | None = None
    periodic: bool | None = None
    saving_percent: float | None = UNSET  # complying baseline: the optimum's saving against it
    cost_saving_percent: float | None = UNSET
    dispatch: DispatchSummary = UNSET

    _nested = {"effluent": EffluentFigures, "dispatch": DispatchSummary}


@dataclass
class VerificationSummary(SummaryPart):
    """The schedule re-simulated by the independent simulator (:func:`airtaper.optimize.verify.verify_day`),
    or ``verified`` None and ``skipped`` when it was not run."""

    verified: bool | None = None
    rule: str = UNSET
    effluent: EffluentFigures = UNSET
    optimiser_effluent: EffluentFigures = UNSET
    min_do_margin_mg_L: float | None = UNSET
    optimiser_min_do_margin_mg_L: float | None = UNSET
    do_margin_mg_L: dict = UNSET
    optimiser_do_margin_mg_L: dict = UNSET
    swing_do_margin_mg_L: dict = UNSET
    do_lowest: dict = UNSET
    do_lowest_by_period: dict = UNSET
    do_min_margin_mg_L: float | None = UNSET
    do_max_margin_mg_L: float | None = UNSET
    method: str = UNSET
    violations: list = UNSET
    energy_kWh_per_day: float | None = UNSET
    simulated_days: int | None = UNSET
    start: str = UNSET
    periodic: bool | None = UNSET
    seconds: float = UNSET
    skipped: bool = UNSET

    _nested = {"effluent": EffluentFigures, "optimiser_effluent": EffluentFigures}


@dataclass
class SolverSummary(SummaryPart):
    """Ipopt's record: the accepted result, the attempts down the retry ladder, the problem's size, its scaling
    and the timings of every phase (a run stopped by the pre-screen has only ``status`` and ``timings``)."""

    status: str | None = UNSET
    message: str | None = UNSET
    iterations: int = UNSET
    attempts: list = UNSET
    variables: int | None = UNSET
    constraints: int | None = UNSET
    scaling: dict = UNSET
    timings: dict = UNSET


@dataclass
class StudySummary:
    """``summary.json`` of ``airtaper optimize``: one field per top-level key, in the file's order.

    docs/outputs.md gives every key's unit and meaning. Figures that a run did not reach are
    None (written as null). ``baseline``, ``complying_baseline``, ``dispatch``, ``verification``
    and ``solver`` are typed parts (:class:`SummaryPart`); ``do_hold``, ``prescreen`` and the lists
    keep the shape the modules that compute them give (docs/outputs.md);
    ``report.folder.SUMMARY_SHAPE`` checks the parts the report relies on.
    """

    status: str
    plant: str
    layout: str
    objective: str
    currency: str = ""
    energy_kWh_per_day: float | None = None
    cost_per_day: float | None = None
    baseline: BaselineSummary | None = None
    saving_percent: float | None = None
    cost_saving_percent: float | None = None
    baseline_compliant: bool | None = None
    complying_baseline: BaselineSummary | None = None
    dispatch: DispatchSummary | None = None
    effluent: EffluentFigures | None = None
    min_do_margin_mg_L: float | None = None
    do_margin_mg_L: dict[str, float] | None = None
    optimiser_min_do_margin_mg_L: float | None = None
    do_hold: dict | None = None
    limits: Limits = field(default_factory=Limits)
    verification: VerificationSummary = field(default_factory=lambda: VerificationSummary(verified=None, skipped=True))
    verified: bool | None = None
    marginal_costs: list[dict] = field(default_factory=list)
    infeasibility: list[dict] = field(default_factory=list)
    prescreen: dict | None = None
    outside_tested_range: list[dict] = field(default_factory=list)
    smoothing: Smoothing | None = None
    solver: SolverSummary = field(default_factory=SolverSummary)
    messages: list[str] = field(default_factory=list)
    #: keys of a read-back file this structure does not know (provenance, later additions), in the file's order
    extra: dict = field(default_factory=dict)

    def to_dict(self) -> dict:
        """The JSON object: every field by name (nested structures as objects), then :attr:`extra`;
        numpy numbers as Python ones and non-finite numbers as null."""
        out = {}
        for f in dataclasses.fields(self):
            if f.name == "extra":
                continue
            out[f.name] = _plain(getattr(self, f.name))
        out.update(self.extra)
        return jsonable(out)

    @classmethod
    def from_dict(cls, data: dict) -> StudySummary:
        """Read a summary back (``summary.json``); unknown keys go to :attr:`extra`, missing ones take the
        defaults (None, empty)."""
        names = {f.name for f in dataclasses.fields(cls)} - {"extra"}
        kwargs = {k: _typed(_NESTED.get(k), v) for k, v in data.items() if k in names}
        for key in ("status", "plant", "layout", "objective"):
            kwargs.setdefault(key, None)
        return cls(**kwargs, extra={k: v for k, v in data.items() if k not in names})


#: Nested structures of :class:`StudySummary` by field name (read back by :meth:`StudySummary.from_dict`).
_NESTED = {"baseline": BaselineSummary, "complying_baseline": BaselineSummary, "dispatch": DispatchSummary,
           "effluent": EffluentFigures, "limits": Limits, "verification": VerificationSummary,
           "smoothing": Smoothing, "solver": SolverSummary}

#: The top-level keys of ``summary.json`` that :class:`StudySummary` defines, in the file's order.
SUMMARY_KEYS: tuple[str, ...] = tuple(f.name for f in dataclasses.fields(StudySummary) if f.name != "extra")


def jsonable(obj):
    """Plain JSON types (numpy scalars to Python, non-finite floats to None)."""
    if isinstance(obj, dict):
        return {str(k): jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [jsonable(v) for v in obj]
    if isinstance(obj, (np.floating, float)):
        v = float(obj)
        return v if np.isfinite(v) else None
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    return obj


def limit_margin(limit, value):
    """How far a figure stays inside its limit (limit - value; None when either is missing)."""
    return None if limit is None or value is None else limit - value


def summary_figures(summary: dict) -> dict:
    """The figures of one study's ``summary.json`` as one flat row: the home of every table that sets studies side
    by side (a sweep's scenarios, ``airtaper compare``'s load days)."""
    eff = summary.get("effluent") or {}
    lim = summary.get("limits") or {}
    dp = summary.get("dispatch") or {}
    base = summary.get("baseline") or {}
    timings = (summary.get("solver") or {}).get("timings") or {}
    blowers = dp.get("blowers") or {}
    status = summary.get("status")
    return {
        "status": status,
        "energy_kWh_per_day": summary.get("energy_kWh_per_day"), "cost_per_day": summary.get("cost_per_day"),
        "currency": summary.get("currency") or None,
        "energy_cost_per_day": dp.get("energy_cost"), "demand_charge_per_day": dp.get("demand_charge"),
        "start_costs_per_day": dp.get("start_costs"), "peak_kW": dp.get("peak_kW"),
        "blower_running_h": sum(b["running_h"] for b in blowers.values()) if dp else None,
        "baseline_energy_kWh_per_day": base.get("energy_kWh_per_day"), "baseline_cost_per_day": base.get("cost_per_day"),
        "saving_percent": summary.get("saving_percent"), "cost_saving_percent": summary.get("cost_saving_percent"),
        "verified": summary.get("verified"), "compliant": status == "optimal" and summary.get("verified") is not False,
        "nh4_mean_mg_L": eff.get("nh4_mean_mg_L"), "nh4_max_mg_L": eff.get("nh4_max_mg_L"),
        "tn_mean_mg_L": eff.get("tn_mean_mg_L"),
        "nh4_mean_margin_mg_L": limit_margin(lim.get("nh4_mean_mg_L"), eff.get("nh4_mean_mg_L")),
        "nh4_max_margin_mg_L": limit_margin(lim.get("nh4_max_mg_L"), eff.get("nh4_max_mg_L")),
        "tn_mean_margin_mg_L": limit_margin(lim.get("tn_mean_mg_L"), eff.get("tn_mean_mg_L")),
        "min_do_margin_mg_L": summary.get("min_do_margin_mg_L"),
        "ipopt_s": timings.get("ipopt_s"), "ipopt_cpu_s": timings.get("ipopt_cpu_s"),
        "message": "; ".join(summary.get("messages") or []) or None,
    }


__all__ = ["BaselineSummary", "DispatchSummary", "EffluentFigures", "HEADER_COLUMNS", "Limits", "SCHEDULE_COLUMNS",
           "SUMMARY_KEYS", "Smoothing", "SolverSummary", "StudySummary", "SummaryPart", "TIMESERIES_COLUMNS", "UNSET",
           "VerificationSummary", "empty_tables", "jsonable", "limit_margin", "study_tables", "summary_figures"]
