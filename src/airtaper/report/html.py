"""``report.html``: one self-contained page (figures inlined as data URIs, no script, no remote resource).

Order: the caution, the findings (when there are any), headline figures, the inputs
(plant, influent, train, limits, tariff, blowers), the results (schedule tables with
zones as rows and hours as columns, figures), the verification against the
independent simulator, marginal costs in plain words, and solver statistics. Every
part is built from a :class:`~airtaper.report.folder.StudyFolder`; a part whose files
are absent is left out. The page fits a 1280 px wide window and prints on landscape A4.
"""

from __future__ import annotations

import base64
import html
import math

import numpy as np
import pandas as pd

from airtaper import units
from airtaper.optimize.results import EffluentFigures, Limits
from airtaper.report.folder import StudyFolder
from airtaper.report.text import CAUTION, EFFLUENT_LIMITS, fmt, fmt_margin, marginal_sentence

_CSS = """
* { box-sizing: border-box; }
body { font-family: "DejaVu Sans", Arial, sans-serif; color: #1d1d1d; max-width: 1180px; margin: 0 auto;
       padding: 12px 20px 40px; line-height: 1.4; font-size: 15px; }
h1 { font-size: 1.6em; margin: .4em 0 .2em; }
h2 { font-size: 1.3em; border-bottom: 2px solid #444; padding-bottom: .15em; margin-top: 1.6em; }
h3 { font-size: 1.05em; margin: 1.2em 0 .3em; }
p.sub { color: #555; margin-top: 0; }
.caution { border: 2px solid #8a5a00; background: #fff6e0; padding: .6em 1em; }
.findings { border: 3px solid #b00020; background: #fdecee; padding: .4em 1em; margin: 1em 0; }
.findings h2 { border: none; margin: .3em 0; color: #b00020; }
.finding { color: #b00020; font-weight: bold; }
.ok { color: #1b5e20; font-weight: bold; }
table { border-collapse: collapse; margin: .4em 0 1.2em; font-size: 14px; }
th, td { padding: .2em .55em; border-bottom: 1px solid #d0d0d0; text-align: right; vertical-align: top; }
th { background: #f0f0f0; }
th.left, td.left { text-align: left; }
table.kv th { text-align: left; background: none; font-weight: normal; color: #333; }
table.kv td { font-weight: bold; }
table.nowrap td { white-space: nowrap; }
table.hours { width: 100%; table-layout: fixed; font-size: 12px; }
table.hours th, table.hours td { padding: .2em .1em; }
table.hours th.zone, table.hours td.zone { width: 4.5em; text-align: left; padding-left: .3em; }
table.hours caption { text-align: left; font-weight: bold; padding: .2em 0; }
td.over { background: #b00020; color: #fff; font-weight: bold; }
td.below { background: #fde0e0; color: #b00020; font-weight: bold; }
figure { margin: 1em 0 1.6em; page-break-inside: avoid; break-inside: avoid; }
figure img { max-width: 100%; height: auto; display: block; border: 1px solid #ddd; }
figcaption { font-size: .9em; color: #444; margin-top: .3em; }
ul.plain { padding-left: 1.2em; }
.cols { display: flex; flex-wrap: wrap; gap: 0 2.5em; }
.cols > div { min-width: 0; }
@page { size: A4 landscape; margin: 12mm; }
@media print {
  body { max-width: none; padding: 0; font-size: 10pt; }
  h2 { page-break-after: avoid; break-after: avoid; }
  table { page-break-inside: avoid; break-inside: avoid; }
  .caution, .findings { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
  td.over, td.below, th { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
}
"""


def esc(x) -> str:
    return html.escape(str(x), quote=True)


def _kv(rows: list[tuple[str, str]]) -> str:
    body = "".join(f"<tr><th>{esc(k)}</th><td>{v}</td></tr>" for k, v in rows if v is not None)
    return f"<table class='kv'>{body}</table>"


def _grid(headings: list[str], rows: list[list[str]], left: int = 1, cls: str = "grid") -> str:
    """A table; the first ``left`` columns left-aligned; cells are HTML already escaped."""
    th = "".join(f"<th class='left'>{h}</th>" if i < left else f"<th>{h}</th>" for i, h in enumerate(headings))
    body = "".join("<tr>" + "".join(f"<td class='left'>{c}</td>" if i < left else f"<td>{c}</td>"
                                    for i, c in enumerate(r)) + "</tr>" for r in rows)
    return f"<table class='{cls}'><tr>{th}</tr>{body}</table>"


