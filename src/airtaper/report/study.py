"""Outputs of an aeration study: CSV tables, summary JSON, a PNG figure and an HTML report.

Every file is written atomically (:mod:`airtaper.report.atomic`). The tables are the
ones the optimisation produces:

* ``schedule`` — one row per period and aerated zone: ``period_start_h``,
  ``period_end_h``, ``zone``, ``airflow_Sm3_h``, ``airflow_per_diffuser_Sm3_h``,
  ``do_min_mg_L``, ``do_mean_mg_L``, ``nh4_mean_mg_L``, ``otr_kg_h``;
* ``header`` — one row per period: ``period``, ``pressure_kPa``,
  ``airflow_Sm3_h``, ``power_kW``;
* ``blowers`` — one row per period and blower (layouts with blowers): ``period_start_h``,
  ``period_end_h``, ``blower``, ``running``, ``airflow_Sm3_h``, ``power_kW``, ``efficiency``
  (empty when stopped), ``discharge_gauge_kPa``, ``starts`` (1 when it starts at the period's start);
* ``timeseries`` — one row per time step and zone (states, airflow, OTR);
* ``summary`` — a JSON-serialisable dict (see docs and :func:`console_summary`).
"""

from __future__ import annotations

import base64
import html
import io
from pathlib import Path

import numpy as np
import pandas as pd

from airtaper.report.atomic import write_bytes_atomic, write_csv_atomic, write_json_atomic, write_text_atomic

CAUTION = (
    "Planning estimates from a process model and clean-water diffuser data. Local codes, discharge permits "
    "and licensed engineers decide what is built and how the plant is operated; check every schedule "
    "against plant data before using it for control."
)

OUTPUT_NAMES = ("schedule.csv", "header.csv", "blowers.csv", "timeseries.csv", "summary.json", "schedule.png",
                "report.html")


