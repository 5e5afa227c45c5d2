"""`airtaper check LAYOUT`: validate a layout and print its train.

Prints the table of zones (kind, volume, HRT at the mean influent flow,
diffusers, density, airflow range) and a summary of flows, blowers, tariff and
limits; warnings go to stderr as ``warning: <file>: <key>: ...``. Then the
pre-screen (:mod:`airtaper.optimize.prescreen`: equipment bounds and one simulated
day with every grid at full air, a few seconds) says whether a limit surely cannot
be met. Exit 0 when the layout is valid and passes the pre-screen, 2 (with every
problem listed) when it is not valid, 3 when the pre-screen finds a limit no
schedule can meet (``--no-prescreen`` skips it).
"""

from __future__ import annotations

import sys

from airtaper.errors import EXIT_INFEASIBLE, EXIT_OK
from airtaper.plant import ResolvedPlant, load_plant
from airtaper.units import HOURS_PER_DAY


def register(subparsers) -> None:
    p = subparsers.add_parser("check", help="validate a layout file and print its train",
                              description="Validate a layout file (and its influent CSV) and print the train.")
    p.add_argument("layout", metavar="LAYOUT", help="layout TOML file, e.g. layouts/demo.toml")
    p.add_argument("--no-prescreen", action="store_true",
                   help="skip the pre-screen (equipment bounds and a simulated day at full air)")
    p.set_defaults(handler=run)


def run(args) -> int:
    warnings: list = []
    plant = load_plant(args.layout, warnings=warnings)  # resolving runs every check past the parser
    for w in warnings:
        print(str(w), file=sys.stderr)
    print(train_report(plant))
    if getattr(args, "no_prescreen", False):
        return EXIT_OK
    from airtaper.optimize.prescreen import prescreen

    screen = prescreen(plant)
    if screen["note"]:
        print(f"pre-screen: {screen['note']}")
    if screen["feasible"]:
        reach = "with the equipment" if screen["note"] else "at full air"
        print(f"pre-screen: no limit is out of reach {reach} ({screen['seconds']:.1f} s)")
        return EXIT_OK
    print(f"pre-screen: the limits cannot all be met ({screen['seconds']:.1f} s):")
    for f in screen["findings"]:
        print(f"  {f['message']}")
    return EXIT_INFEASIBLE


def _n(x: float, digits: int = 0) -> str:
    return f"{x:,.{digits}f}"


def _flow_text(ratio, flow, mean_q: float) -> str:
    if ratio is not None:
        return f"{ratio:g} x Q"
    mean = sum(flow) / len(flow)
    return f"{_n(mean)} m3/d ({mean / mean_q:.2f} x Q)"


def zone_table(plant: ResolvedPlant) -> list[list[str]]:
    """Rows of the train table, header first, totals last."""
    q = float(plant.hydraulics.influent_m3_d.mean())
    rows = [["zone", "kind", "volume m3", "HRT h", "diffusers", "density %", "airflow Sm3/h"]]
    total_v = total_n = lo_sum = hi_sum = 0.0
    for z in plant.zones:
        hrt = z.volume_m3 / q * HOURS_PER_DAY
        total_v += z.volume_m3
        if plant.has_diffusers(z):
            d = plant.air.zone(z)
            diff = f"{z.grid.count:,} x {z.grid.type_id}"
            dens = f"{d.density_percent:.1f}"
            lo, hi = d.airflow_range_Sm3_h
            air = f"{_n(lo)}-{_n(hi)}"
            total_n += z.grid.count
            lo_sum += lo
            hi_sum += hi
        elif z.fixed_kla_per_d is not None:
            diff, dens, air = f"kLa {z.fixed_kla_per_d:g} /d", "-", "-"
        else:
            diff, dens, air = "-", "-", "-"
        rows.append([z.id, z.kind, _n(z.volume_m3), f"{hrt:.2f}", diff, dens, air])
    rows.append(["total", "", _n(total_v), f"{total_v / q * HOURS_PER_DAY:.2f}", _n(total_n) if total_n else "-", "",
                 f"{_n(lo_sum)}-{_n(hi_sum)}" if hi_sum else "-"])
    return rows


def _format_table(rows: list[list[str]]) -> str:
    widths = [max(len(r[i]) for r in rows) for i in range(len(rows[0]))]
    right = {2, 3, 5, 6}
    lines = []
    for k, r in enumerate(rows):
        cells = [c.rjust(w) if i in right else c.ljust(w) for i, (c, w) in enumerate(zip(r, widths))]
        lines.append("  ".join(cells).rstrip())
        if k == 0 or k == len(rows) - 2:
            lines.append("  ".join("-" * w for w in widths))
    return "\n".join(lines)