def _hour_label(h: float) -> str:
    if abs(h - round(h)) < 1e-9:
        return f"{int(round(h)):02d}"
    m = int(round(h * 60))
    return f"{m // 60:02d}:{m % 60:02d}"


def hours_table(table: pd.DataFrame, caption: str, digits: int = 0, *, over: pd.DataFrame | None = None,
                below: pd.DataFrame | None = None, findings: dict | None = None) -> str:
    """Rows (zones or quantities) x hour columns; ``over``/``below`` flag cells (True) above a maximum / below a
    minimum; ``findings`` maps (row, column) to the sentence of a finding there. Headings are the hours the
    periods start ("00" ... "23")."""
    heads = "".join(f"<th>{_hour_label(c)}</th>" for c in table.columns)
    findings = findings or {}
    rows = []
    for name, r in table.iterrows():
        cells = []
        for c, v in r.items():
            cls = ""
            if over is not None and bool(over.loc[name, c]):
                cls = " class='over' title='above the maximum'"
            elif below is not None and bool(below.loc[name, c]):
                cls = " class='below' title='below the minimum'"
            elif (name, c) in findings:
                cls = f" class='below' title='{esc(findings[name, c])}'"
            cells.append(f"<td{cls}>{fmt(v, digits)}</td>")
        rows.append(f"<tr><td class='zone'>{esc(name)}</td>{''.join(cells)}</tr>")
    return (f"<table class='hours'><caption>{esc(caption)}</caption><tr><th class='zone'>hour</th>{heads}</tr>"
            + "".join(rows) + "</table>")


# -- parts ----------------------------------------------------------------------------------------
def _findings(f: StudyFolder) -> list[str]:
    s = f.summary
    out = []
    status = s.get("status")
    ver = s.get("verification") or {}
    if status and status != "optimal":
        out.append(f"Status: {status}. " + {
            "infeasible": "The limits cannot all be met; the schedule below is the closest the optimiser found "
                          "and breaks the limits listed here.",
            "unverified": "The optimised schedule breaks a limit when re-simulated by the independent simulator: "
                          "do not use it as it is.",
            "failed": "The solver failed; the figures below are not a solution."}.get(status, ""))
    for item in s.get("infeasibility") or []:
        out.append(str(item.get("message", item)))
    for v in ver.get("violations") or []:
        out.append(f"Verification: {v}")
    for v in (s.get("dispatch") or {}).get("feasibility_breaches") or []:
        out.append(f"Blowers or grids: {v}")
    for m in s.get("messages") or []:
        text = str(m)
        if text.startswith("WARNING: the re-simulated") and ver.get("violations"):
            continue  # the violations above say it, one by one
        if text not in out:
            out.append(text)
    over = _over_max(f)
    if over is not None and over.to_numpy().any():
        cells = [f"{z} at {_hour_label(h)} h" for z in over.index for h in over.columns if over.loc[z, h]]
        out.append(f"Airflow above the zone's maximum in {len(cells)} zone-hour(s): " + ", ".join(cells[:12])
                   + (" ..." if len(cells) > 12 else ""))
    out.extend(f.notes)
    return out


def _over_max(f: StudyFolder) -> pd.DataFrame | None:
    ranges = f.zone_airflow_range_Sm3_h()
    air = f.pivot("airflow_Sm3_h")
    if not ranges or air is None:
        return None
    hi = pd.Series({z: ranges.get(z, (0, math.inf))[1] for z in air.index})
    return air.gt(hi * (1 + 1e-6), axis=0)


