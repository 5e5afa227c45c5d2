"""Daily figures of a simulated periodic day: effluent, DO, airflow, oxygen and blower energy.

Means over the day integrate the simulated day: Gauss-Legendre quadrature of the
solver's dense output on every solver step (:class:`airtaper.simulate.run.DayQuadrature`).
Effluent means are flow-weighted (by the effluent flow); effluent maxima are the
largest value at a quadrature node or output step; the lowest and highest DO of a
zone are over continuous time (:func:`airtaper.simulate.run.do_extremes`).

A DO-controlled zone whose DO stays more than :data:`SETPOINT_TOLERANCE_mg_L` below
its setpoint (the control clamps at the zone's maximum airflow and the zone runs at
full air) is reported by :func:`setpoint_shortfalls`, with the hours.

Blower energy: the plant's one power chain at each quadrature node
(:meth:`airtaper.plant.AirSide.step_power_kW`: the header pressure by the
most-open-valve rule over the zones receiving air, the main header loss at the
discharge, the isentropic power at the aggregate wire-to-air efficiency).
"""

from __future__ import annotations

import warnings


from airtaper.units import HOURS_PER_DAY, clock

#: A DO-controlled zone counts as not holding its setpoint when its DO falls more than
#: this below it. Ideal control follows the setpoint within a 1-minute time constant,
#: so only a zone at its airflow limit misses by this much; common practice (no source).
SETPOINT_TOLERANCE_mg_L = 0.05

_EFFLUENT_KEYS = ("SNH", "SNO", "tkn_mg_L", "tn_mg_L", "cod_mg_L", "tss_mg_L", "SS", "SO")


def period_runs(periods, n_periods: int | None = None) -> list[list[int]]:
    """Consecutive (0- or 1-based) period numbers grouped into runs, sorted.

    With ``n_periods`` the day is cyclic: a run ending at the last period and one
    starting at the first (0 or 1) are one run through midnight, listed first.
    """
    runs: list[list[int]] = []
    for k in sorted(set(periods)):
        if runs and k == runs[-1][-1] + 1:
            runs[-1].append(k)
        else:
            runs.append([k])
    if n_periods is not None and len(runs) > 1:
        first = min(runs[0][0], 1)
        if runs[0][0] == first and runs[-1][-1] == first + n_periods - 1:
            runs[0] = runs.pop() + runs[0]
    return runs


def span_text(runs_with_sizes, period_h: float) -> str:
    """``"0.41 mg/L 09:00-14:00, 0.2 mg/L 22:00-01:00"`` from ``[(run of 0-based periods, size text)]``."""
    return ", ".join(f"{size} {clock(r[0] * period_h)}-{clock((r[-1] + 1) * period_h)}"
                     for r, size in runs_with_sizes)


def setpoint_shortfalls(plant, extremes, setpoints_mg_L: dict) -> list:
    """Spans of periods in which a DO-controlled zone stays below its setpoint.

    ``extremes``: :func:`airtaper.simulate.run.do_extremes`; ``setpoints_mg_L``: zone
    id -> setpoint. One entry per zone and run of consecutive periods (around
    midnight too): ``zone``, ``setpoint_mg_L``, ``start_h``, ``end_h``,
    ``do_min_mg_L`` (the lowest DO of the span) and a ``message``.
    """
    period_h = plant.horizon.period_h  # the resolved plant's horizon (a Layout's is the same object)
    n = plant.horizon.n_periods
    out = []
    for zid, sp in setpoints_mg_L.items():
        g = extremes[extremes["zone"] == zid].sort_values("period")
        low = g["do_min_mg_L"].to_numpy()
        runs = period_runs([k for k in range(n) if low[k] < sp - SETPOINT_TOLERANCE_mg_L], n)
        for r in runs:
            start, end = r[0] * period_h, (r[-1] + 1) * period_h
            lowest = float(low[r].min())
            out.append({"zone": zid, "setpoint_mg_L": float(sp), "start_h": start, "end_h": end,
                        "do_min_mg_L": lowest,
                        "message": f"zone {zid} cannot hold its DO setpoint of {sp:g} mg/L "
                                   f"{clock(start)}-{clock(end)}: at full air its DO falls to {lowest:.2f} mg/L"})
    return out


def summarize(result) -> dict:
    """JSON-ready summary of a :class:`~airtaper.simulate.run.PeriodicResult`."""
    plant = result.plant
    eff = result.effluent
    quad, ex = result.quadrature, result.do_extremes
    zone_ids = list(plant.zone_ids)
    qe = quad.effluent
    effluent = {}
    for key in _EFFLUENT_KEYS:
        effluent[key] = {"mean": quad.mean(qe[key], flow_weighted=True),
                         "max": float(max(qe[key].max(), eff[key].max()))}
    w = quad.weight
    air = plant.air
    with warnings.catch_warnings():  # curve extrapolation is reported where the airflow is chosen
        warnings.simplefilter("ignore")
        power = air.step_power_kW({zid: quad.airflow_Sm3_h[:, i] for i, zid in enumerate(zone_ids)}, quad.period)
    zones = {}
    for i, zid in enumerate(zone_ids):
        e = ex[ex["zone"] == zid]
        j = int(e["do_min_mg_L"].to_numpy().argmin())
        zones[zid] = {
            "do_min_mg_L": float(e["do_min_mg_L"].iloc[j]),
            "do_min_time_h": float(e["do_min_time_h"].iloc[j]),
            "do_max_mg_L": float(e["do_max_mg_L"].max()),
            "do_mean_mg_L": float(w @ quad.do[:, i]),
            "airflow_mean_Sm3_h": float(w @ quad.airflow_Sm3_h[:, i]),
            "air_Sm3_per_day": float(HOURS_PER_DAY * w @ quad.airflow_Sm3_h[:, i]),
            "oxygen_kg_per_day": float(HOURS_PER_DAY * w @ quad.otr_kg_h[:, i]),
        }
    shortfalls = setpoint_shortfalls(plant, ex, result.setpoints_mg_L)
    return {
        "plant": plant.name,
        "layout": plant.path,
        "days_simulated": int(result.days),
        "periodic": bool(result.converged),
        "day_change": float(result.day_change),
        "seconds": float(result.seconds),
        "means": "integrated over the day (Gauss-Legendre quadrature of the solver's dense output)",
        "effluent_mg_L": effluent,
        "srt_d": {"mean": float(w @ qe["srt_d"].to_numpy()), "min": float(qe["srt_d"].min()),
                  "max": float(qe["srt_d"].max())},
        "waste_m3_per_day": float(w @ qe["q_waste_m3_d"].to_numpy()),
        "zones": zones,
        "do_setpoint_mg_L": dict(result.setpoints_mg_L),
        "setpoint_not_held": shortfalls,
        "air_Sm3_per_day": float(HOURS_PER_DAY * w @ quad.airflow_Sm3_h.sum(axis=1)),
        "oxygen_kg_per_day": float(HOURS_PER_DAY * w @ quad.otr_kg_h.sum(axis=1)),
        "blower_kWh_per_day": float(HOURS_PER_DAY * w @ power),
        "blower_kW_max": float(power.max()) if power.size else 0.0,
        "balance": {k: float(v) for k, v in result.balance.items()},
    }
