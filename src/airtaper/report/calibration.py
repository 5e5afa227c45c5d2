"""Outputs of a calibration: override file, tables, summary, figures and a small HTML report.

Every file is written atomically (:mod:`airtaper.report.atomic`):

* ``overrides.toml`` — the fitted values as key paths into the layout (``optimize
  --overrides``), with the intervals as comments;
* ``parameters.csv`` — one row per parameter: layout value, fitted value, standard
  error, 95 % interval;
* ``fit.csv`` — one row per logged value used: ``time_h``, ``kind`` (do/nh4),
  ``location``, ``measured``, ``fitted``, ``weighted_residual``;
* ``summary.json``; ``fit.png`` (measured and fitted DO per zone over the record,
  NH4-N below); ``residuals.png`` (residuals over time and their spread per zone);
  ``report.html`` (self-contained: the figures are embedded).
"""

from __future__ import annotations

import base64
import html
import io
from pathlib import Path

import numpy as np

from airtaper.layout.overrides import overrides_to_toml
from airtaper.optimize.results import jsonable
from airtaper.report.atomic import write_bytes_atomic, write_csv_atomic, write_json_atomic, write_text_atomic

CAUTION = (
    "Planning estimates from a process model fitted to logged data. Local codes, discharge permits and licensed "
    "engineers decide what is built and how the plant is operated; check fitted values against field tests "
    "before relying on them."
)

OUTPUT_NAMES = ("overrides.toml", "parameters.csv", "fit.csv", "summary.json", "fit.png", "residuals.png",
                "report.html")


def _plt():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def _png(fig) -> bytes:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110)
    _plt().close(fig)
    return buf.getvalue()


def fit_figure_png(table, title: str) -> bytes:
    """Measured (dots) and fitted (line) DO per zone over the record; NH4-N in the last panel."""
    plt = _plt()
    do = table[table["kind"] == "do"]
    nh4 = table[table["kind"] == "nh4"]
    zones = list(dict.fromkeys(do["location"]))
    rows = len(zones) + (1 if len(nh4) else 0)
    fig, axes = plt.subplots(rows, 1, figsize=(10, 1.9 * rows + 0.8), sharex=True, constrained_layout=True,
                             squeeze=False)
    axes = axes[:, 0]
    for ax, z in zip(axes, zones):
        g = do[do["location"] == z]
        ax.plot(g["time_h"], g["measured"], ".", ms=2.5, color="0.55", label="measured")
        ax.plot(g["time_h"], g["fitted"], "-", lw=1.2, color="tab:blue", label="fitted model")
        ax.set_ylabel(f"DO {z}\n(mg/L)")
    if len(nh4):
        ax = axes[-1]
        for where, g in nh4.groupby("location", sort=False):
            ax.plot(g["time_h"], g["measured"], ".", ms=2.5, label=f"{where} measured")
            ax.plot(g["time_h"], g["fitted"], "-", lw=1.2, label=f"{where} fitted")
        ax.set_ylabel("NH4-N\n(mg/L)")
        ax.legend(fontsize=7, ncol=4, loc="upper right")
    axes[0].legend(fontsize=7, ncol=2, loc="upper right")
    axes[0].set_title(title)
    axes[-1].set_xlabel("time from midnight of day 1 (h)")
    return _png(fig)


def residual_figure_png(table) -> bytes:
    """Residuals (fitted - measured) over time per location, and their spread (box plot)."""
    plt = _plt()
    fig, (a1, a2) = plt.subplots(1, 2, figsize=(11, 4), gridspec_kw={"width_ratios": [3, 1]}, constrained_layout=True)
    groups = []
    for (kind, where), g in table.groupby(["kind", "location"], sort=False):
        err = g["fitted"].to_numpy() - g["measured"].to_numpy()
        a1.plot(g["time_h"], err, ".", ms=2, label=f"{kind.upper()} {where}")
        groups.append((f"{kind.upper()} {where}", err))
    a1.axhline(0.0, color="k", lw=0.8)
    a1.set_xlabel("time from midnight of day 1 (h)")
    a1.set_ylabel("fitted - measured (mg/L)")
    a1.legend(fontsize=7, ncol=3, markerscale=3)
    a1.set_title("residuals over time (look for drift or a daily pattern)")
    a2.boxplot([e for _, e in groups])
    a2.set_xticks(range(1, len(groups) + 1), [n for n, _ in groups], rotation=60, fontsize=7)
    a2.axhline(0.0, color="k", lw=0.8)
    a2.set_title("spread")
    return _png(fig)


def _fmt(x, digits=4) -> str:
    if x is None or (isinstance(x, float) and not np.isfinite(x)):
        return "-"
    return f"{x:.{digits}g}"