def _headline(f: StudyFolder) -> str:
    s = f.summary
    cur = s.get("currency") or ""
    base = s.get("baseline") or {}
    study = f.study  # the typed summary
    eff = study.effluent or EffluentFigures()
    ver = s.get("verification") or {}
    lim = study.limits or Limits()
    infeasible = s.get("status") in ("infeasible", "failed")
    rows = [("status", _status_html(s))]
    rows.append(("blower energy", f"{fmt(s.get('energy_kWh_per_day'))} kWh/d"))
    if base.get("energy_kWh_per_day") is not None:
        rows.append(("baseline energy (uniform DO control)", f"{fmt(base.get('energy_kWh_per_day'))} kWh/d"))
    if s.get("saving_percent") is not None and not infeasible:
        note = "" if base.get("compliant", True) else \
            " <span class='finding'>(the baseline itself breaks a limit: the saving is not like for like)</span>"
        rows.append(("energy saving against the baseline", f"{fmt(s.get('saving_percent'))} %{note}"))
    if s.get("cost_per_day") is not None:
        rows.append(("cost (energy and pro-rated demand charge)", f"{fmt(s.get('cost_per_day'), 2)} {esc(cur)}/d"))
        if base.get("cost_per_day") is not None:
            rows.append(("baseline cost", f"{fmt(base.get('cost_per_day'), 2)} {esc(cur)}/d"))
        if s.get("cost_saving_percent") is not None and not infeasible:
            rows.append(("cost saving against the baseline", f"{fmt(s.get('cost_saving_percent'))} %"))
    dp = s.get("dispatch") or {}
    if dp.get("cost_per_day") is not None and dp.get("energy_cost") is not None:
        rows.append(("bill split", f"energy {fmt(dp['energy_cost'], 2)} + demand charge {fmt(dp.get('demand_charge'), 2)}"
                                   f" + starts {fmt(dp.get('start_costs'), 2)} = {fmt(dp['cost_per_day'], 2)} "
                                   f"{esc(cur)}/d"))
    head = f.header
    if head is not None and "power_kW" in head and len(head):
        k = int(head["power_kW"].to_numpy().argmax())
        edges = f.period_edges_h
        when = f", {_hour_label(edges[k])}-{_hour_label(edges[k + 1])} h" if len(edges) == len(head) + 1 else ""
        rows.append(("peak blower power", f"{fmt(head['power_kW'].iloc[k])} kW{when}"))
    for key, label in (("nh4_mean_mg_L", "effluent NH4-N, daily mean"), ("nh4_max_mg_L", "effluent NH4-N, largest period mean"),
                       ("tn_mean_mg_L", "effluent TN, daily mean")):
        value, limit = getattr(eff, key), getattr(lim, key)
        if value is not None:
            rows.append((label, f"{fmt(value, 2)} mg/L" + (f" (limit {limit:g})" if limit is not None else "")))
    margin = ver.get("min_do_margin_mg_L", s.get("min_do_margin_mg_L"))
    if margin is not None:
        cls = " class='finding'" if margin < 0 else ""
        src = "re-simulated" if ver.get("min_do_margin_mg_L") is not None else "optimiser"
        rows.append((f"smallest DO margin over the zones ({src})", f"<span{cls}>{fmt_margin(margin)} mg/L</span>"))
    return _kv(rows)


def _status_html(s: dict) -> str:
    status = s.get("status")
    verified = (s.get("verification") or {}).get("verified")
    if status == "optimal" and verified:
        return "<span class='ok'>optimal, verified by the independent simulator</span>"
    if status == "optimal" and verified is None:
        return "optimal (not re-simulated)"
    return f"<span class='finding'>{esc(status)}</span>"


