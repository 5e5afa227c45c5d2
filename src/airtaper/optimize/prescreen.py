"""Pre-screen: limits that surely cannot be met, found in seconds without an optimisation.

:func:`prescreen` runs before the optimisation (``airtaper optimize``) and in
``airtaper check``. It needs no NLP solve; it bounds what any schedule can do:

Equipment (arithmetic on the resolved plant)
    * a zone whose minimum airflow (diffusers' minimum, mixing) exceeds its maximum
      (diffusers' maximum, valve);
    * the blowers' installed capacity against the sum of the zones' minimum airflows;
    * the smallest blower's minimum against the sum of the zones' maximum airflows;
    * the blowers' pressure limit against the discharge pressure the zones need at
      their *minimum* airflows (static head, diffuser headloss, drop leg, valve,
      header).

Oxygen (a simulated day with every grid at its maximum airflow all day, the first
day from the steady state at mean load and full air, :data:`FULL_AIR_DAYS`)
    Every zone gets the most oxygen its grid can transfer, the oxygen demand of the
    day's load is the simulated plant's own uptake, and more air raises the DO of
    every zone and lowers the effluent NH4-N (common practice (no source)), so:

    * a zone whose DO falls below its minimum (by more than the verification's DO
      tolerance) even at full air cannot hold it with any schedule: the finding lists
      every span of periods with its own shortfall (mg/L) and a lower bound of the
      extra oxygen transfer it needs,
      ``(DO_min - DO_low) / (C* - DO_min)`` (the transfer at full air is
      ``kLa_max (C* - DO)``, and the uptake at the minimum DO is not lower than at
      the lower DO the day reached);
    * an effluent NH4-N daily mean, or period means, above the limit (beyond the
      verification's tolerance) even at full air cannot be met. When a layered
      clarifier cannot hold the target sludge age at full air (its effluent alone
      carries off solids faster than the sludge age allows, so none is wasted:
      :meth:`airtaper.simulate.system.System.clarifier_profile`), the finding says so:
      that is why the nitrifiers fall short, not the air (on the robustness
      benchmark's plant 3 the finding read "even with every grid at its maximum
      airflow" at a DO margin of 1.65 mg/L, with the sludge age at 3.4 d against 8.4 d). With a
      fixed waste flow there is no target to miss, but the solids over the weir shorten the
      sludge age all the same: the finding gives the sludge age at full air, the effluent's
      solids and their share of the solids leaving the plant, and the overload if there is
      one (the benchmark's plant 1 read as if only the air fell short: its overloaded
      clarifier's effluent took 30 % of the solids, leaving an 11.4 d sludge age).

    The TN limit is not screened: more air can raise TN (less denitrification).

This is a relaxation (the blowers may not even deliver full air everywhere), so a
finding is certain; a layout that passes can still prove infeasible in the solve,
where the elastic solve (:mod:`airtaper.optimize.elastic`) sizes it.

:func:`outside_tested_range` flags airflow per diffuser outside the range of a
diffuser type's clean-water test points (where its SOTE curve is extrapolated),
for any schedule or simulated day.
"""

from __future__ import annotations

import time

import numpy as np

from airtaper import units
from airtaper.layout.types import Layout
from airtaper.optimize.compliance import DO_TOLERANCE_mg_L, EFFLUENT_TOLERANCE
from airtaper.plant import ResolvedPlant, resolve_plant
from airtaper.simulate.aeration import zone_transfer
from airtaper.simulate.steady import SteadyStateError
from airtaper.simulate.summary import period_runs, span_text


#: Days simulated at full air: one day from the full-air steady state at mean load.
#: On the demo the periodic day (4 days) differs from the first by 0.005 mg/L of DO
#: and 0.6 % of the NH4-N means, well inside the tolerances the findings use.
FULL_AIR_DAYS = 1


def _grid_zones(plant: ResolvedPlant):
    """The zones with a diffuser grid (:class:`~airtaper.plant.DiffusedZone`), in train order."""
    return list(plant.diffused)


