"""The report of a sweep or a year: ``report.html`` with the table and figures, the PNG files beside it.

Figures where people would rather look than read:

* ``sweep_energy.png`` - energy per day against each swept input (one panel per input;
  scenarios that do not meet the limits drawn hollow in red);
* ``sweep_margins.png`` - the compliance margins of each scenario (limit minus value for
  effluent NH4-N mean and maximum and TN, the smallest DO margin), negative in red;
* ``year_months.png`` - for a year: energy, cost and peak kW per month as bars.

Every file is written atomically; the page is self-contained (figures inlined).
"""

from __future__ import annotations

import base64
import math
from pathlib import Path

import pandas as pd

from airtaper.report.atomic import write_bytes_atomic, write_text_atomic
from airtaper.report.figures import _plt, figure_png
from airtaper.report.html import _CSS, esc
from airtaper.report.text import CAUTION, fmt

_MARGINS = (("nh4_mean_margin_mg_L", "NH4-N mean"), ("nh4_max_margin_mg_L", "NH4-N max period"),
            ("tn_mean_margin_mg_L", "TN mean"), ("min_do_margin_mg_L", "smallest DO"))


def _numeric(values) -> bool:
    vals = [v for v in values if v is not None and not (isinstance(v, float) and math.isnan(v))]
    return bool(vals) and all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in vals)


def energy_figure(frame, inputs: list[str]):
    """Energy per day against each swept input with numbers; None when there is none."""
    cols = [c for c in inputs if c in frame and _numeric(list(frame[c])) and frame[c].nunique() > 1]
    if not cols or frame["energy_kWh_per_day"].isna().all():
        return None
    plt = _plt()
    n = len(cols)
    fig, axes = plt.subplots(1, n, figsize=(min(4.2 * n, 13), 3.6), squeeze=False, sharey=True)
    ok = frame["compliant"].fillna(False).astype(bool)
    for ax, col in zip(axes[0], cols):
        x = frame[col].astype(float)
        y = frame["energy_kWh_per_day"].astype(float)
        ax.scatter(x[ok], y[ok], color="#1b4f72", marker="o", label="meets the limits")
        ax.scatter(x[~ok], y[~ok], facecolors="none", edgecolors="#b00020", marker="s", label="does not")
        ax.set_xlabel(col)
        ax.grid(alpha=0.3)
    axes[0][0].set_ylabel("blower energy, kWh/d")
    axes[0][0].legend(fontsize=8, loc="best")
    fig.tight_layout()
    return fig


def margins_figure(frame):
    """Compliance margins per scenario (limit - value), one group of bars per scenario."""
    cols = [(c, label) for c, label in _MARGINS if c in frame and frame[c].notna().any()]
    if not cols:
        return None
    import numpy as np

    plt = _plt()
    names = list(frame["scenario"].astype(str))
    x = np.arange(len(names))
    width = 0.8 / len(cols)
    fig, ax = plt.subplots(figsize=(min(max(6.0, 0.45 * len(names) * len(cols)), 13), 3.8))
    hatches = ("", "//", "..", "xx")
    for i, (col, label) in enumerate(cols):
        v = frame[col].astype(float).to_numpy()
        colours = ["#b00020" if (not math.isnan(a) and a < 0) else "#1e8449" for a in v]
        ax.bar(x + (i - (len(cols) - 1) / 2) * width, np.nan_to_num(v), width, color=colours,
               hatch=hatches[i % len(hatches)], edgecolor="#333", linewidth=0.4, label=label)
    ax.axhline(0.0, color="#333", linewidth=0.8)
    ax.set_xticks(x)
    ax.set_xticklabels(names, rotation=60 if len(names) > 8 else 0, ha="right" if len(names) > 8 else "center",
                       fontsize=8)
    ax.set_ylabel("margin to the limit, mg/L")
    ax.legend(fontsize=8, ncol=len(cols))
    ax.grid(axis="y", alpha=0.3)
    fig.tight_layout()
    return fig


def months_figure(months, currency: str):
    """Energy, cost and peak kW per month as bars (a year)."""
    import numpy as np

    plt = _plt()
    rows = [("energy_kWh", "energy, MWh", 1e-3), ("cost", f"cost, k{currency}", 1e-3), ("peak_kW", "peak, kW", 1.0)]
    rows = [r for r in rows if months[r[0]].notna().any()]
    fig, axes = plt.subplots(len(rows), 1, figsize=(9, 2.3 * len(rows)), sharex=True, squeeze=False)
    x = np.arange(len(months))
    for ax, (col, label, k) in zip(axes[:, 0], rows):
        ax.bar(x, months[col].astype(float).fillna(0.0) * k, color="#1b4f72")
        ax.set_ylabel(label)
        ax.grid(axis="y", alpha=0.3)
    axes[-1, 0].set_xticks(x)
    axes[-1, 0].set_xticklabels(list(months["month"].astype(str)))
    fig.tight_layout()
    return fig