def report_html(summary: dict, fit_png: bytes | None, residual_png: bytes | None) -> str:
    rows = []
    for p in summary["parameters"]:
        rows.append("<tr>" + "".join(f"<td>{html.escape(str(c))}</td>" for c in (
            p["parameter"], _fmt(p.get("layout_value")), _fmt(p.get("fitted")),
            f"{_fmt(p.get('ci95_low'))} to {_fmt(p.get('ci95_high'))}", _fmt(p.get("standard_error"), 2),
            _fmt(p.get("rms_do_mg_L"), 3))) + "</tr>")
    params = ("<table><tr><th>parameter</th><th>layout</th><th>fitted</th><th>95 % interval</th><th>standard error"
              "</th><th>DO RMS error (mg/L)</th></tr>" + "".join(rows) + "</table>")
    st = summary.get("statistics") or {}
    rms = "".join(f"<li>{html.escape(k)}: {v:.3f} mg/L</li>" for k, v in summary["rms_mg_L"].items())
    msgs = "".join(f"<li>{html.escape(m)}</li>" for m in summary["messages"]) or "<li>none</li>"
    held = "".join(f"<li>{html.escape(m)}</li>" for m in summary["held"].values())
    figs = ""
    for png, alt in ((fit_png, "measured and fitted DO per zone"), (residual_png, "residuals")):
        if png:
            figs += f'<img alt="{alt}" src="data:image/png;base64,{base64.b64encode(png).decode()}">'
    rec = summary["record"]
    solver = summary["solver"]
    cond = st.get("condition_number")
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>airtaper calibration: {html.escape(summary['plant'])}</title>
<style>
body {{ font-family: sans-serif; max-width: 1100px; margin: 2em auto; color: #222; }}
table {{ border-collapse: collapse; }} td, th {{ border: 1px solid #bbb; padding: .25em .6em; text-align: right; }}
img {{ max-width: 100%; display: block; margin: 1em 0; }}
.caution {{ border-left: 4px solid #c60; background: #fff4e5; padding: .6em 1em; }}
</style></head><body>
<h1>Calibration: {html.escape(summary['plant'])}</h1>
<p class="caution"><strong>Caution.</strong> {html.escape(CAUTION)}</p>
<p>Data {html.escape(str(summary['data']))}: {rec['days']:.3g} days from {rec['start_h']:g} h, {rec['rows']} rows
every {60 * rec['interval_h']:.3g} min; the first {rec['warmup_h']:g} h are a warm-up (not fitted).
Status: <strong>{html.escape(summary['status'])}</strong>; {summary['observations']['used']} logged values fitted,
Ipopt {solver['iterations']} iterations.</p>
<h2>Fitted values</h2>{params}
<p>Intervals: estimate &plusmn; t(0.975) x standard error, the covariance from the reduced Hessian scaled by the
residual variance ({_fmt(st.get('residual_variance'), 3)} in units of the stated noise). Condition number of the
scaled information matrix: {_fmt(cond, 3)}.</p>
<h2>Fit quality (RMS of fitted - measured)</h2><ul>{rms}</ul>
<h2>Not fitted</h2><ul>{held or '<li>none</li>'}</ul>
<h2>Messages</h2><ul>{msgs}</ul>
<h2>Figures</h2>{figs}
<p>The fitted values are in <code>overrides.toml</code>: <code>airtaper optimize LAYOUT --overrides
overrides.toml</code> uses them without changing the layout file.</p>
</body></html>
"""


def overrides_text(result) -> str:
    s = result.summary
    header = (f"airtaper calibration of {s['plant']} (layout {s['layout']})\n"
              f"fitted to {s['data']}: {s['record']['days']:.3g} days; planning estimates only.\n"
              "Use with: airtaper optimize LAYOUT --overrides THIS_FILE")
    return overrides_to_toml(result.overrides, header, result.override_notes)


def write_calibration_outputs(out_dir: str | Path, result, *, figures: bool = True) -> list[Path]:
    """Write every output of ``result`` (:class:`~airtaper.calibrate.fit.CalibrationResult`) to ``out_dir``."""
    out = Path(out_dir)
    written = []
    if result.overrides:
        written.append(write_text_atomic(out / "overrides.toml", overrides_text(result)))
    written.append(write_csv_atomic(out / "parameters.csv", result.estimates))
    written.append(write_csv_atomic(out / "fit.csv", result.observations))
    written.append(write_json_atomic(out / "summary.json", jsonable(result.summary)))
    fit_png = res_png = None
    if figures and len(result.observations):
        fit_png = fit_figure_png(result.observations, f"{result.summary['plant']}: measured and fitted")
        res_png = residual_figure_png(result.observations)
        written.append(write_bytes_atomic(out / "fit.png", fit_png))
        written.append(write_bytes_atomic(out / "residuals.png", res_png))
    written.append(write_text_atomic(out / "report.html", report_html(result.summary, fit_png, res_png)))
    return written


def console_summary(summary: dict) -> str:
    lines = [f"calibration       {summary['plant']}: {summary['status']}"]
    for p in summary["parameters"]:
        extra = f", DO RMS {p['rms_do_mg_L']:.3f} mg/L" if p.get("rms_do_mg_L") is not None else ""
        if p.get("ci95_low") is not None:
            lines.append(f"  {p['parameter']:<14} {p['fitted']:.4f}  (95 % {p['ci95_low']:.4f} to "
                         f"{p['ci95_high']:.4f}; layout {p['layout_value']:.4g}){extra}")
        else:
            lines.append(f"  {p['parameter']:<14} {p['fitted']:.4f}{extra}")
    for k, v in summary["rms_mg_L"].items():
        if k.startswith("nh4."):
            lines.append(f"  NH4-N RMS {k[4:]:<8} {v:.3f} mg/L")
    st = summary.get("statistics")
    if st and st.get("condition_number") is not None:
        lines.append(f"condition number  {st['condition_number']:.3g}")
    lines.append(f"solver            {summary['solver']['iterations']} Ipopt iterations, "
                 f"{summary['solver']['timings'].get('total_s', 0.0):.1f} s")
    for m in summary["messages"]:
        lines.append("note              " + m)
    lines.append("caution           " + CAUTION)
    return "\n".join(lines)


__all__ = ["CAUTION", "OUTPUT_NAMES", "console_summary", "fit_figure_png", "overrides_text", "report_html",
           "residual_figure_png", "write_calibration_outputs"]