def _inputs(f: StudyFolder, images: dict) -> str:
    """The inputs summary: what the plant computes with (the resolved plant), with the layout as given
    echoed where the plant keeps no such value (elevation, the measured influent, flows' names and ratios)."""
    plant = f.plant
    s = f.summary
    parts = []
    if plant is None:
        lim = s.get("limits") or {}
        rows = [(EFFLUENT_LIMITS.get(k, k), f"{v:g} mg/L") for k, v in lim.items() if isinstance(v, (int, float))]
        parts.append("<p>The layout could not be read again, so only the limits recorded in summary.json are shown.</p>")
        if rows:
            parts.append(_kv(rows))
        return "".join(parts)
    lay = plant.layout  # the input as given: echoed, not computed with
    h, inf = plant.horizon, lay.influent
    w = np.asarray(plant.hydraulics.influent_m3_d, dtype=float)
    q = float(w.mean())
    temps = sorted(set(float(t) for t in plant.temperature_C))

    def fw(values) -> float:
        return float(np.dot(w, np.asarray(values, dtype=float)) / w.sum())

    plant_kv = _kv([
        ("plant", esc(plant.name)),
        ("layout file", esc(plant.path)),
        ("elevation", f"{lay.plant.elevation_m:g} m"),
        ("water temperature", f"{temps[0]:g} C" if len(temps) == 1 else f"{temps[0]:g}-{temps[-1]:g} C"),
        ("day", f"{h.n_periods} periods of {h.period_h:g} h"),
        ("objective", esc(s.get("objective", plant.operation.objective))),
    ])
    load = _kv([
        ("load case", "one day of constant influent" if inf.source == "constant" else
         f"one diurnal day from {esc(inf.source)}"),
        ("influent flow, mean", f"{fmt(q, 0)} m3/d (period means {fmt(w.min(), 0)}-{fmt(w.max(), 0)})"),
        ("total COD, flow-weighted", f"{fmt(fw(inf.cod_total_mg_L), 0)} mg/L"),
        ("TKN, flow-weighted", f"{fmt(fw(inf.tkn_mg_L), 1)} mg/L"),
        ("NH4-N, flow-weighted", f"{fmt(fw(inf.nh4_mg_L), 1)} mg/L"),
        ("NH4-N load, peak / mean", f"{fmt(max(w * np.asarray(inf.nh4_mg_L)) / np.mean(w * np.asarray(inf.nh4_mg_L)), 2)}"),
    ])
    parts.append(f"<div class='cols'><div><h3>Plant</h3>{plant_kv}</div><div><h3>Influent</h3>{load}</div></div>")
    files = [i for i in s.get("inputs") or [] if isinstance(i, dict) and i.get("path")]
    if files:
        parts.append("<h3>Input files of the run</h3>" + _grid(["file", "SHA-256 (first 16 digits)"], [
            [esc(i["path"]), esc(str(i.get("sha256") or "-")[:16])] for i in files]))
    # train table
    rows = []
    for z, volume in zip(plant.zones, np.asarray(plant.volume_m3, dtype=float)):
        hrt = volume / q * units.HOURS_PER_DAY
        if plant.has_diffusers(z):
            d = plant.air.zone(z)
            grid = [f"{d.diffusers:,} x {esc(z.grid.type_id)}", fmt(d.density_percent),
                    f"{fmt(d.airflow_min_Sm3_h, 0)}-{fmt(d.airflow_max_Sm3_h, 0)}"]
        else:
            grid = ["-", "-", "-"]
        do = "-" if z.do_min_mg_L is None and z.do_max_mg_L is None else \
            f"{'-' if z.do_min_mg_L is None else f'{z.do_min_mg_L:g}'} / {'-' if z.do_max_mg_L is None else f'{z.do_max_mg_L:g}'}"
        rows.append([esc(z.id), esc(z.kind), fmt(volume, 0), fmt(z.depth_m), fmt(hrt, 2), *grid, do,
                     f"{z.alpha:g}"])
    parts.append("<h3>Train</h3>" + _grid(
        ["zone", "kind", "volume (m3)", "depth (m)", "HRT at mean flow (h)", "diffusers", "density (%)",
         "airflow range (Sm3/h)", "DO min / max (mg/L)", "alpha"], rows, left=2, cls="grid nowrap"))
    flows = ["step feed: " + ", ".join(f"{esc(sf.zone)} {100 * sf.fraction:g} %" for sf in lay.step_feed)]
    for r in lay.recycles:
        flows.append(f"recycle {esc(r.id)}: {esc(r.from_zone)} to {esc(r.to_zone)}"
                     + (f", {r.ratio:g} x influent flow" if r.ratio is not None else ""))
    rs = lay.return_sludge
    flows.append(f"return sludge to {esc(rs.to_zone)}" + (f", {rs.ratio:g} x influent flow" if rs.ratio is not None else ""))
    if plant.hydraulics.srt_d is not None:
        flows.append(f"waste sludge: SRT held at {plant.hydraulics.srt_d:g} d")
    parts.append("<ul class='plain'>" + "".join(f"<li>{x}</li>" for x in flows) + "</ul>")
    if "train" in images:
        parts.append(_figure(images, "train", "The train to scale by volume."))
    # limits, tariff, blowers
    lim = plant.limits
    lim_rows = [(EFFLUENT_LIMITS[k], f"{getattr(lim, k):g} mg/L") for k in EFFLUENT_LIMITS if getattr(lim, k) is not None]
    mins = sorted({z.do_min_mg_L for z in plant.zones if z.do_min_mg_L is not None and z.aerated})
    if mins:
        lim_rows.append(("DO minimum in zones under air", " / ".join(f"{m:g}" for m in mins) + " mg/L"))
    side = [f"<div><h3>Limits</h3>{_kv(lim_rows)}</div>"]
    if plant.tariff is not None:
        t = plant.tariff
        bands = _price_bands(np.asarray(t.price_per_kWh, float), f.period_edges_h if len(f.period_edges_h) ==
                             len(t.price_per_kWh) + 1 else np.arange(len(t.price_per_kWh) + 1) * h.period_h)
        trows = [(f"{_hour_label(a)}-{_hour_label(b)} h", f"{p:g} {esc(t.currency)}/kWh") for a, b, p in bands]
        trows.append(("demand charge", f"{t.demand_charge_per_kW:g} {esc(t.currency)}/kW per {t.demand_period_days:g} d"))
        side.append(f"<div><h3>Tariff</h3>{_kv(trows)}</div>")
    parts.append("<div class='cols'>" + "".join(side) + "</div>")
    if plant.blowers:
        brow = []
        for b in plant.blowers:
            eff = f"{b.efficiency:g}" if b.efficiency is not None else \
                f"{min(e.efficiency for e in b.efficiency_points):g}-{max(e.efficiency for e in b.efficiency_points):g}"
            brow.append([esc(b.id), esc(b.kind), f"{fmt(b.airflow_min_Sm3_h, 0)}-{fmt(b.airflow_max_Sm3_h, 0)}",
                         f"{b.pressure_max_gauge_kPa:g}", eff])
        parts.append("<h3>Blowers</h3>" + _grid(["blower", "kind", "airflow range (Sm3/h)",
                                                  "discharge limit (kPa gauge)", "wire-to-air efficiency"], brow, left=2))
    return "".join(parts)


