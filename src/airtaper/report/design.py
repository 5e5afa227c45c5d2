"""Outputs of ``airtaper design`` and ``airtaper compare``: tables, summary, figures and a small HTML report.

Every file is written atomically (:mod:`airtaper.report.atomic`); docs/outputs.md lists
each file and column.

design: ``design.csv`` (one row per diffused zone: current, continuous and designed count,
densities, the value of one more diffuser, what binds the zone), ``binding.csv`` (one row
per zone, load day and limit whose dual is not zero), ``load_days.csv`` (one row per load day: energy, cost
and effluent on the designed and the current grid, verification), ``schedule.csv`` (the
designed grid's schedule of every load day), ``candidates.csv`` (every whole-count grid
evaluated and its annual cost), ``summary.json``, ``taper.png``, ``train.png`` and
``report.html``.

compare: ``compare.csv`` (one row per layout: annual energy and cost, margins, diffusers,
blowers, differences against the first), ``load_days.csv`` (one row per layout and load
day), ``summary.json``, ``train_<k>.png`` and ``report.html``.

The command writes its tables and summary, then builds the report from the folder exactly
as ``airtaper report DIR`` does later (:func:`write_design_report`,
:func:`write_compare_report`), so both give the same page. A train is drawn from its
layout (the one in memory, or read again from the path the summary names); when that
file no longer reads, the drawing already in the folder is kept.
"""

from __future__ import annotations

import base64
import html
import json
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pandas as pd

from airtaper.errors import InputError, Problem
from airtaper.plant import resolve_plant
from airtaper.report.atomic import write_bytes_atomic, write_csv_atomic, write_json_atomic, write_text_atomic
from airtaper.report.figures import figure_png, train_figure
from airtaper.report.text import CAUTION, fmt

_STYLE = """
body { font-family: sans-serif; max-width: 1150px; margin: 2em auto; color: #222; }
table { border-collapse: collapse; margin: .6em 0; } td, th { border: 1px solid #bbb; padding: .25em .6em; }
td { text-align: right; } td.l, th.l { text-align: left; }
img { max-width: 100%; display: block; margin: 1em 0; }
.caution { border-left: 4px solid #c60; background: #fff4e5; padding: .6em 1em; }
"""


def _plt():
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    return plt


def _img(png: bytes | None, alt: str) -> str:
    if not png:
        return ""
    return f'<img alt="{html.escape(alt)}" src="data:image/png;base64,{base64.b64encode(png).decode()}">'


def _table(headings: list[str], rows: list[list], left: int = 1) -> str:
    head = "".join(f'<th class="{"l" if i < left else ""}">{html.escape(h)}</th>' for i, h in enumerate(headings))
    body = "".join("<tr>" + "".join(f'<td class="{"l" if i < left else ""}">{html.escape(str(c))}</td>'
                                    for i, c in enumerate(r)) + "</tr>" for r in rows)
    return f"<table><tr>{head}</tr>{body}</table>"


def _page(title: str, body: str) -> str:
    return (f'<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8"><title>{html.escape(title)}</title>'
            f"<style>{_STYLE}</style></head><body>\n<h1>{html.escape(title)}</h1>\n"
            f'<p class="caution"><strong>Caution.</strong> {html.escape(CAUTION)}</p>\n{body}\n</body></html>\n')


def _messages(summary: dict) -> str:
    items = "".join(f"<li>{html.escape(m)}</li>" for m in summary.get("messages", []))
    return f"<h2>Messages</h2><ul>{items or '<li>none</li>'}</ul>"


# --- design -----------------------------------------------------------------------------------
def _payback_words(comp: dict, lead: str) -> str:
    """The comparison's payback for people: "<lead> 4.2 years", or why there is none (the comparison's own words,
    :func:`airtaper.optimize.design.payback_text`), never a bare "never"."""
    years, words = comp.get("payback_years"), comp.get("payback")
    if years is not None and (years > 0.0 or not words):
        return f"{lead} {fmt(years, 1)} years"
    if years is not None:  # none needed: the comparison says why
        return f"{lead} {words}"
    return words or f"no {lead.split()[-1]}"


def _periods_text(comp: dict) -> str:
    """How many periods a day the compared days were solved on: one number when they share it, else each day's."""
    by_day = comp.get("periods_by_day") or {}
    counts = sorted(set(by_day.values()))
    if len(counts) > 1:
        return "periods a day: " + ", ".join(f"{day} {n}" for day, n in by_day.items())
    return f"{counts[0] if counts else comp.get('periods', '')} periods a day"