def _finding(limit, zone, spans, message) -> dict:
    return {"limit": limit, "zone": zone, "spans": spans, "message": message, "source": "pre-screen"}


def _all_day(amount: float, unit: str) -> list[dict]:
    return [{"start_h": 0.0, "end_h": units.HOURS_PER_DAY, "amount": float(amount), "unit": unit}]


def equipment_findings(plant: ResolvedPlant | Layout) -> list[dict]:
    """Equipment limits no schedule can meet (module notes), as findings; a layout is resolved first."""
    plant = resolve_plant(plant)
    out = []
    zones = _grid_zones(plant)
    if not zones:
        return out
    ranges = {z.id: z.airflow_range_Sm3_h for z in zones}
    for z in zones:
        lo, hi = ranges[z.id]
        if lo > hi * (1.0 + 1e-9):
            out.append(_finding("zone_range", z.id, _all_day(lo / hi - 1.0, "fraction"),
                                f"zone {z.id}: its minimum airflow ({lo:,.0f} Sm3/h, diffusers' minimum or mixing) "
                                f"exceeds its maximum ({hi:,.0f} Sm3/h, diffusers or valve) by "
                                f"{100.0 * (lo / hi - 1.0):.0f} %"))
    if not plant.blowers:
        return out
    air = plant.air
    lo_total = sum(r[0] for r in ranges.values())
    hi_total = sum(r[1] for r in ranges.values())
    cap, turndown = air.blower_capacity_Sm3_h, air.blower_turndown_Sm3_h
    if lo_total > cap * (1.0 + 1e-9):
        out.append(_finding("blower_max", None, _all_day(lo_total / cap - 1.0, "fraction"),
                            f"the blowers ({cap:,.0f} Sm3/h installed) cannot supply even the zones' minimum "
                            f"airflows ({lo_total:,.0f} Sm3/h): {100.0 * (lo_total / cap - 1.0):.0f} % short"))
    if turndown > hi_total * (1.0 + 1e-9):
        out.append(_finding("blower_min", None, _all_day(turndown / hi_total - 1.0, "fraction"),
                            f"the smallest blower's minimum ({turndown:,.0f} Sm3/h) exceeds what the grids take at "
                            f"their maximum ({hi_total:,.0f} Sm3/h)"))
    need = max(float(air.zone_required_pressure_gauge_kPa(z, max(ranges[z.id][0], 1e-9))) for z in zones)
    need = float(air.discharge_gauge_kPa(need + air.header.min_valve_loss_kPa, lo_total))
    if need > air.blower_pressure_max_kPa + 1e-9:
        short = need - air.blower_pressure_max_kPa
        out.append(_finding("pressure_max", None, _all_day(short, "kPa"),
                            f"the blowers reach {air.blower_pressure_max_kPa:g} kPa gauge, but the zones need "
                            f"{need:.1f} kPa even at their minimum airflows ({short:.1f} kPa short)"))
    return out