def _price_bands(price: np.ndarray, edges: np.ndarray) -> list[tuple[float, float, float]]:
    out = []
    for k, p in enumerate(price):
        if out and out[-1][2] == p:
            out[-1] = (out[-1][0], edges[k + 1], p)
        else:
            out.append((edges[k], edges[k + 1], p))
    return out


def _figure(images: dict, name: str, caption: str) -> str:
    data = base64.b64encode(images[name]).decode("ascii")
    return (f"<figure><img alt='{esc(caption)}' src='data:image/png;base64,{data}'>"
            f"<figcaption>{esc(caption)}</figcaption></figure>")


def _results(f: StudyFolder, images: dict, captions: dict) -> str:
    parts = []
    air = f.pivot("airflow_Sm3_h")
    if air is None:
        return "<p class='finding'>No schedule: the run stopped before an airflow schedule was found (see the findings).</p>"
    over = _over_max(f)
    spots = _finding_cells(f, air)
    caption = "Airflow by zone, Sm3/h, hour the period starts" + (
        " (dark red: above the zone's maximum; pink: where a finding applies)" if spots or
        (over is not None and over.to_numpy().any()) else "")
    parts.append(hours_table(air, caption, 0, over=over, findings=spots))
    per = f.pivot("airflow_per_diffuser_Sm3_h")
    if per is not None:
        parts.append(hours_table(per, "Airflow per diffuser, Sm3/h", 2, over=over))
    do = f.pivot("do_mean_mg_L")
    if do is not None:
        mins = (f.summary.get("limits") or {}).get("do_min_mg_L") or {}
        do_low = f.pivot("do_min_mg_L")
        below = None
        if do_low is not None and mins:
            lo = pd.Series({z: mins.get(z, -math.inf) for z in do_low.index})
            below = do_low.lt(lo - 1e-3, axis=0)
        parts.append(hours_table(do, "DO, period mean by the optimiser, mg/L (shaded: falls below the minimum "
                                     "within the hour)", 2, below=below))
    base = f.pivot("baseline_airflow_Sm3_h")
    if base is not None and np.isfinite(base.to_numpy(float)).any():
        parts.append(hours_table(base.dropna(how="all"), "Baseline airflow under uniform DO control, Sm3/h", 0))
    head = f.header_by_period()
    if head is not None:
        table = {}
        for col, label in (("pressure_gauge_kPa", "header pressure (kPa gauge)"), ("airflow_Sm3_h", "total airflow (Sm3/h)"),
                           ("power_kW", "blower power (kW)"), ("baseline_power_kW", "baseline power (kW)")):
            if col in head:
                table[label] = head[col].to_numpy(float)
        price = f.tariff_price()
        if price is not None:
            table[f"energy price ({f.summary.get('currency', '')}/kWh)"] = price
        frame = pd.DataFrame(table, index=head["period_start_h"]).T
        digits = {k: (3 if "price" in k else 1 if "pressure" in k else 0) for k in frame.index}
        parts.append(_header_table(frame, digits))
    for name in ("airflow", "do", "effluent", "air_side", "baseline", "blowers"):
        if name in images:
            parts.append(_figure(images, name, captions[name]))
    bl = f.blowers
    if bl is not None and {"blower", "running"} <= set(bl.columns):
        rows = []
        for name, g in bl.groupby(bl["blower"].astype(str), sort=False):
            on = g["running"].astype(str).str.lower().isin(("true", "1", "1.0"))
            hours = float(((g["period_end_h"] - g["period_start_h"]) * on).sum())
            energy = float((g["power_kW"].fillna(0) * (g["period_end_h"] - g["period_start_h"])).sum()) \
                if "power_kW" in g else None
            starts = int(g["starts"].sum()) if "starts" in g else None
            rows.append([esc(name), fmt(hours), fmt(energy, 0), fmt(starts, 0) if starts is not None else "-"])
        parts.append("<h3>Blowers over the day</h3>" + _grid(["blower", "running (h)", "energy (kWh/d)", "starts"], rows))
    dp = f.summary.get("dispatch") or {}
    off = [esc(b) for b, v in (dp.get("blowers") or {}).items() if isinstance(v, dict) and v.get("out_of_service")]
    if off:
        parts.append(f"<p>Out of service: {', '.join(off)}.</p>")
    swing = dp.get("swing_zones") or {}
    if swing:
        parts.append("<h3>Swing zones</h3><ul class='plain'>" + "".join(
            f"<li>{esc(z)}: aerated in {len(v.get('aerated_periods') or [])} of {len(f.period_edges_h) - 1} periods, "
            f"{fmt(v.get('switches'), 0)} switches per day</li>" for z, v in swing.items() if isinstance(v, dict))
            + "</ul>")
    return "".join(parts)