def taper_figure_png(zones) -> bytes | None:
    """Diffusers per zone, current and designed, with the designed density written above each bar."""
    if zones is None or len(zones) == 0:
        return None
    plt = _plt()
    fig, ax = plt.subplots(figsize=(9, 4.2), constrained_layout=True)
    x = np.arange(len(zones))
    ax.bar(x - 0.2, zones["count_current"], width=0.4, color="#bbbbbb", edgecolor="black", label="current grid")
    ax.bar(x + 0.2, zones["count_design"], width=0.4, color="#1b4f72", edgecolor="black", label="designed grid")
    for i, (n, d) in enumerate(zip(zones["count_design"], zones["density_design_percent"])):
        ax.text(i + 0.2, n, f"{d:.1f} %", ha="center", va="bottom", fontsize=8)
    ax.set_xticks(x, list(zones["zone"]))
    ax.set_ylabel("diffusers")
    ax.set_title("Diffusers per zone (designed density above the bars)", fontsize=10)
    ax.legend(frameon=False)
    png = figure_png(fig)
    plt.close(fig)
    return png


def train_png(layout) -> bytes | None:
    """The report layer's drawing of a train (zones to scale by volume, density as dots, flows as arrows); None
    without a layout."""
    if layout is None:
        return None
    fig = train_figure(SimpleNamespace(plant=resolve_plant(layout)))
    if fig is None:
        return None
    png = figure_png(fig)
    _plt().close(fig)
    return png


def _binding_html(binding, cur: str) -> str:
    if binding is None or len(binding) == 0:
        return ""
    rows = [[r["zone"], r["load_day"], r["case"], r["limit"], f"{fmt(r['cost_per_year'], 1)} {r['per']}",
             fmt(r["diffuser_saving_per_year"], 2)] for r in binding.to_dict("records")]
    return ("<h2>What holds each zone (from the duals)</h2><p>A limit of a load day holds a zone when moving it "
            "changes the year's cost: transfer (the DO minimum, the air per diffuser at its maximum, the valve), "
            "turndown (the air per diffuser at its minimum), mixing (the mixing minimum). The last column is the "
            "day's energy cost saved per year by one more diffuser in the zone (negative: it costs).</p>"
            + _table(["zone", "load day", "case", "limit", f"{cur} per year", f"one more diffuser, {cur}/year"],
                     rows, left=4))