def full_air_findings(plant: ResolvedPlant | Layout, day) -> list[dict]:
    """Process limits the full-air day (``day``, a SimDay) breaks (module notes), as findings; a layout is
    resolved first."""
    plant = resolve_plant(plant)
    out = []
    period_h = plant.period_h
    n = plant.n_periods
    lows = day.do_min_by_period()
    for dz in _grid_zones(plant):
        z = dz.zone
        if z.kind != "aerated" or z.do_min_mg_L is None:
            continue
        low = lows[z.id]
        bad = [k for k in range(n) if low[k] < z.do_min_mg_L - DO_TOLERANCE_mg_L]
        if not bad:
            continue
        _, hi = dz.airflow_range_Sm3_h
        spans, texts = [], []
        for r in period_runs(bad, n):
            short = float(max(z.do_min_mg_L - low[k] for k in r))
            oxygen = max(_oxygen_shortfall(plant, dz, hi, k, float(low[k])) for k in r)
            spans.append({"start_h": r[0] * period_h, "end_h": (r[-1] + 1) * period_h, "amount": short,
                          "unit": "mg/L", "oxygen_fraction": oxygen})
            texts.append((r, f"{short:.2f} mg/L short (at least {100.0 * oxygen:.0f} % more oxygen)"))
        out.append(_finding("do_min", z.id, spans,
                            f"zone {z.id} cannot hold its DO minimum of {z.do_min_mg_L:g} mg/L even with its grid at "
                            f"its maximum airflow ({hi:,.0f} Sm3/h): " + span_text(texts, period_h)))
    lim = plant.limits
    f = day.figures
    why = _clarifier_cause(day)
    if lim.nh4_mean_mg_L is not None and f["nh4_mean_mg_L"] > lim.nh4_mean_mg_L * (1.0 + EFFLUENT_TOLERANCE):
        v = f["nh4_mean_mg_L"]
        out.append(_finding("nh4_mean", None, _all_day(v - lim.nh4_mean_mg_L, "mg/L"),
                            f"the effluent NH4-N daily mean is {v:.2f} mg/L even with every grid at its maximum "
                            f"airflow, above the limit of {lim.nh4_mean_mg_L:g} mg/L" + why))
    if lim.nh4_max_mg_L is not None:
        per = np.asarray(f["nh4_period_mean_mg_L"])
        bad = [k for k in range(n) if per[k] > lim.nh4_max_mg_L * (1.0 + EFFLUENT_TOLERANCE)]
        if bad:
            spans, texts = [], []
            for r in period_runs(bad, n):
                over = float(max(per[k] for k in r) - lim.nh4_max_mg_L)
                spans.append({"start_h": r[0] * period_h, "end_h": (r[-1] + 1) * period_h, "amount": over,
                              "unit": "mg/L"})
                texts.append((r, f"{over:.2f} mg/L over"))
            out.append(_finding("nh4_max", None, spans,
                                f"the effluent NH4-N period mean exceeds {lim.nh4_max_mg_L:g} mg/L even with every "
                                "grid at its maximum airflow: " + span_text(texts, period_h) + why))
    return out


def _clarifier_cause(day) -> str:
    """What the layered clarifier adds to an NH4-N finding at full air (module notes); '' for an ideal
    separator or a target sludge age the clarifier holds."""
    check = day.extra.get("start_clarifier")
    if not check:
        return ""
    if not check["srt_held"]:
        return ("; the cause is the clarifier, not the air: it cannot hold the target sludge age ("
                + check["message"] + ")")
    if check["srt_target_d"] is None:  # a fixed waste flow: the solids over the weir shorten the sludge age
        return (f"; at full air the sludge age is {check['srt_d']:.3g} d, and the clarifier's effluent carries "
                f"{check['effluent_tss_g_m3']:.0f} g/m3 of solids, {100.0 * check['effluent_solids_share']:.0f} % of "
                "the solids leaving the plant" + (f" ({check['message']})" if check["overloaded"] else ""))
    return ""


def _oxygen_shortfall(plant: ResolvedPlant, zone, airflow_Sm3_h: float, period: int, do_low_mg_L: float) -> float:
    """Lower bound of the extra oxygen transfer a zone (:class:`~airtaper.plant.DiffusedZone`) needs, as a
    fraction (module notes)."""
    _, sat = zone_transfer(plant, zone.index, airflow_Sm3_h, plant.temperature_C[period])
    c_star = float(np.asarray(sat))
    do_min = zone.zone.do_min_mg_L
    return max(0.0, (do_min - do_low_mg_L) / max(c_star - do_min, 1e-9))