def _finding_cells(f: StudyFolder, table: pd.DataFrame) -> dict:
    """(zone, period start) -> sentence, for every finding of an infeasible run that names a zone and hours."""
    out = {}
    for item in f.summary.get("infeasibility") or []:
        if not isinstance(item, dict) or item.get("zone") not in table.index:
            continue
        start, end = item.get("start_h"), item.get("end_h")
        if start is None or end is None:
            continue
        for c in table.columns:
            if start - 1e-9 <= float(c) < end - 1e-9:
                out[item["zone"], c] = str(item.get("message", ""))
    return out


def _header_table(frame: pd.DataFrame, digits: dict) -> str:
    heads = "".join(f"<th>{_hour_label(c)}</th>" for c in frame.columns)
    rows = "".join(f"<tr><td class='zone' style='width:auto'>{esc(k)}</td>"
                   + "".join(f"<td>{fmt(v, digits[k])}</td>" for v in r) + "</tr>" for k, r in frame.iterrows())
    return ("<table class='hours'><caption>Air side by hour the period starts</caption>"
            f"<colgroup><col style='width:9em'></colgroup><tr><th class='zone'>hour</th>{heads}</tr>{rows}</table>")


def _verification(f: StudyFolder) -> str:
    s = f.summary
    ver = s.get("verification") or {}
    if ver.get("skipped") or not ver:
        return "<p>The schedule was not re-simulated.</p>"
    lim = s.get("limits") or {}
    opt, sim = ver.get("optimiser_effluent") or {}, ver.get("effluent") or {}
    violations = " ".join(ver.get("violations") or [])
    rows = []
    for key, label in (("nh4_mean_mg_L", "effluent NH4-N, daily mean (mg/L)"),
                       ("nh4_max_mg_L", "effluent NH4-N, largest period mean (mg/L)"),
                       ("tn_mean_mg_L", "effluent TN, daily mean (mg/L)")):
        if key not in opt and key not in sim:
            continue
        v, limit = sim.get(key), lim.get(key)
        state = "-" if limit is None or v is None else (
            "<span class='ok'>meets the limit</span>" if v <= limit else "<span class='finding'>above the limit</span>")
        rows.append([esc(label), fmt(opt.get(key), 3), fmt(v, 3), "-" if limit is None else f"{limit:g}", state])
    o_do, s_do = ver.get("optimiser_do_margin_mg_L") or {}, ver.get("do_margin_mg_L") or {}
    mins, maxs = lim.get("do_min_mg_L") or {}, lim.get("do_max_mg_L") or {}
    for z in dict.fromkeys([*o_do, *s_do]):
        m = s_do.get(z)
        lo, hi = mins.get(z), maxs.get(z)
        rng = (f"its range {lo:g}-{hi:g} mg/L" if lo is not None and hi is not None else
               f"its minimum {lo:g} mg/L" if lo is not None else f"its maximum {hi:g} mg/L" if hi is not None else
               "its range")
        leaves = ("falls below its minimum" if lo is not None and hi is None else
                  "rises above its maximum" if hi is not None and lo is None else "leaves its range")
        if m is None:
            state = "-"
        elif m >= 0:
            state = "<span class='ok'>inside its range</span>"
        elif f"zone {z}:" in violations:
            state = f"<span class='finding'>{leaves} by {fmt(-m, 3)} mg/L: breaks the rule</span>"
        else:
            state = f"<span class='finding'>{leaves} by {fmt_margin(-m).lstrip('+')} mg/L</span> (within the tolerance)"
        rows.append([f"DO of {esc(z)} against {esc(rng)}: smallest margin (mg/L)", fmt_margin(o_do.get(z)), fmt_margin(m),
                     "0", state])
    # margins other engineers' verification adds (zone -> mg/L), shown as they come
    known = {"do_margin_mg_L", "optimiser_do_margin_mg_L"}
    for key, val in ver.items():
        if key in known or not isinstance(val, dict) or not key.endswith("_mg_L"):
            continue
        if all(isinstance(v, (int, float)) for v in val.values()):
            for z, v in val.items():
                rows.append([f"{esc(key.replace('_', ' ').replace(' mg L', ''))}: {esc(z)} (mg/L)", "-",
                             fmt_margin(v), "-", "<span class='finding'>negative</span>" if v < 0 else ""])
    table = _grid(["figure", "optimiser", "re-simulated", "limit", "re-simulated against the limit"], rows)
    verdict = ("<p class='ok'>Verified: the independent simulator confirms the schedule within the tolerances.</p>"
               if ver.get("verified") else
               "<p class='finding'>Not verified: the re-simulated schedule breaks a limit beyond the tolerances.</p>")
    extra = []
    if ver.get("rule"):
        extra.append(f"Rule: {esc(ver['rule'])}.")
    if ver.get("simulated_days") is not None:
        extra.append(f"The simulator ran {ver['simulated_days']} day(s) until the day repeated"
                     + (f", starting from the {esc(ver['start'])}" if ver.get("start") else "") + ".")
    if ver.get("energy_kWh_per_day") is not None:
        extra.append(f"Re-simulated blower energy {fmt(ver['energy_kWh_per_day'])} kWh/d.")
    return verdict + table + (f"<p>{' '.join(extra)}</p>" if extra else "")