def _img(name: str, png: bytes, caption: str) -> str:
    data = base64.b64encode(png).decode()
    return (f'<figure><img alt="{esc(caption)}" src="data:image/png;base64,{data}">'
            f"<figcaption>{esc(caption)} ({esc(name)})</figcaption></figure>")


def _cell(v) -> str:
    if v is None or v is pd.NA:
        return "-"
    if isinstance(v, float):
        if math.isnan(v):
            return "-"
        return fmt(v, 3 if abs(v) < 10 else 1)
    return esc("-" if v is None else fmt(v))


def _table(frame, columns: list[str]) -> str:
    cols = [c for c in columns if c in frame]
    head = "".join(f"<th>{esc(c)}</th>" for c in cols)
    body = "".join("<tr>" + "".join(('<td class="left">' if j == 0 else "<td>") + f"{_cell(r[c])}</td>"
                                    for j, c in enumerate(cols)) + "</tr>"
                   for r in frame.to_dict("records"))
    return f'<table class="nowrap"><tr>{head}</tr>{body}</table>'


def write_sweep_report(folder: str | Path, frame, summary: dict, months=None) -> list[Path]:
    """The figures and ``report.html`` of a sweep (``months``: a year's monthly table); return the paths."""
    folder = Path(folder)
    figs = []
    inputs = list(summary.get("inputs") or [])
    if months is not None:
        figs.append(("year_months.png", months_figure(months, summary.get("currency") or ""),
                     "Energy, cost and peak blower power per month."))
    figs.append(("sweep_energy.png", energy_figure(frame, inputs),
                 "Blower energy per day against each swept input (hollow red: the limits are not met)."))
    figs.append(("sweep_margins.png", margins_figure(frame),
                 "Margin to each limit per scenario (limit minus value; below zero, in red, the limit is broken)."))
    written, images = [], []
    for name, fig, caption in figs:
        if fig is None:
            continue
        png = figure_png(fig)
        written.append(write_bytes_atomic(folder / name, png))
        images.append(_img(name, png, caption))
    kind = summary.get("kind", "sweep")
    facts = [("layout", summary.get("layout")), ("scenarios", summary.get("scenarios")),
             ("statuses", summary.get("statuses")), ("workers", summary.get("workers")),
             ("wall time of this run, s", fmt(summary.get("wall_s"), 1))]
    if summary.get("grid"):
        facts.insert(1, ("grid", summary.get("grid")))
    year = ""
    if months is not None:
        tot = summary.get("year") or {}
        facts += [("energy per year, MWh", fmt((tot.get("energy_kWh") or 0) * 1e-3, 1)),
                  (f"cost per year, {summary.get('currency') or ''}", fmt(tot.get("cost"), 0)),
                  ("days meeting every limit", f"{fmt(tot.get('compliant_days'), 0)} of {fmt(tot.get('days'), 0)}")]
        year = "<h2>Months</h2>" + _table(months, list(months.columns))
    kv = "".join(f'<tr><th class="left">{esc(k)}</th><td class="left">{esc(v)}</td></tr>' for k, v in facts)
    shown = ["scenario", *inputs, "status", "exit_code", "energy_kWh_per_day", "cost_per_day", "peak_kW",
             "saving_percent", "compliant", "nh4_mean_margin_mg_L", "min_do_margin_mg_L", "ipopt_s", "run_s"]
    messages = [(r["scenario"], r["message"]) for r in frame.to_dict("records") if r.get("message")
                and r.get("status") != "optimal"]
    notes = "".join(f"<li><b>{esc(s)}</b>: {esc(m)}</li>" for s, m in messages)
    page = f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>airtaper {esc(kind)}: {esc(summary.get('layout'))}</title>
<style>{_CSS}</style></head><body>
<h1>airtaper {esc(kind)}</h1>
<p class="caution"><strong>Caution.</strong> {esc(CAUTION)}</p>
<table class="kv">{kv}</table>
{year}
<h2>Figures</h2>{''.join(images) or '<p>No figure: no swept number with results.</p>'}
<h2>Scenarios</h2>
<p>One row per scenario; every column, with the scenario's own output folder, is in <code>results.csv</code>
and <code>results.parquet</code>.</p>
{_table(frame, shown)}
{'<h2>Scenarios that did not give an optimal schedule</h2><ul class="plain">' + notes + '</ul>' if notes else ''}
</body></html>
"""
    written.append(write_text_atomic(folder / "report.html", page))
    return written


__all__ = ["energy_figure", "margins_figure", "months_figure", "write_sweep_report"]