def prescreen(plant: ResolvedPlant | Layout, *, simulate: bool = True) -> dict:
    """Equipment and full-air findings (module notes).

    Returns ``{"feasible": no finding, "findings": [...], "seconds", "full_air": figures
    of the full-air day or None}``; each finding has ``limit``, ``zone``, ``spans``
    (``start_h``, ``end_h``, ``amount``, ``unit``: every span with its own size) and a
    ``message``.
    """
    from airtaper.optimize.simday import simulate_day

    t0 = time.perf_counter()
    plant = resolve_plant(plant)
    findings = equipment_findings(plant)
    full = None
    zones = _grid_zones(plant)
    note = None
    if simulate and zones and not any(f["limit"] == "zone_range" for f in findings):
        schedule = {z.id: z.airflow_range_Sm3_h[1] for z in zones}
        try:
            day = simulate_day(plant, schedule=schedule, max_days=FULL_AIR_DAYS)
        except (SteadyStateError, RuntimeError, ArithmeticError, ValueError) as exc:
            # a screen, not a verdict: without the full-air day only the equipment bounds speak
            note = f"the full-air day could not be simulated ({exc}); only the equipment bounds were screened"
        else:
            findings.extend(full_air_findings(plant, day))
            full = {k: day.figures[k] for k in ("nh4_mean_mg_L", "nh4_max_mg_L", "tn_mean_mg_L",
                                                "min_do_margin_mg_L")}
    return {"feasible": not findings, "findings": findings, "seconds": time.perf_counter() - t0, "full_air": full,
            "note": note}


def count_range_findings(plant: ResolvedPlant | Layout, lowest: dict[str, int], highest: dict[str, int]) -> dict:
    """Limits of one day (a load day's plant) that no diffuser grid between the counts ``lowest`` and ``highest``
    (zone -> count: a design's ranges) can meet, found by two simulated days without an optimisation.

    * Full air on the grid ``highest``: the most oxygen any grid of the range transfers (more diffusers pass more
      air, at a higher transfer efficiency per diffuser): a DO minimum or an NH4-N limit missed there
      (:func:`full_air_findings`) is missed by every grid of the range.
    * Least air on the grid ``lowest``: every zone's DO held at its minimum by the simulator's DO control, its
      air no lower than the grid's minimum (its diffusers' minimum or its mixing minimum, whichever is higher,
      both lowest on the fewest diffusers) and no higher than its maximum. Any schedule that meets the DO minima
      gives every zone at least this air, and more air anywhere raises the DO everywhere (common practice (no
      source), as for the full-air day), so a zone whose DO rises above its maximum even here (by more than the
      verification's DO tolerance) is above it on every grid of the range, whatever the schedule. This is the
      turndown check: air only at the minimum everywhere missed the demo's minimum day, whose Z6 is pushed over
      its maximum by the air the zones before it need for their DO minima (less ammonia reaches Z6); with the
      minima held, hour by hour, Z6 at its mixing minimum (360 Sm3/h) is 0.23 mg/L over its 2.5 mg/L at dawn.

    Like :func:`prescreen` a relaxation (the blowers' own limits left out), so a finding is certain. Returns
    ``{"feasible", "findings", "seconds", "note"}``; each finding as :func:`prescreen`'s.
    """
    from airtaper.optimize.simday import simulate_day
    from airtaper.plant import with_diffuser_counts

    t0 = time.perf_counter()
    plant = resolve_plant(plant)
    findings, notes = [], []
    for side, counts in (("full air", highest), ("least air", lowest)):
        grid = with_diffuser_counts(plant, counts)
        zones = _grid_zones(grid)
        if not zones:
            break
        if side == "full air":
            air = {"schedule": {z.id: z.airflow_range_Sm3_h[1] for z in zones}}
        else:  # each zone's DO held at its minimum, its air clipped to the grid's range
            air = {"do_setpoint_mg_L": {z.id: z.zone.do_min_mg_L or 0.0 for z in zones if z.kind == "aerated"}}
        try:
            day = simulate_day(grid, max_days=FULL_AIR_DAYS, **air)
        except (SteadyStateError, RuntimeError, ArithmeticError, ValueError) as exc:
            notes.append(f"the {side} day could not be simulated ({exc})")
            continue
        if side == "full air":
            findings.extend(full_air_findings(grid, day))
        else:
            findings.extend(_least_air_findings(grid, day))
    return {"feasible": not findings, "findings": findings, "seconds": time.perf_counter() - t0,
            "note": "; ".join(notes) or None}