def _marginal(f: StudyFolder) -> str:
    items = f.summary.get("marginal_costs") or []
    if not items:
        return "<p>No marginal costs: they are given for an optimal solution only.</p>"
    cur = f.summary.get("currency") or ""
    binding = [marginal_sentence(i, cur) for i in items if i.get("binding", True)]
    slack = [marginal_sentence(i, cur) for i in items if not i.get("binding", True)]
    out = []
    if binding:
        out.append("<ul class='plain'>" + "".join(f"<li>{esc(x)}</li>" for x in binding) + "</ul>")
    if slack:
        out.append("<p>Limits the optimised schedule does not reach:</p><ul class='plain'>"
                   + "".join(f"<li>{esc(x)}</li>" for x in slack) + "</ul>")
    est = {i.get("estimated") for i in items} - {None}
    if est:
        what = " and ".join(sorted({"kWh_per_day": "the energy", "cost_per_day": "the money"}.get(e, e) for e in est))
        out.append(f"<p>The optimiser's objective gives one of the two figures exactly; {what} is converted at the "
                   "day's mean price. Each figure holds for a small change; larger changes cost more or less.</p>")
    return "".join(out)


def _solver(f: StudyFolder) -> str:
    sol = f.summary.get("solver") or {}
    if not sol:
        return "<p>No solver statistics in summary.json.</p>"
    rows = [("status", esc(sol.get("status"))), ("message", esc(sol.get("message"))),
            ("iterations", fmt(sol.get("iterations"), 0)), ("variables", fmt(sol.get("variables"), 0)),
            ("constraints", fmt(sol.get("constraints"), 0))]
    dp = f.summary.get("dispatch") or {}
    if dp.get("rounds") is not None:
        rows.append(("blower dispatch rounds", f"{len(dp['rounds'])}" + (f" ({esc(dp['stopped'])})" if dp.get("stopped")
                                                                          else "")))
    sm = f.summary.get("smoothing") or {}
    if sm:
        rows.append(("smoothing weight / penalty", f"{fmt(sm.get('weight'), 4)} / {fmt(sm.get('penalty'), 4)}"))
    parts = [_kv(rows)]
    attempts = sol.get("attempts") or []
    if attempts:
        parts.append("<h3>Attempts</h3>" + _grid(["start", "status", "iterations", "time (s)", "message"], [
            [esc(a.get("rung", "")), esc(a.get("status", "")), fmt(a.get("iterations"), 0), fmt(a.get("seconds"), 1),
             esc(a.get("message", ""))] for a in attempts], left=2))
    timings = sol.get("timings") or {}
    if timings:
        parts.append("<h3>Time by step</h3>" + _grid(["step", "time (s)"], [
            [esc(k.removesuffix("_s").replace("_", " ")), fmt(v, 2)] for k, v in timings.items()]))
    return "".join(parts)


