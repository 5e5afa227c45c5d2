"""A Layout back to plain data in the layout file's own keys.

``parse_layout(layout_to_data(layout), layout.path, base_dir)`` gives an equal
Layout: every default is written out explicitly and per-period values are
written as lists (a single number when they do not change). An influent read
from a CSV is written as the same ``csv`` name, so ``base_dir`` must be the
layout's folder. The dict holds only str, int, float, bool, list and dict, so
it serialises to TOML or JSON as is.

A record whose fields are named as its section's keys (a zone, [limits], [operation],
[header], [tariff], [capital]) is written field by field (:func:`_keys`), so a key added to
such a record round-trips with no change here; the other sections name their keys.
"""

from __future__ import annotations

import dataclasses

from airtaper.layout.influent import MEASURED
from airtaper.layout.types import ASM1_COMPONENTS, Layout


def _pp(values):
    """A per-period tuple as one number when constant, else a list."""
    values = list(values)
    return values[0] if len(set(values)) == 1 else values


def _drop_none(d: dict) -> dict:
    return {k: v for k, v in d.items() if v is not None}


def _keys(record, skip: tuple[str, ...] = ()) -> dict:
    """A record whose field names are its section's keys, as data: every field that is set (None is a key left
    out), per-period tuples as :func:`_pp` writes them; ``skip``: fields written otherwise."""
    out = {}
    for f in dataclasses.fields(record):
        value = getattr(record, f.name)
        if f.name in skip or value is None:
            continue
        out[f.name] = _pp(value) if isinstance(value, tuple) else value
    return out