def _least_air_findings(plant: ResolvedPlant, day) -> list[dict]:
    """DO maxima the least-air day (every zone's DO at its minimum, its air at least the grid's minimum) breaks
    (:func:`count_range_findings`)."""
    out = []
    period_h, n = plant.period_h, plant.n_periods
    ex = day.do_extremes
    highs = {z: g.sort_values("period")["do_max_mg_L"].to_numpy() for z, g in ex.groupby("zone", sort=False)}
    for dz in _grid_zones(plant):
        z = dz.zone
        if z.kind != "aerated" or z.do_max_mg_L is None:
            continue
        high = highs[z.id]
        bad = [k for k in range(n) if high[k] > z.do_max_mg_L + DO_TOLERANCE_mg_L]
        if not bad:
            continue
        lo, _ = dz.airflow_range_Sm3_h
        spans, texts = [], []
        for r in period_runs(bad, n):
            over = float(max(high[k] - z.do_max_mg_L for k in r))
            spans.append({"start_h": r[0] * period_h, "end_h": (r[-1] + 1) * period_h, "amount": over,
                          "unit": "mg/L"})
            texts.append((r, f"{over:.2f} mg/L over"))
        why = ("its diffusers' minimum" if dz.diffuser_airflow_min_Sm3_h * dz.diffusers >= lo * (1.0 - 1e-9)
               else "its mixing minimum")
        out.append(_finding("do_max", z.id, spans,
                            f"zone {z.id} cannot hold its DO maximum of {z.do_max_mg_L:g} mg/L with every zone's DO "
                            f"held at its minimum and its air at the least {dz.diffusers} diffusers (the fewest of "
                            f"the design range) allow ({lo:,.0f} Sm3/h, {why}): " + span_text(texts, period_h)))
    return out


def outside_tested_range(plant: ResolvedPlant | Layout, airflow_by_zone: dict, period_of_point, where: str
                         ) -> list[dict]:
    """Spans where a zone's airflow per diffuser leaves its diffuser type's tested range.

    ``airflow_by_zone``: zone id -> airflow at points (per period, or per simulated node)
    with ``period_of_point`` (0-based) their periods; ``where``: what the airflow is
    ("optimum", "baseline", ...), for the message. The tested range is the span of the
    type's clean-water SOTE test points; outside it the SOTE curve is extrapolated.
    """
    plant = resolve_plant(plant)
    out = []
    period_h = plant.period_h
    n = plant.n_periods
    per = np.asarray(period_of_point, dtype=int)
    for z in _grid_zones(plant):
        if z.id not in airflow_by_zone:
            continue
        type_id = z.zone.grid.type_id
        lo, hi = z.sote.airflow_range  # the span of the type's test points
        q = np.asarray(airflow_by_zone[z.id], dtype=float) / z.diffusers
        for side, bad_point in (("above", q > hi * (1.0 + 1e-6)), ("below", (q < lo * (1.0 - 1e-6)) & (q > 0.0))):
            if not bad_point.any():
                continue
            texts, spans = [], []
            for r in period_runs(np.unique(per[bad_point]).tolist(), n):
                mask = bad_point & np.isin(per, r)
                v = float(q[mask].max() if side == "above" else q[mask].min())
                spans.append({"start_h": r[0] * period_h, "end_h": (r[-1] + 1) * period_h,
                              "airflow_per_diffuser_Sm3_h": v})
                texts.append((r, f"{v:.1f} Sm3/h per diffuser"))
            out.append({"zone": z.id, "diffuser_type": type_id, "where": where, "side": side,
                        "tested_Sm3_h": [lo, hi], "spans": spans,
                        "message": f"{where}: zone {z.id} runs its diffusers {side} the tested range of "
                                   f"{type_id} ({lo:g}-{hi:g} Sm3/h per diffuser), where the SOTE curve is "
                                   "extrapolated: " + span_text(texts, period_h)})
    return out


__all__ = ["count_range_findings", "equipment_findings", "full_air_findings", "outside_tested_range", "prescreen"]