#: summary.json keys the parts above present; any other key is listed as it comes (:func:`_further`).
_PRESENTED = {"status", "plant", "layout", "objective", "currency", "energy_kWh_per_day", "cost_per_day", "baseline",
              "saving_percent", "cost_saving_percent", "effluent", "min_do_margin_mg_L", "do_margin_mg_L", "limits",
              "verification", "verified", "marginal_costs", "infeasibility", "smoothing", "solver", "messages",
              "airtaper_version", "inputs", "dispatch"}


def _further(f: StudyFolder) -> str:
    """Figures summary.json holds beyond the parts above (later additions), as name and value."""
    rows = []

    def add(name: str, v) -> None:
        if isinstance(v, bool) or v is None or isinstance(v, str):
            rows.append((name, esc(fmt(v))))
        elif isinstance(v, (int, float)):
            rows.append((name, fmt(v, 0 if isinstance(v, int) else 3)))

    for key, val in f.summary.items():
        if key in _PRESENTED:
            continue
        if isinstance(val, dict):
            for k, v in val.items():
                add(f"{key}: {k}", v)
        else:
            add(key, val)
    return f"<h2>Further figures</h2>{_kv(rows)}" if rows else ""


def report_html(folder: StudyFolder, images: dict[str, bytes], captions: dict[str, str], files: list[str]) -> str:
    """The page (see module notes). ``images``: PNG bytes by figure name; ``captions`` by name; ``files``: the
    folder's files once the report is written."""
    s = folder.summary
    plant = s.get("plant", "")
    title = f"Aeration study: {plant}" if plant else "Aeration study"
    findings = _findings(folder)
    find_html = ("<section class='findings'><h2>Findings</h2><ul class='plain'>"
                 + "".join(f"<li>{esc(x)}</li>" for x in findings) + "</ul></section>") if findings else ""
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{esc(title)}</title>
<style>{_CSS}</style></head><body>
<p class="caution"><strong>Caution.</strong> {esc(CAUTION)}</p>
<h1>{esc(title)}</h1>
<p class="sub">airtaper {esc(s.get('airtaper_version', ''))} optimize, layout {esc(s.get('layout', '-'))};
objective: {esc(s.get('objective', '-'))}.
Column meanings and units of every file: docs/outputs.md.</p>
{find_html}
<h2>Result</h2>{_headline(folder)}
<h2>Inputs</h2>{_inputs(folder, images)}
<h2>Schedule</h2>{_results(folder, images, captions)}
<h2>Verification by the independent simulator</h2>{_verification(folder)}
<h2>Marginal costs</h2>{_marginal(folder)}
<h2>Solver</h2>{_solver(folder)}
{_further(folder)}
<h2>Files</h2><p>{esc(', '.join(files))}</p>
</body></html>
"""


__all__ = ["hours_table", "report_html"]