def schedule_figure_png(schedule: pd.DataFrame, header: pd.DataFrame, timeseries: pd.DataFrame | None,
                        title: str, limits: dict | None = None) -> bytes:
    """A four-panel PNG: airflow per zone, DO per zone, effluent NH4-N, header power and pressure."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, axes = plt.subplots(4, 1, figsize=(9, 11), sharex=True, constrained_layout=True)
    zones = list(dict.fromkeys(schedule["zone"]))
    for z in zones:
        rows = schedule[schedule["zone"] == z]
        edges = np.append(rows["period_start_h"].to_numpy(), rows["period_end_h"].to_numpy()[-1])
        vals = rows["airflow_Sm3_h"].to_numpy()
        axes[0].stairs(vals, edges, label=z, linewidth=1.6, baseline=None)
    axes[0].set_ylabel("airflow (Sm3/h)")
    axes[0].legend(ncol=min(len(zones), 6), fontsize=8, loc="upper right")
    axes[0].set_title(title)

    if timeseries is not None and "SO" in timeseries:
        for z in zones:
            ts = timeseries[timeseries["zone"] == z]
            axes[1].plot(ts["time_h"], ts["SO"], label=z, linewidth=1.2)
    else:
        for z in zones:
            rows = schedule[schedule["zone"] == z]
            axes[1].plot(rows["period_start_h"], rows["do_mean_mg_L"], label=z)
    axes[1].set_ylabel("DO (mg/L)")

    if timeseries is not None and "SNH" in timeseries:
        eff = timeseries[timeseries["zone"] == "effluent"]
        if len(eff):
            axes[2].plot(eff["time_h"], eff["SNH"], color="k", label="effluent NH4-N")
    if limits:
        if limits.get("nh4_max_mg_L") is not None:
            axes[2].axhline(limits["nh4_max_mg_L"], color="r", linestyle="--", label="max period mean limit")
        if limits.get("nh4_mean_mg_L") is not None:
            axes[2].axhline(limits["nh4_mean_mg_L"], color="orange", linestyle=":", label="daily mean limit")
    axes[2].set_ylabel("NH4-N (mg/L)")
    axes[2].legend(fontsize=8, loc="upper right")

    edges = np.arange(len(header) + 1) * (schedule["period_end_h"].max() / max(len(header), 1))
    axes[3].stairs(header["power_kW"].to_numpy(), edges, color="tab:purple", label="blower power", baseline=None)
    axes[3].set_ylabel("power (kW)")
    axes[3].set_ylim(bottom=0.0)
    ax2 = axes[3].twinx()
    ax2.stairs(header["pressure_kPa"].to_numpy(), edges, color="tab:gray", linestyle="--", label="header pressure",
               baseline=None)
    ax2.set_ylabel("header pressure (kPa gauge)")
    ax2.set_ylim(bottom=0.0)
    axes[3].set_xlabel("time of day (h)")
    axes[3].set_xlim(0, edges[-1])

    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110)
    plt.close(fig)
    return buf.getvalue()


def _table_html(rows: list[tuple[str, str]]) -> str:
    body = "".join(f"<tr><th>{html.escape(k)}</th><td>{html.escape(v)}</td></tr>" for k, v in rows)
    return f"<table class='kv'>{body}</table>"


def _fmt(x, digits: int = 1) -> str:
    if x is None:
        return "-"
    if isinstance(x, (bool, np.bool_)):
        return "yes" if x else "no"
    if isinstance(x, (int, float, np.floating)):
        text = f"{x:,.{digits}f}"
        return text[1:] if text.startswith("-") and not text.strip("-0.,") else text  # no "-0.00"
    return str(x)


def report_html(summary: dict, schedule: pd.DataFrame, png: bytes | None) -> str:
    """A self-contained HTML report (the figure embedded as base64)."""
    title = f"airtaper aeration study: {summary.get('plant', '')}"
    base = summary.get("baseline", {}) or {}
    eff = summary.get("effluent", {}) or {}
    ver = summary.get("verification", {}) or {}
    currency = summary.get("currency", "")
    head = _table_html([
        ("status", str(summary.get("status"))),
        ("energy (kWh/d)", _fmt(summary.get("energy_kWh_per_day"))),
        (f"cost ({currency}/d)", _fmt(summary.get("cost_per_day"), 2)),
        ("baseline energy (kWh/d)", _fmt(base.get("energy_kWh_per_day"))),
        (f"baseline cost ({currency}/d)", _fmt(base.get("cost_per_day"), 2)),
        ("saving (%)", _fmt(summary.get("saving_percent"))),
        ("effluent NH4-N daily mean (mg/L)", _fmt(eff.get("nh4_mean_mg_L"), 2)),
        ("effluent NH4-N max period mean (mg/L)", _fmt(eff.get("nh4_max_mg_L"), 2)),
        ("effluent TN daily mean (mg/L)", _fmt(eff.get("tn_mean_mg_L"), 2)),
        ("smallest DO margin (mg/L)", _fmt(summary.get("min_do_margin_mg_L"), 2)),
        ("verified by the independent simulator", _fmt(ver.get("verified"))),
    ])
    mc_rows = []
    for item in summary.get("marginal_costs", []) or []:
        mc_rows.append("<tr>" + "".join(f"<td>{html.escape(_fmt(item.get(k), 2))}</td>" for k in
                                         ("limit", "where", "kWh_per_day", "cost_per_day", "per")) + "</tr>")
    mc = ("<table class='grid'><tr><th>limit</th><th>where</th><th>kWh/d</th><th>cost/d</th><th>per</th></tr>"
          + "".join(mc_rows) + "</table>") if mc_rows else "<p>none</p>"
    ver_rows = []
    opt_eff = ver.get("optimiser_effluent", {}) or {}
    sim_eff = ver.get("effluent", {}) or {}
    lim = summary.get("limits", {}) or {}
    for key, label in (("nh4_mean_mg_L", "NH4-N daily mean (mg/L)"), ("nh4_max_mg_L", "NH4-N max period mean (mg/L)"),
                       ("tn_mean_mg_L", "TN daily mean (mg/L)")):
        ver_rows.append((label, _fmt(opt_eff.get(key), 3), _fmt(sim_eff.get(key), 3), _fmt(lim.get(key), 2)))
    opt_do = ver.get("optimiser_do_margin_mg_L", {}) or {}
    for zone, margin in (ver.get("do_margin_mg_L", {}) or {}).items():
        ver_rows.append((f"DO margin {zone} (mg/L)", _fmt(opt_do.get(zone), 3), _fmt(margin, 3), "0"))
    verification = ("<table class='grid'><tr><th></th><th>optimiser</th><th>re-simulated</th><th>limit</th></tr>"
                    + "".join("<tr>" + "".join(f"<td>{html.escape(c)}</td>" for c in r) + "</tr>" for r in ver_rows)
                    + "</table>"
                    + f"<p>{html.escape(str(ver.get('rule', '')))}</p>") if ver_rows else ""
    pivot = schedule.pivot_table(index="zone", columns="period_start_h", values="airflow_Sm3_h", sort=False)
    sched = pivot.to_html(float_format=lambda v: f"{v:,.0f}", border=0, classes="grid")
    img = (f"<img alt='schedule' src='data:image/png;base64,{base64.b64encode(png).decode()}'/>" if png else "")
    notes = "".join(f"<li>{html.escape(str(n))}</li>" for n in summary.get("messages", []) or [])
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>{html.escape(title)}</title>
<style>
body {{ font-family: sans-serif; max-width: 1100px; margin: 2em auto; color: #222; }}
.caution {{ border-left: 4px solid #c60; background: #fff4e5; padding: .6em 1em; }}
table {{ border-collapse: collapse; margin: .5em 0 1.5em; font-size: 90%; }}
th, td {{ padding: .25em .6em; border-bottom: 1px solid #ddd; text-align: right; }}
table.kv th {{ text-align: left; }}
img {{ max-width: 100%; }}
</style></head><body>
<h1>{html.escape(title)}</h1>
<p class="caution"><strong>Caution.</strong> {html.escape(CAUTION)}</p>
<h2>Result</h2>{head}
<ul>{notes}</ul>
<h2>Verification by the independent simulator</h2>{verification}
<h2>Marginal costs</h2>{mc}
<h2>Airflow schedule (Sm3/h per zone and period start hour)</h2>{sched}
<h2>Figure</h2>{img}
</body></html>
"""