def train_report(plant: ResolvedPlant) -> str:
    """The text `airtaper check` prints: the resolved plant, with the layout as given echoed where the plant
    keeps no such value (elevation, the influent's source, flows' names and ratios, load days, capital)."""
    layout = plant.layout  # the input as given: echoed, not computed with
    p, h, inf = layout.plant, plant.horizon, layout.influent
    q = float(plant.hydraulics.influent_m3_d.mean())
    temps = sorted(set(float(t) for t in plant.temperature_C))
    temp = f"{temps[0]:g} C" if len(temps) == 1 else f"{temps[0]:g}-{temps[-1]:g} C"
    baro = "" if p.barometric_pressure_kPa is None else f", barometric {p.barometric_pressure_kPa:g} kPa"
    lines = [
        f"{plant.name} ({plant.path})",
        f"elevation {p.elevation_m:g} m{baro}, water {temp}; {h.n_periods} periods of {h.period_h:g} h, "
        f"{h.steps_per_period} steps each",
        f"influent: {inf.source}, mean {_n(q)} m3/d (period means {_n(min(inf.flow_m3_d))}-"
        f"{_n(max(inf.flow_m3_d))})",
        "",
        _format_table(zone_table(plant)),
        "",
    ]
    feeds = ", ".join(f"{s.zone} {100 * s.fraction:g} %" for s in layout.step_feed)
    flows = [f"step feed {feeds}"]
    for r in layout.recycles:
        flows.append(f"recycle {r.id} {r.from_zone} -> {r.to_zone} {_flow_text(r.ratio, r.flow_m3_d, q)}")
    ras = layout.return_sludge
    flows.append(f"return sludge -> {ras.to_zone} {_flow_text(ras.ratio, ras.flow_m3_d, q)}")
    w = layout.wasting
    flows.append(f"waste by SRT {w.srt_d:g} d" if w.srt_d is not None
                 else f"waste {_n(sum(w.flow_m3_d) / len(w.flow_m3_d), 1)} m3/d")
    lines.append("flows: " + "; ".join(flows))
    c = plant.clarifier
    if c.kind == "ideal":
        lines.append(f"clarifier: ideal separator, effluent TSS {c.effluent_tss_mg_L:g} mg/L")
    else:
        lines.append(f"clarifier: layered, {c.layers} layers, feed layer {c.feed_layer}, "
                     f"{_n(c.area_m2)} m2 x {c.height_m:g} m")
    if plant.blowers:
        total = sum(b.airflow_max_Sm3_h for b in plant.blowers)
        lines.append(f"blowers (together {_n(total)} Sm3/h):")
        for b in plant.blowers:
            eff = f"efficiency {b.efficiency:g}" if b.efficiency is not None else \
                f"efficiency {min(e.efficiency for e in b.efficiency_points):g}-" \
                f"{max(e.efficiency for e in b.efficiency_points):g}"
            lines.append(f"  {b.id} {b.kind} {_n(b.airflow_min_Sm3_h)}-{_n(b.airflow_max_Sm3_h)} Sm3/h, "
                         f"limit {b.pressure_max_gauge_kPa:g} kPa gauge, {eff}")
    else:
        lines.append("blowers: none")
    t = plant.tariff
    if t is not None:
        demand = f", demand charge {t.demand_charge_per_kW:g} per kW per {t.demand_period_days:g} d" \
            if t.demand_charge_per_kW else ""
        lines.append(f"tariff: {t.currency} {min(t.price_per_kWh):g}-{max(t.price_per_kWh):g} per kWh{demand}")
    lim = plant.limits
    parts = []
    if lim.nh4_mean_mg_L is not None:
        parts.append(f"NH4-N daily mean {lim.nh4_mean_mg_L:g} mg/L")
    if lim.nh4_max_mg_L is not None:
        parts.append(f"NH4-N period max {lim.nh4_max_mg_L:g} mg/L")
    if lim.tn_mean_mg_L is not None:
        parts.append(f"TN daily mean {lim.tn_mean_mg_L:g} mg/L")
    lines.append("limits: " + ("; ".join(parts) if parts else "none"))
    lines.append(f"objective: {plant.operation.objective}")
    if layout.load_days:
        total = sum(d.days_per_year for d in layout.load_days)
        lines.append(f"load days ({total:g} days in all):")
        for d in layout.load_days:
            what = (f"own influent {d.influent.source}" if d.influent is not None
                    else f"flow x {d.flow_factor:g}, load x {d.load_factor:g}")
            temp = "" if d.water_temperature_C is None else f", water {min(d.water_temperature_C):g}" + (
                f"-{max(d.water_temperature_C):g}" if max(d.water_temperature_C) > min(d.water_temperature_C) else "") \
                + " C"
            alpha = "" if d.alpha_factor == 1.0 else f", alpha x {d.alpha_factor:g}"
            do = "".join(f", {z.zone} DO" + (f" min {z.do_min_mg_L:g}" if z.do_min_mg_L is not None else "")
                         + (f" max {z.do_max_mg_L:g}" if z.do_max_mg_L is not None else "") + " mg/L"
                         for z in d.zone_do)
            lines.append(f"  {d.id} {d.days_per_year:g} d: {what}{temp}{alpha}{do}")
    if layout.capital is not None:
        c = layout.capital
        cur = plant.tariff.currency if plant.tariff else ""
        lines.append(f"capital: {c.cost_per_diffuser:g} {cur} per diffuser, {c.cost_per_zone:g} {cur} per zone, "
                     f"{100 * c.interest_rate:g} % over {c.life_years:g} years")
    return "\n".join(lines)