def design_html(summary: dict, zones, days, images: dict, binding=None) -> str:
    cur = summary.get("currency", "")
    body = [f"<p>Layout <code>{html.escape(str(summary['layout']))}</code>, {len(summary['load_days'])} load "
            f"day(s); status <strong>{html.escape(summary['status'])}</strong>.</p>"]
    d, c, comp = summary.get("design"), summary.get("current"), summary.get("comparison")
    if d is not None:
        rows = [["capital (new grid)", fmt(d["capital"], 0), fmt(c["capital"], 0) if c else "-"],
                ["capital per year", fmt(d["capital_per_year"], 0), fmt(c["capital_per_year"], 0) if c else "-"],
                ["energy per year (kWh)", fmt(d["energy_kWh_per_year"], 0),
                 fmt(c["energy_kWh_per_year"], 0) if c else "-"],
                ["energy cost per year", fmt(d["energy_cost_per_year"], 0),
                 fmt(c["energy_cost_per_year"], 0) if c else "-"],
                ["annual cost", fmt(d["annual_cost"], 0), fmt(c["annual_cost"], 0) if c else "-"],
                ["diffusers", fmt(d["diffusers"], 0), fmt(c["diffusers"], 0) if c else "-"]]
        body.append("<h2>Designed grid against the current grid</h2>"
                    + _table(["figure (" + cur + ")", "designed", "current"], rows))
        if comp is not None and comp.get("load_days_not_met_by_current"):
            body.append("<p><strong>The current grid cannot meet every load day:</strong> " + "; ".join(
                f"{html.escape(k)}: {html.escape(v)}" for k, v in comp["load_days_not_met_by_current"].items())
                + ". Its energy above, and the saving, payback and net present value below, are over the load days "
                f"it meets ({html.escape(', '.join(comp['load_days_compared']))}: "
                f"{fmt(comp['days_per_year_compared'], 0)} days a year), where the designed grid's energy costs "
                f"{fmt(comp['design_energy_cost_per_year_compared'], 0)} {html.escape(cur)} per year; on the other "
                "days the current grid breaks a limit, which no saving figure shows.</p>")
        if comp is not None:
            body.append(f"<p>Both grids compared as the design's search solved them ({_periods_text(comp)}, "
                        "each day's model optimum): the designed grid's energy cost there is "
                        f"{fmt(comp.get('design_energy_cost_per_year_compared'), 0)} {html.escape(cur)} per year on "
                        "the days compared.</p>")
            body.append(f"<p>Extra capital {fmt(comp['extra_capital'], 0)} {html.escape(cur)}, energy saving "
                        f"{fmt(comp['energy_saving_per_year'], 0)} {html.escape(cur)} per year "
                        f"({fmt(comp['energy_saving_kWh_per_year'], 0)} kWh): "
                        f"{html.escape(_payback_words(comp, 'simple payback'))}, net present value "
                        f"{fmt(comp['net_present_value'], 0)} {html.escape(cur)} over "
                        f"{fmt(summary['capital_inputs']['life_years'], 0)} years at "
                        f"{fmt(100 * summary['capital_inputs']['interest_rate'], 1)} %.</p>")
        body.append("<h2>Taper</h2>" + _table(
            ["zone", "current", "continuous", "designed", "step", "range", "density now %", "density designed %",
             "what holds the count"],
            [[r.zone, r.count_current, fmt(r.count_relaxed, 1), r.count_design, r.count_step,
              f"{r.count_lowest}-{r.count_highest}", fmt(r.density_current_percent, 1),
              fmt(r.density_design_percent, 1), r.binding] for r in zones.itertuples()], left=1))
        body.append(_img(images.get("taper.png"), "diffusers per zone") + _img(images.get("train.png"),
                                                                               "the designed train"))
        cols = ["load day", "days/year", "energy kWh/d", f"cost {cur}/d", "NH4-N mean", "TN mean"]
        has_cur = "energy_kWh_per_day_current" in days.columns
        if has_cur:
            cols += ["current kWh/d", f"current {cur}/d"]
        has_ver = "verified" in days.columns
        if has_ver:
            cols += ["verified", "DO margin"]
        rows = []
        for r in days.to_dict("records"):
            row = [r["load_day"], fmt(r["days_per_year"], 0), fmt(r["energy_kWh_per_day_design"], 0),
                   fmt(r["cost_per_day_design"], 1), fmt(r["nh4_mean_mg_L_design"], 2),
                   fmt(r["tn_mean_mg_L_design"], 2)]
            if has_cur:
                row += [fmt(r["energy_kWh_per_day_current"], 0), fmt(r["cost_per_day_current"], 1)]
            if has_ver:
                row += [fmt(bool(r["verified"])), fmt(r["min_do_margin_mg_L"], 3)]
            rows.append(row)
        body.append("<h2>Load days on the designed grid</h2>" + _table(cols, rows))
        body.append(_binding_html(binding, cur))
    body.append(_messages(summary))
    body.append("<p>Method: docs/design.md. Every load day's schedule is optimised with the blowers as one machine "
                "at the aggregate efficiency; run <code>airtaper optimize</code> on a day for its blower staging."
                "</p>")
    return _page(f"Diffuser-grid design: {summary['plant']}", "\n".join(body))


def write_design_outputs(out_dir: str | Path, result, *, figures: bool = True) -> list[Path]:
    """The design's tables and summary, then its report built from the folder (:func:`write_design_report`)."""
    out = Path(out_dir)
    written = []
    if len(result.zones):
        written += [write_csv_atomic(out / "design.csv", result.zones),
                    write_csv_atomic(out / "load_days.csv", result.days),
                    write_csv_atomic(out / "schedule.csv", result.schedule)]
        if result.binding is not None:
            written.append(write_csv_atomic(out / "binding.csv", result.binding))
    written.append(write_csv_atomic(out / "candidates.csv", result.candidates))
    written.append(write_json_atomic(out / "summary.json", result.summary))
    return written + write_design_report(out, layout=result.layout, figures=figures)


# --- a finished folder read back ----------------------------------------------------------------
def folder_kind(path: str | Path) -> str | None:
    """"design" or "compare" for a folder written by those commands (by the table only they write), else None."""
    p = Path(path)
    if (p / "compare.csv").is_file():
        return "compare"
    if (p / "candidates.csv").is_file():
        return "design"
    return None


def _summary(folder: Path, what: str) -> dict:
    path = folder / "summary.json"
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, ValueError) as exc:
        raise InputError(Problem(str(path), "-", f"not readable ({exc})", None, f"the summary written by {what}"))
    if not isinstance(data, dict):
        raise InputError(Problem(str(path), "-", "not a JSON object", type(data).__name__,
                                 f"the summary written by {what}"))
    return data


