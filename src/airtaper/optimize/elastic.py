"""Elastic solve: which limit cannot be met, where, when and by how much.

Every limit of :mod:`airtaper.optimize.problem` carries a slack variable, fixed at
zero in a normal solve. The elastic solve frees them and minimises::

    objective + sum_groups  w_group  sum_index  slack

(an exact L1 penalty: with weights above the limits' duals the slacks stay at zero
wherever the limits can be met). Equipment limits (airflow per diffuser, mixing,
valve, blower capacity, turndown and pressure) have slack in fractions of the limit
(kPa for the pressure) and weight :data:`EQUIPMENT_WEIGHT`; process limits (DO range,
effluent limits) have slack in mg/L and weight :data:`PROCESS_WEIGHT`, ten times
higher, so the solve first asks for more hardware and only then lets a process
limit go: the findings read "zone Z2 needs 14 % more air than its diffusers pass,
10:00-12:00". DO slacks are per time point, their weight times the point's share
of the day x 24 (so an hour of shortfall costs the same at any resolution).

Oxygen carried by recycles: left alone, the elastic optimum may over-aerate other
zones (DO up to 7.8 mg/L was seen) so that the internal recycle and return sludge
carry oxygen to a zone that is short, which sizes the shortfall wrongly and adds
findings (blower capacity, pressure) that vanish at normal DO. The elastic objective
therefore also penalises every aerated zone's DO above its normal level (the
baseline's uniform setpoint, or the zone's DO minimum if higher) with the process
weight per mg/L and hour (:data:`EXCESS_DO_WEIGHT`): a mg/L carried downstream
then costs at least what it could save in the short zone, where the recycles dilute
it. The findings read as at normal DO elsewhere.

:func:`findings` groups slacks above :data:`REPORT_THRESHOLD` per limit and zone,
with every run of consecutive periods (or steps) as a span of its own size.

Findings a known schedule contradicts: the elastic solve is a local optimum. On the
calibrated demo on 1-hour steps it reported "the effluent NH4-N daily mean ... stays
0.34 mg/L above" although a plain solve of the same limits had converged feasible.
When a schedule is known (a converged solve's, re-simulated by the independent
simulator: :class:`KnownSchedule`), :func:`check_findings` sets each finding beside
it: a finding whose limit that schedule meets (within the verification's tolerance,
in the finding's own hours) while the finding says it must give is dropped when the
schedule meets every limit (it is verified: the finding is false), and otherwise
kept with the trade named (the known schedule meets this limit by breaking others:
with blower B3 out the coarse schedule met the blowers' turndown at night while
zone Z6's DO left its maximum). Starting the elastic solve from that schedule
instead of the baseline was tried: on the demo with B3 out it gave the same
findings in 71 iterations against 40.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import pyomo.environ as pyo

from airtaper import units
from airtaper.units import clock
from airtaper.optimize.problem import active_limit_groups, fix_slacks, free_slacks, point_weights

#: Penalty per unit slack (fraction of the limit, or kPa) of equipment limits, in
#: objective units (the objective is about 1 at the baseline).
EQUIPMENT_WEIGHT = 100.0
#: Penalty per mg/L of slack of process limits (DO per hour of shortfall, effluent limits).
PROCESS_WEIGHT = 1000.0
#: Penalty per mg/L and hour of DO above a zone's normal level in the elastic solve.
EXCESS_DO_WEIGHT = PROCESS_WEIGHT
#: Slacks below these are read as zero (numerical noise of the solve).
REPORT_THRESHOLD = {"fraction": 1e-3, "mg/L": 2e-3, "kPa": 1e-2}


def _weights(m, group, slack) -> dict:
    """Penalty weight of every slack of a group; DO slacks by their time weight (per hour of shortfall)."""
    w = PROCESS_WEIGHT if group.kind == "process" else EQUIPMENT_WEIGHT
    if group.index == "zone_step":
        pw = point_weights(m)
        return {k: w * units.HOURS_PER_DAY * pw[k[0]] for k in slack}
    return {k: w for k in slack}


def normal_do_mg_L(layout) -> dict:
    """Zone id -> the DO above which the elastic solve penalises (module notes)."""
    from airtaper.optimize.baseline import baseline_setpoints

    return {z: max(sp, layout.zone(z).do_min_mg_L or 0.0) for z, sp in baseline_setpoints(layout).items()}


def enter_elastic(m) -> None:
    """Free the slacks and switch to the penalised objective (with the excess-DO penalty)."""
    b = m.opt
    free_slacks(b)
    terms = []
    for g, slack in active_limit_groups(b):
        w = _weights(m, g, slack)
        terms.extend(w[k] * v for k, v in slack.items())
    normal = {z: v for z, v in normal_do_mg_L(m.train_data.plant.layout).items() if z in b.ZONES}
    for name in ("elastic_do_excess_def", "elastic_do_excess", "ELASTIC_DO_ZONES"):
        if b.component(name) is not None:
            b.del_component(name)
    b.ELASTIC_DO_ZONES = pyo.Set(initialize=list(normal), ordered=True)
    b.elastic_do_excess = pyo.Var(m.STEPS, b.ELASTIC_DO_ZONES, bounds=(0.0, None), initialize=lambda b, t, z: max(
        0.0, float(m.conc[t, z, "SO"].value or 0.0) - normal[z]))
    b.elastic_do_excess_def = pyo.Constraint(m.STEPS, b.ELASTIC_DO_ZONES, rule=lambda b, t, z: (
        b.elastic_do_excess[t, z] >= m.conc[t, z, "SO"] - normal[z]))
    pw = point_weights(m)
    terms.extend(EXCESS_DO_WEIGHT * units.HOURS_PER_DAY * pw[t] * b.elastic_do_excess[t, z]
                 for t in m.STEPS for z in normal)
    if b.component("elastic_objective") is not None:
        b.del_component("elastic_objective")
    b.elastic_objective = pyo.Objective(expr=b.objective.expr + sum(terms), sense=pyo.minimize)
    suffix = m.component("scaling_factor")
    if suffix is not None and b.objective in suffix:
        suffix[b.elastic_objective] = suffix[b.objective]
    b.objective.deactivate()


def leave_elastic(m) -> None:
    """Back to the normal problem: slacks fixed at zero, the normal objective."""
    b = m.opt
    fix_slacks(b)
    for name in ("elastic_objective", "elastic_do_excess_def", "elastic_do_excess", "ELASTIC_DO_ZONES"):
        if b.component(name) is not None:
            b.del_component(name)
    b.objective.activate()


def _runs(keys: list[int]) -> list[tuple[int, int]]:
    """Consecutive integer keys as (first, last) runs."""
    runs = []
    for k in sorted(keys):
        if runs and k == runs[-1][1] + 1:
            runs[-1] = (runs[-1][0], k)
        else:
            runs.append((k, k))
    return runs


def _amount(unit: str, value: float) -> str:
    if unit == "fraction":
        return f"{100.0 * value:.0f} %"
    if unit == "kPa":
        return f"{value:.1f} kPa"
    return f"{value:.2f} mg/L"


def _sentence(group, zone, amount: str, limit_value) -> str:
    n = group.name
    if n == "diffuser_max":
        return f"zone {zone} needs {amount} more air than its diffusers pass"
    if n == "valve_max":
        return f"zone {zone} needs {amount} more air than its valve and drop leg pass"
    if n == "diffuser_min":
        return f"zone {zone} needs {amount} less air than its diffusers' minimum airflow"
    if n == "mixing_min":
        return f"zone {zone} needs {amount} less air than the mixing minimum"
    if n == "blower_max":
        return f"the blowers need {amount} more capacity than installed"
    if n == "blower_min":
        return f"the blowers need {amount} more turndown than the smallest machine has"
    if n == "pressure_max":
        return f"the blowers need {amount} more discharge pressure than their limit"
    if n == "do_min":
        return f"zone {zone} cannot hold its DO minimum of {limit_value:g} mg/L: short by up to {amount}"
    if n == "do_max":
        return f"zone {zone} cannot stay below its DO maximum of {limit_value:g} mg/L: over by up to {amount}"
    if n == "nh4_mean":
        return f"the effluent NH4-N daily mean cannot meet {limit_value:g} mg/L: it stays {amount} above"
    if n == "nh4_max":
        return f"the effluent NH4-N period mean exceeds {limit_value:g} mg/L by up to {amount}"
    if n == "tn_mean":
        return f"the effluent TN daily mean cannot meet {limit_value:g} mg/L: it stays {amount} above"
    return f"{group.text}: relaxed by {amount}"  # pragma: no cover - every group is worded above


def findings(m) -> list[dict]:
    """The limits the elastic solution relaxes: one dict per limit and zone.

    ``amount`` is the largest relaxation; ``spans`` lists every run of time
    (``start_h``, ``end_h``, ``amount``, ``unit``), each with its own largest relaxation.
    """
    b = m.opt
    period_h = m.train_data.period_h
    step_h = m.step_hours
    out = []
    for g, slack in active_limit_groups(b):
        tol = REPORT_THRESHOLD[g.unit]
        hits = {k: float(v.value) for k, v in slack.items() if v.value is not None and v.value > tol}
        if not hits:
            continue
        if g.index == "scalar":
            groups = {None: {0: hits[None]}}
        elif g.index == "period":
            groups = {None: hits}
        elif g.index == "zone_period":
            groups = {}
            for (z, p), v in hits.items():
                groups.setdefault(z, {})[p] = v
        else:  # zone_step
            groups = {}
            for (t, z), v in hits.items():
                groups.setdefault(z, {})[t] = v
        for zone, values in groups.items():
            limit_value = _limit_value(b, g, zone)
            spans = []
            for first, last in _runs(list(values)):
                amount = max(values[k] for k in range(first, last + 1))
                if g.index == "scalar":
                    start, end = 0.0, units.HOURS_PER_DAY
                elif g.index == "zone_step":
                    k = m.points_per_step
                    start, end = ((first - 1) // k) * step_h, ((last - 1) // k + 1) * step_h
                else:
                    start, end = (first - 1) * period_h, last * period_h
                spans.append({"start_h": start, "end_h": end, "amount": amount})
            spans = _wrap_midnight(_merge_touching(spans))
            largest = max(spans, key=lambda sp: sp["amount"])
            text = _sentence(g, zone, _amount(g.unit, largest["amount"]), limit_value)
            if g.index != "scalar" and len(spans) == 1:
                text += f", {clock(spans[0]['start_h'])}-{clock(spans[0]['end_h'])}"
            elif g.index != "scalar":
                text += ": " + ", ".join(f"{_amount(g.unit, sp['amount'])} {clock(sp['start_h'])}-"
                                         f"{clock(sp['end_h'])}" for sp in spans)
            out.append({"limit": g.name, "zone": zone, "amount": largest["amount"], "unit": g.unit,
                        "spans": [dict(sp, unit=g.unit) for sp in spans], "message": text})
    return out


def _merge_touching(spans: list[dict]) -> list[dict]:
    """Spans that touch (steps of one run map to adjoining hours) joined, the larger amount kept."""
    out = []
    for sp in sorted(spans, key=lambda s: s["start_h"]):
        if out and sp["start_h"] <= out[-1]["end_h"] + 1e-9:
            out[-1] = {"start_h": out[-1]["start_h"], "end_h": max(out[-1]["end_h"], sp["end_h"]),
                       "amount": max(out[-1]["amount"], sp["amount"])}
        else:
            out.append(dict(sp))
    return out


def _wrap_midnight(spans: list[dict]) -> list[dict]:
    """A span ending at 24:00 and one starting at 00:00 are one span through midnight (listed first)."""
    if len(spans) > 1 and spans[0]["start_h"] <= 1e-9 and spans[-1]["end_h"] >= units.HOURS_PER_DAY - 1e-9:
        last = spans.pop()
        spans[0] = {"start_h": last["start_h"], "end_h": spans[0]["end_h"],
                    "amount": max(last["amount"], spans[0]["amount"])}
    return spans


def _limit_value(b, g, zone):
    if g.name == "do_min":
        return pyo.value(b.do_min_mg_L[zone])
    if g.name == "do_max":
        return pyo.value(b.do_max_mg_L[zone])
    if g.name == "nh4_mean":
        return pyo.value(b.nh4_mean_limit)
    if g.name == "nh4_max":
        return pyo.value(b.nh4_max_limit)
    if g.name == "tn_mean":
        return pyo.value(b.tn_mean_limit)
    return None


@dataclass
class KnownSchedule:
    """A schedule a converged solve gave, re-simulated: what findings are checked against (module notes).

    ``day``: its re-simulated :class:`~airtaper.optimize.simday.SimDay` (DO extremes and effluent figures per
    period); ``verified`` and ``violations``: its verification (:func:`airtaper.optimize.verify.verify_day`);
    ``meets_equipment``: every machine and grid limit holds on it (a converged solve of the same limits: they
    are per period and do not depend on the model's step).
    """

    label: str
    day: object
    verified: bool
    violations: list = field(default_factory=list)
    meets_equipment: bool = True


#: Process limits (mg/L): the others are equipment limits.
PROCESS_LIMITS = ("do_min", "do_max", "nh4_mean", "nh4_max", "tn_mean")


def _span_periods(span: dict, period_h: float, n_periods: int) -> list[int]:
    """0-based periods a finding's span (``start_h``, ``end_h``; through midnight when start >= end) touches."""
    start, end = span["start_h"], span["end_h"]
    if end <= start + 1e-9:  # through midnight
        end += units.HOURS_PER_DAY
    first = int(start / period_h + 1e-9)
    last = int(-(-(end / period_h - 1e-9) // 1))  # ceil
    return sorted({k % n_periods for k in range(first, max(last, first + 1))})


def known_excess(plant, finding: dict, known: KnownSchedule) -> tuple[float, float]:
    """(how far the known schedule leaves the finding's limit in the finding's hours, in the finding's unit;
    the verification's tolerance for that limit). Negative or zero: it meets the limit there."""
    from airtaper.optimize.compliance import DO_TOLERANCE_mg_L, EFFLUENT_TOLERANCE

    name = finding["limit"]
    if name not in PROCESS_LIMITS:
        return (0.0 if known.meets_equipment else float("inf")), REPORT_THRESHOLD[finding["unit"]]
    day = known.day
    n, period_h = plant.n_periods, plant.period_h
    periods = sorted({p for sp in finding["spans"] for p in _span_periods(sp, period_h, n)})
    if name in ("do_min", "do_max"):
        zone = plant.zone(finding["zone"])
        ex = day.do_extremes
        rows = ex[(ex.zone == finding["zone"]) & ex.period.isin(periods)]
        if not len(rows):
            return float("inf"), DO_TOLERANCE_mg_L
        if name == "do_min":
            return float(zone.do_min_mg_L - rows.do_min_mg_L.min()), DO_TOLERANCE_mg_L
        return float(rows.do_max_mg_L.max() - zone.do_max_mg_L), DO_TOLERANCE_mg_L
    lim = plant.limits
    limit = {"nh4_mean": lim.nh4_mean_mg_L, "nh4_max": lim.nh4_max_mg_L, "tn_mean": lim.tn_mean_mg_L}[name]
    f = day.figures
    if name == "nh4_max":
        value = max(f["nh4_period_mean_mg_L"][p] for p in periods)
    else:
        value = f[f"{name}_mg_L"]
    return float(value - limit), EFFLUENT_TOLERANCE * limit


def check_findings(plant, found: list[dict], known: KnownSchedule | None) -> tuple[list[dict], list[dict]]:
    """(findings kept, findings dropped) against a known schedule (module notes).

    A finding is contradicted where the known schedule leaves its limit by no more than the verification's
    tolerance and by less than the finding's amount. Contradicted by a verified schedule: dropped (with
    ``contradicted_by``); by one that breaks other limits: kept, with ``trade_with`` (those limits;
    :func:`trade_message` says it once for all). Without a known schedule every finding is kept as it is.
    """
    if known is None:
        return list(found), []
    kept, dropped = [], []
    for f in found:
        excess, tol = known_excess(plant, f, known)
        if not (excess <= tol and excess < f["amount"]):
            kept.append(f)
        elif known.verified:
            dropped.append(dict(f, contradicted_by=known.label))
        else:
            kept.append(dict(f, trade_with=list(known.violations)))
    return kept, dropped


def limit_names(found: list[dict]) -> str:
    """The findings' limits in words ("DO minimum of zone Z2, blower turndown")."""
    from airtaper.optimize.problem import LIMIT_GROUPS

    text = {g.name: g.text for g in LIMIT_GROUPS}
    return ", ".join(text.get(f["limit"], f["limit"]) + (f" of zone {f['zone']}" if f["zone"] else "") for f in found)


def trade_message(kept: list[dict], known: KnownSchedule | None) -> str | None:
    """One sentence for the findings :func:`check_findings` kept as trades between limits (None: there are none)."""
    trades = [f for f in kept if "trade_with" in f]
    if not trades:
        return None
    names = limit_names(trades)
    named = "; ".join(known.violations)  # all of them: with B3 out the largest (Z6's maximum) came last of five
    return (f"a trade between limits, not each a limit that cannot be met: {known.label} meets the {names} "
            f"in those findings' hours, breaking {named or 'other limits'}")


__all__ = ["EQUIPMENT_WEIGHT", "PROCESS_LIMITS", "PROCESS_WEIGHT", "REPORT_THRESHOLD", "KnownSchedule",
           "check_findings", "enter_elastic", "findings", "known_excess", "leave_elastic", "limit_names",
           "trade_message"]