def layout_to_data(layout: Layout) -> dict:
    """The layout as a dict that :func:`~airtaper.layout.parse_layout` reads back to an equal Layout."""
    p = layout.plant
    data: dict = {}
    if layout.notes:
        data["notes"] = layout.notes
    data["plant"] = _drop_none({
        "name": p.name, "elevation_m": p.elevation_m, "water_temperature_C": _pp(p.temperature_C),
        "barometric_pressure_kPa": p.barometric_pressure_kPa, "salinity_g_kg": p.salinity_g_kg,
    })
    data["horizon"] = {"n_periods": layout.horizon.n_periods, "steps_per_period": layout.horizon.steps_per_period}
    data["diffuser_types"] = [{
        "id": d.id, "membrane_area_m2": d.membrane_area_m2, "airflow_min_Sm3_h": d.airflow_min_Sm3_h,
        "airflow_max_Sm3_h": d.airflow_max_Sm3_h, "effective_depth_fraction": d.effective_depth_fraction,
        "sote_points": [{
            "airflow_per_diffuser_Sm3_h": s.airflow_per_diffuser_Sm3_h, "sote_percent": s.sote_percent,
            "density_percent": s.density_percent, "submergence_m": s.submergence_m} for s in d.sote_points],
        "headloss_points": [{"airflow_per_diffuser_Sm3_h": h.airflow_per_diffuser_Sm3_h,
                             "headloss_kPa": h.headloss_kPa} for h in d.headloss_points],
    } for d in layout.diffuser_types]
    zones = []
    for z in layout.zones:
        zd = _keys(z, skip=("grid",))
        if z.grid is not None:
            zd["grid"] = {"type": z.grid.type_id, **_keys(z.grid, skip=("type_id",))}
        zones.append(zd)
    data["zones"] = zones
    flows: dict = {"step_feed": [{"zone": s.zone, "fraction": s.fraction} for s in layout.step_feed]}
    flows["recycles"] = [
        {"id": r.id, "from_zone": r.from_zone, "to_zone": r.to_zone,
         **({"ratio": r.ratio} if r.ratio is not None else {"flow_m3_d": _pp(r.flow_m3_d)})}
        for r in layout.recycles]
    ras = layout.return_sludge
    flows["return_sludge"] = {"to_zone": ras.to_zone,
                              **({"ratio": ras.ratio} if ras.ratio is not None else {"flow_m3_d": _pp(ras.flow_m3_d)})}
    w = layout.wasting
    flows["waste"] = {"srt_d": w.srt_d} if w.srt_d is not None else {"flow_m3_d": _pp(w.flow_m3_d)}
    data["flows"] = flows
    c = layout.clarifier
    if c.kind == "ideal":
        data["clarifier"] = {"kind": "ideal", "effluent_tss_mg_L": c.effluent_tss_mg_L, "tss_per_cod": c.tss_per_cod}
    else:
        s = c.settling
        data["clarifier"] = {
            "kind": "layered", "area_m2": c.area_m2, "height_m": c.height_m, "layers": c.layers,
            "feed_layer": c.feed_layer, "tss_per_cod": c.tss_per_cod,
            "settling": {"v0_max_m_d": s.v0_max_m_d, "v0_m_d": s.v0_m_d, "rh_m3_g": s.rh_m3_g,
                         "rp_m3_g": s.rp_m3_g, "fns": s.fns, "x_threshold_g_m3": s.x_threshold_g_m3}}
    blowers = []
    for b in layout.blowers:
        bd = {"id": b.id, "kind": b.kind, "airflow_min_Sm3_h": b.airflow_min_Sm3_h,
              "airflow_max_Sm3_h": b.airflow_max_Sm3_h, "pressure_max_gauge_kPa": b.pressure_max_gauge_kPa}
        if b.efficiency is not None:
            bd["efficiency"] = b.efficiency
        elif b.power_points:
            bd["power_points"] = [{"airflow_Sm3_h": p.airflow_Sm3_h, "discharge_gauge_kPa": p.discharge_gauge_kPa,
                                   "power_kW": p.power_kW} for p in b.power_points]
        else:
            bd["efficiency_points"] = [{"airflow_Sm3_h": e.airflow_Sm3_h, "efficiency": e.efficiency}
                                       for e in b.efficiency_points]
        bd.update({"out_of_service": b.out_of_service, "min_up_h": b.min_up_h, "min_down_h": b.min_down_h,
                   "start_cost": b.start_cost})
        if b.max_starts_per_day is not None:
            bd["max_starts_per_day"] = b.max_starts_per_day
        if b.range_points:
            bd["airflow_range_points"] = [{"discharge_gauge_kPa": r.discharge_gauge_kPa,
                                           "airflow_min_Sm3_h": r.airflow_min_Sm3_h,
                                           "airflow_max_Sm3_h": r.airflow_max_Sm3_h} for r in b.range_points]
        blowers.append(bd)
    if blowers:
        data["blowers"] = blowers
    data["header"] = _keys(layout.header)
    a = layout.inlet_air
    data["inlet_air"] = _drop_none({"temperature_C": _pp(a.temperature_C), "pressure_kPa": a.pressure_kPa,
                                    "filter_loss_kPa": a.filter_loss_kPa})
    inf = layout.influent
    f = inf.fractionation
    influent: dict = {}
    if inf.asm1_mg_L is not None:
        influent["flow_m3_d"] = _pp(inf.flow_m3_d)
        influent["asm1"] = {name: _pp(row[i] for row in inf.asm1_mg_L) for i, name in enumerate(ASM1_COMPONENTS)}
    elif inf.source == "constant":
        for name in MEASURED:
            influent[name] = _pp(getattr(inf, name))
    else:
        influent["csv"] = inf.source
    influent["fractionation"] = {"si_of_cod": f.si_of_cod, "xi_of_cod": f.xi_of_cod, "xbh_of_cod": f.xbh_of_cod,
                                 "xba_of_cod": f.xba_of_cod, "snd_of_organic_n": f.snd_of_organic_n,
                                 "sno_mg_L": f.sno_mg_L}
    data["influent"] = influent
    data["limits"] = _keys(layout.limits)
    if layout.tariff is not None:
        data["tariff"] = _keys(layout.tariff)
    k = layout.kinetics
    data["kinetics"] = {"parameter_set": k.parameter_set, "temperature_correction": k.temperature_correction,
                        "overrides": dict(k.overrides)}
    data["operation"] = _keys(layout.operation)
    if layout.capital is not None:
        data["capital"] = _keys(layout.capital)
    if layout.load_days:
        data["load_days"] = [_load_day(d) for d in layout.load_days]
    return data


def _load_day(d) -> dict:
    out: dict = {"id": d.id, "days_per_year": d.days_per_year}
    if d.basis is not None:
        out["basis"] = d.basis
    if d.influent is not None:
        out["influent_csv"] = d.influent.source
    else:
        out.update({"flow_factor": d.flow_factor, "load_factor": d.load_factor})
    if d.water_temperature_C is not None:
        out["water_temperature_C"] = _pp(d.water_temperature_C)
    if d.air_temperature_C is not None:
        out["air_temperature_C"] = _pp(d.air_temperature_C)
    out["alpha_factor"] = d.alpha_factor
    out["limits"] = _keys(d.limits)
    if d.zone_do:
        out["zones"] = {z.zone: {k: v for k, v in (("do_min_mg_L", z.do_min_mg_L), ("do_max_mg_L", z.do_max_mg_L))
                                 if v is not None} for z in d.zone_do}
    return out