def _csv(folder: Path, name: str):
    path = folder / name
    if not path.is_file():
        return None
    try:
        return pd.read_csv(path)
    except (OSError, ValueError) as exc:
        raise InputError(Problem(str(path), "-", f"not a readable table ({exc})", None, "the table as written"))


def _layout_from(path, counts: dict | None, given: bool):
    """The layout at ``path`` (with the designed counts), or None when it no longer reads and was not given on the
    command line (then the drawing already in the folder is kept)."""
    from airtaper.layout import load_layout
    from airtaper.layout.loaddays import with_grid_counts

    if path is None:
        return None
    try:
        layout = load_layout(str(path), warnings=[])
    except InputError:
        if given:
            raise
        return None
    return with_grid_counts(layout, {z: int(n) for z, n in counts.items()}) if counts else layout


def _figure(folder: Path, name: str, draw) -> bytes | None:
    """A drawing made now, or the one already in the folder."""
    png = draw()
    if png is None and (folder / name).is_file():
        png = (folder / name).read_bytes()
    return png


def write_design_report(out_dir: str | Path, *, layout=None, layout_path: str | Path | None = None,
                        figures: bool = True) -> list[Path]:
    """Read a design folder and write its figures and ``report.html`` into it, each atomically."""
    folder = Path(out_dir)
    summary = _summary(folder, "airtaper design")
    zones = _csv(folder, "design.csv")
    zones = pd.DataFrame() if zones is None else zones
    days = _csv(folder, "load_days.csv")
    binding = _csv(folder, "binding.csv")
    images, written = {}, []
    if figures and len(zones):
        counts = (summary.get("design") or {}).get("counts")
        images["taper.png"] = taper_figure_png(zones)
        images["train.png"] = _figure(folder, "train.png", lambda: train_png(
            layout if layout is not None else _layout_from(layout_path or summary.get("layout"), counts,
                                                           layout_path is not None)))
        for name, png in images.items():
            if png:
                written.append(write_bytes_atomic(folder / name, png))
    written.append(write_text_atomic(folder / "report.html", design_html(summary, zones, days, images, binding)))
    return written


def design_console(summary: dict) -> str:
    lines = [f"status            {summary['status']}"]
    d, comp, cur = summary.get("design"), summary.get("comparison"), summary.get("currency", "")
    if d is not None:
        lines.append("designed grid     " + ", ".join(f"{z} {n}" for z, n in d["counts"].items()))
        if summary.get("current"):
            lines.append("current grid      " + ", ".join(f"{z} {n}" for z, n in summary["current"]["counts"].items()))
        lines.append(f"annual cost       {fmt(d['annual_cost'], 0)} {cur} (capital {fmt(d['capital_per_year'], 0)} "
                     f"+ energy {fmt(d['energy_cost_per_year'], 0)}; {fmt(d['energy_kWh_per_year'], 0)} kWh)")
        if comp is not None:
            lines.append(f"against current   extra capital {fmt(comp['extra_capital'], 0)} {cur}, saving "
                         f"{fmt(comp['energy_saving_per_year'], 0)} {cur}/year, "
                         f"{_payback_words(comp, 'payback')}, NPV {fmt(comp['net_present_value'], 0)}")
            if comp.get("load_days_not_met_by_current"):
                lines.append("                  on the load days the current grid meets ("
                             f"{', '.join(comp['load_days_compared'])}: "
                             f"{fmt(comp['days_per_year_compared'], 0)} days a year); it cannot meet "
                             + ", ".join(comp["load_days_not_met_by_current"]))
        for z, why in (summary.get("binding") or {}).items():
            lines.append(f"{z:<18}" + "; ".join(why))
    lines += [f"note              {m}" for m in summary.get("messages", [])]
    lines.append("caution           " + CAUTION)
    return "\n".join(lines)