def write_study_outputs(out_dir: str | Path, *, schedule: pd.DataFrame, header: pd.DataFrame,
                        timeseries: pd.DataFrame, summary: dict, figure: bool = True,
                        blowers: pd.DataFrame | None = None) -> list[Path]:
    """Write the study's files into ``out_dir`` atomically; return their paths."""
    out = Path(out_dir)
    written = [
        write_csv_atomic(out / "schedule.csv", schedule),
        write_csv_atomic(out / "header.csv", header),
        *([write_csv_atomic(out / "blowers.csv", blowers)] if blowers is not None else []),
        write_csv_atomic(out / "timeseries.csv", timeseries),
        write_json_atomic(out / "summary.json", summary),
    ]
    png = None
    if figure:
        png = schedule_figure_png(schedule, header, timeseries, f"{summary.get('plant', '')}: tapered schedule",
                                  limits=summary.get("limits"))
        written.append(write_bytes_atomic(out / "schedule.png", png))
    written.append(write_text_atomic(out / "report.html", report_html(summary, schedule, png)))
    return written


def _dispatch_lines(dp: dict | None, cur: str) -> list[str]:
    """The blower dispatch in a few console lines."""
    if not dp:
        return []
    used = [f"{b} {_fmt(v.get('running_h'), 0)} h ({v.get('starts')} start{'s' if v.get('starts') != 1 else ''})"
            for b, v in (dp.get("blowers") or {}).items() if v.get("running_h")]
    idle = [b for b, v in (dp.get("blowers") or {}).items() if not v.get("running_h")]
    lines = [f"blowers           {', '.join(used) or 'none running'}"
             + (f"; idle {', '.join(idle)}" if idle else "")
             + f"; peak {_fmt(dp.get('peak_kW'), 1)} kW in period {dp.get('peak_period')}"]
    if dp.get("cost_per_day") is not None:
        lines.append(f"bill              energy {_fmt(dp.get('energy_cost'), 2)} + demand {_fmt(dp.get('demand_charge'), 2)}"
                     f" + starts {_fmt(dp.get('start_costs'), 2)} = {_fmt(dp.get('cost_per_day'), 2)} {cur}/d")
    rounds = [r for r in dp.get("rounds") or [] if "cost" in r]
    lines.append(f"staging           {len(rounds)} dispatch round{'s' if len(rounds) != 1 else ''}"
                 f" ({dp.get('stopped', '')})")
    for z, v in (dp.get("swing_zones") or {}).items():
        lines.append(f"swing zone        {z} aerated in {len(v.get('aerated_periods') or [])} periods, "
                     f"{v.get('switches')} switches per day")
    return lines


def console_summary(summary: dict) -> str:
    """A short plain-text summary for the terminal."""
    base = summary.get("baseline", {}) or {}
    eff = summary.get("effluent", {}) or {}
    ver = summary.get("verification", {}) or {}
    cur = summary.get("currency", "")
    lines = [
        f"status            {summary.get('status')}",
        f"energy            {_fmt(summary.get('energy_kWh_per_day'))} kWh/d"
        f"   (baseline {_fmt(base.get('energy_kWh_per_day'))} kWh/d, saving {_fmt(summary.get('saving_percent'))} %)",
        f"cost              {_fmt(summary.get('cost_per_day'), 2)} {cur}/d"
        f"   (baseline {_fmt(base.get('cost_per_day'), 2)} {cur}/d)",
        f"effluent NH4-N    mean {_fmt(eff.get('nh4_mean_mg_L'), 2)} mg/L, max period {_fmt(eff.get('nh4_max_mg_L'), 2)} mg/L"
        f", TN mean {_fmt(eff.get('tn_mean_mg_L'), 2)} mg/L",
        f"min DO margin     {_fmt(summary.get('min_do_margin_mg_L'), 2)} mg/L",
        f"verified          {_fmt(ver.get('verified'))}",
    ]
    lines.extend(_dispatch_lines(summary.get("dispatch"), cur))
    for item in summary.get("marginal_costs") or []:
        slack = "" if item.get("binding", True) else " (not binding)"
        lines.append(f"marginal          {item.get('limit')} {item.get('where', '')}: "
                     f"{_fmt(item.get('kWh_per_day'), 1)} kWh/d, {_fmt(item.get('cost_per_day'), 2)} {cur}/d "
                     f"{item.get('per', '')}{slack}")
    for m in summary.get("messages", []) or []:
        lines.append(f"note              {m}")
    lines.append("caution           " + CAUTION)
    return "\n".join(lines)