# --- compare ----------------------------------------------------------------------------------
def compare_html(summary: dict, layouts, days, images: dict) -> str:
    cur = summary.get("currency", "")
    cols = [("layout", None), ("status", None), ("energy_kWh_per_year", 0), ("cost_per_year", 0),
            ("cost_vs_first_percent", 1), ("diffusers", 0), ("aerated_volume_m3", 0), ("blowers_in_service", 0),
            ("blower_running_h_per_year", 0), ("min_do_margin_mg_L", 3), ("nh4_mean_margin_mg_L", 3),
            ("tn_mean_margin_mg_L", 3)]
    heads = ["layout", "status", "energy kWh/year", f"cost {cur}/year", "cost vs first %", "diffusers",
             "aerated m3", "blowers", "blower h/year", "lowest DO margin", "NH4-N margin", "TN margin"]
    rows = [[r[c] if d is None else fmt(r[c], d) for c, d in cols] for r in layouts.to_dict("records")]
    diff_cols = [c for c in layouts.columns if c.endswith("_vs_first")]
    diffs = [[r["layout"]] + [fmt(r[c], 3) for c in diff_cols] for r in layouts.to_dict("records")]
    body = [f"<p>The first layout (<code>{html.escape(summary['reference'])}</code>) is the reference; each layout "
            "is optimised on each of its load days as <code>airtaper optimize</code> does it, and its year summed "
            "with the days' weights.</p>",
            "<h2>Side by side</h2>" + _table(heads, rows, left=2),
            "<h2>Differences against the first</h2>" + _table(["layout"] + [c[:-9] for c in diff_cols], diffs),
            "<h2>The trains</h2>"]
    for k, r in enumerate(layouts.to_dict("records"), start=1):
        body.append(f"<h3>{html.escape(r['layout'])}: {html.escape(r['diffusers_by_zone'])}</h3>"
                    + _img(images.get(f"train_{k}.png"), f"train of {r['layout']}"))
    day_heads = ["layout", "load day", "days/year", "status", "energy kWh/d", f"cost {cur}/d", "verified",
                 "binding marginal costs"]
    day_rows = [[r["layout"], r["load_day"], fmt(r["days_per_year"], 0), r["status"],
                 fmt(r["energy_kWh_per_day"], 0), fmt(r["cost_per_day"], 1), fmt(r["verified"]),
                 r["marginal_costs"] if isinstance(r["marginal_costs"], str) and r["marginal_costs"] else "-"]
                for r in days.to_dict("records")]
    body.append("<h2>Load days</h2>" + _table(day_heads, day_rows, left=2))
    body.append(_messages(summary))
    return _page("Layouts compared", "\n".join(body))


def write_compare_outputs(out_dir: str | Path, result, *, figures: bool = True) -> list[Path]:
    """The comparison's tables and summary, then its report built from the folder (:func:`write_compare_report`)."""
    out = Path(out_dir)
    written = [write_csv_atomic(out / "compare.csv", result.layouts),
               write_csv_atomic(out / "load_days.csv", result.days),
               write_json_atomic(out / "summary.json", result.summary)]
    return written + write_compare_report(out, plans=result.plans, figures=figures)


def write_compare_report(out_dir: str | Path, *, plans=None, figures: bool = True) -> list[Path]:
    """Read a compare folder and write its drawings and ``report.html`` into it, each atomically."""
    folder = Path(out_dir)
    summary = _summary(folder, "airtaper compare")
    layouts = _csv(folder, "compare.csv")
    days = _csv(folder, "load_days.csv")
    if layouts is None or days is None:
        missing = "compare.csv" if layouts is None else "load_days.csv"
        raise InputError(Problem(str(folder / missing), "-", "missing", None, "a finished folder of airtaper compare"))
    images, written = {}, []
    if figures:
        for k, label in enumerate(layouts["layout"], start=1):
            name = f"train_{k}.png"
            png = _figure(folder, name, lambda: train_png(
                plans[k - 1] if plans is not None else _layout_from(label, None, False)))
            if png:
                images[name] = png
                written.append(write_bytes_atomic(folder / name, png))
    written.append(write_text_atomic(folder / "report.html", compare_html(summary, layouts, days, images)))
    return written


def compare_console(summary: dict) -> str:
    cur = summary.get("currency", "")
    lines = [f"status            {summary['status']}"]
    for r in summary["layouts"]:
        e, c = r["energy_kWh_per_year"], r["cost_per_year"]
        de, dc = r["energy_kWh_per_year_vs_first"], r["cost_per_year_vs_first"]
        lines.append(f"{r['layout']:<18}{fmt(e, 0)} kWh/year ({'+' if (de or 0) >= 0 else ''}{fmt(de, 0)}), "
                     f"{fmt(c, 0)} {cur}/year ({'+' if (dc or 0) >= 0 else ''}{fmt(dc, 0)}), {r['status']}")
    lines += [f"note              {m}" for m in summary.get("messages", [])]
    lines.append("caution           " + CAUTION)
    return "\n".join(lines)


__all__ = ["compare_console", "compare_html", "design_console", "design_html", "folder_kind", "taper_figure_png",
           "train_png", "write_compare_outputs", "write_compare_report", "write_design_outputs", "write_design_report"]
