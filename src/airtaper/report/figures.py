"""Figures of a finished study, drawn from its output folder (:class:`~airtaper.report.folder.StudyFolder`).

Every function takes the folder and returns a matplotlib ``Figure``, or None when
the files it needs are absent (a run without blowers.csv has no blower run chart;
without the layout there is no drawing of the train). Conventions: axis labels carry
units; lines differ by style and marker as well as colour so that a greyscale print
stays readable; limits are drawn where they apply and the axes always include them;
values beyond a limit are marked. :data:`FIGURES` lists them in report order and
:func:`figure_png` renders one to PNG bytes.
"""

from __future__ import annotations

import io
from typing import Callable

import numpy as np

from airtaper import units
from airtaper.report.folder import StudyFolder

#: Line styles per zone: colour, dash pattern and marker all differ (greyscale-readable).
_STYLES = [("#1b4f72", "-", "o"), ("#b03a2e", "--", "s"), ("#1e8449", "-.", "^"), ("#7d3c98", ":", "D"),
           ("#9a7d0a", (0, (5, 1, 1, 1)), "v"), ("#515a5a", (0, (1, 1)), "P"), ("#ca6f1e", (0, (8, 2)), "X")]
_TINY = 1e-6  # relative tolerance for "above a maximum" (the optimum sits on its bounds)


def _plt():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def _style(i: int) -> dict:
    c, ls, mk = _STYLES[i % len(_STYLES)]
    return dict(color=c, linestyle=ls, marker=mk)


def _hour_axis(ax, edges) -> None:
    ax.set_xlim(edges[0], edges[-1])
    span = edges[-1] - edges[0]
    step = 2 if span <= units.HOURS_PER_DAY else 4
    ax.set_xticks(np.arange(edges[0], edges[-1] + 1e-9, step))
    ax.set_xlabel("hour of day (h)")
    ax.grid(True, axis="both", color="#dddddd", linewidth=0.6)


def _include(ax, *values, pad: float = 0.08, bottom: float | None = 0.0) -> None:
    """Set the y limits so that the data and every limit line sit inside, away from the edges."""
    vals = np.concatenate([np.ravel(np.asarray(v, dtype=float)) for v in values if v is not None])
    vals = vals[np.isfinite(vals)]
    if not len(vals):
        return
    lo = min(vals.min(), bottom) if bottom is not None else vals.min()
    hi = vals.max()
    span = hi - lo if hi > lo else max(abs(hi), 1.0)
    ax.set_ylim(lo - (pad * span if bottom is None or lo < bottom else 0.0), hi + pad * span)


# -- fixed layout -----------------------------------------------------------------------------------
# The figures are laid out once from their labels' lengths (:func:`_fixed_layout`), not by a layout engine:
# constrained layout measured every label with the renderer twice per figure, about a third of the report's
# figure time. Widths are estimated from the number of characters (:data:`_CHAR_EM`), with room to spare.

#: Width of one character of a label, em (DejaVu Sans, matplotlib's default font: digits 0.64 em, most letters
#: less; wide capitals up to 0.8 em, so a little more than the digits).
_CHAR_EM = 0.7
#: Inches per point.
_PT = 1.0 / 72.0
#: Space between a label and the figure's edge or the next label, inches.
_PAD_IN = 0.08


def _size_pt(size) -> float:
    """A matplotlib font size (points or a name such as "medium") in points."""
    from matplotlib.font_manager import FontProperties

    return FontProperties(size=size).get_size_in_points()


def _text_in(text: str, size="medium") -> float:
    """Estimated width of a one-line label, inches."""
    return len(text) * _CHAR_EM * _size_pt(size) * _PT


def _line_in(size="medium") -> float:
    """Height of one line of text, inches."""
    return 1.2 * _size_pt(size) * _PT


def _tick_labels(axis) -> list[str]:
    """The major tick labels an axis shows within its view (no drawing: the locator and formatter only)."""
    locs = list(axis.get_majorticklocs())
    labels = axis.get_major_formatter().format_ticks(locs)
    lo, hi = sorted(axis.get_view_interval())
    tol = 1e-9 * max(abs(hi - lo), 1e-300)
    return [t for v, t in zip(locs, labels) if lo - tol <= v <= hi + tol and t]


def _tick_room_in(axis, shown: bool) -> float:
    """Room of an axis' tick labels (with the ticks and their pad) across the axis, inches; 0 when hidden."""
    import matplotlib

    if not shown:
        return 0.0
    name = axis.axis_name
    size = axis.get_tick_params(which="major").get("labelsize", matplotlib.rcParams[f"{name}tick.labelsize"])
    labels = _tick_labels(axis)
    if not labels:
        return 0.0
    ticks = (matplotlib.rcParams[f"{name}tick.major.size"] + matplotlib.rcParams[f"{name}tick.major.pad"]) * _PT
    if name == "x":
        return _line_in(size) + ticks
    return max(_text_in(t, size) for t in labels) + ticks


def _label_room_in(axis) -> float:
    """Room of an axis' label (one line, with its pad), inches; 0 without one."""
    if not axis.get_label_text() or not axis.label.get_visible():
        return 0.0
    return _line_in(axis.label.get_fontsize()) + axis.labelpad * _PT


def _y_room_in(ax, side: str = "left") -> float:
    """Room an axes' y tick labels and y label take on ``side``, inches."""
    if not ax.axison:
        return 0.0
    params = ax.yaxis.get_tick_params(which="major")
    shown = params.get("labelleft", True) if side == "left" else params.get("labelright", False)
    room = _tick_room_in(ax.yaxis, shown)
    return room + (_label_room_in(ax.yaxis) if ax.yaxis.get_label_position() == side else 0.0)


def _x_room_in(ax) -> float:
    """Room an axes' x tick labels and x label take below it, inches."""
    if not ax.axison:
        return 0.0
    shown = ax.xaxis.get_tick_params(which="major").get("labelbottom", True)
    return _tick_room_in(ax.xaxis, shown) + _label_room_in(ax.xaxis)


def _x_end_in(ax) -> float:
    """Half the width of the x tick label on an axes' right edge (it reaches beyond the edge), inches."""
    import matplotlib

    if not ax.axison or not ax.xaxis.get_tick_params(which="major").get("labelbottom", True):
        return 0.0
    locs = list(ax.xaxis.get_majorticklocs())
    labels = ax.xaxis.get_major_formatter().format_ticks(locs)
    hi = max(ax.get_xlim())
    edge = [t for v, t in zip(locs, labels) if abs(v - hi) <= 1e-9 * max(abs(hi), 1.0)]
    return 0.5 * _text_in(edge[0], matplotlib.rcParams["xtick.labelsize"]) if edge else 0.0


def _title_room_in(ax) -> float:
    """Room of an axes' title above it (in any of its three places; sized as the largest title), inches."""
    import matplotlib

    if not any(ax.get_title(loc) for loc in ("center", "left", "right")):
        return 0.0
    return _line_in(matplotlib.rcParams["axes.titlesize"]) + matplotlib.rcParams["axes.titlepad"] * _PT


def _suptitle_room_in(fig) -> float:
    """Room of the figure's title (``fig.suptitle``, placed 2 % of the height below the top edge), inches."""
    import matplotlib

    if not fig.get_suptitle():
        return 0.0
    return 0.02 * fig.get_size_inches()[1] + _line_in(matplotlib.rcParams["figure.titlesize"])


def _fixed_layout(fig, axes, *, top_in: float = 0.0, bottom_in: float = 0.0, right_in: float = 0.0) -> None:
    """Place a grid of axes (``axes``: rows x columns as from ``plt.subplots(squeeze=False)``; hidden ones are
    left out) so that every label fits, from the labels' estimated sizes: margins and gaps in inches.

    ``top_in``: room above the top row's titles (a figure title); ``bottom_in``: room below the bottom row beyond
    its x labels (a legend there); ``right_in``: room right of the last column (a colorbar, a second y axis).
    """
    width, height = fig.get_size_inches()
    rows, cols = axes.shape
    shown = [[ax if ax.get_visible() else None for ax in row] for row in axes]
    left = max((_y_room_in(row[0]) for row in shown if row[0] is not None), default=0.0) + _PAD_IN
    wgap = max((_y_room_in(ax) for row in shown for ax in row[1:] if ax is not None), default=0.0) + 2 * _PAD_IN
    top = max((_title_room_in(ax) for ax in shown[0] if ax is not None), default=0.0) + top_in + _PAD_IN
    hgap = max(((_x_room_in(shown[r - 1][c]) if shown[r - 1][c] is not None else 0.0)
                + (_title_room_in(shown[r][c]) if shown[r][c] is not None else 0.0)
                for r in range(1, rows) for c in range(cols)), default=0.0) + 2 * _PAD_IN
    lowest = [next((shown[r][c] for r in reversed(range(rows)) if shown[r][c] is not None), None)
              for c in range(cols)]
    bottom = max((_x_room_in(ax) for ax in lowest if ax is not None), default=0.0) + bottom_in + _PAD_IN
    ends = [_x_end_in(ax) for ax in lowest if ax is not None]  # an hour label centred on the right edge
    right = max(right_in, *ends, 0.0) + _PAD_IN
    ax_w = (width - left - right - (cols - 1) * wgap) / cols
    ax_h = (height - top - bottom - (rows - 1) * hgap) / rows
    fig.subplots_adjust(left=left / width, right=1.0 - right / width, top=1.0 - top / height,
                        bottom=bottom / height, wspace=wgap / ax_w if cols > 1 else 0.0,
                        hspace=hgap / ax_h if rows > 1 else 0.0)


def _steps(ax, values, edges, **kw):
    """A per-period value as a step line over the periods (one line, clean joins)."""
    v = np.asarray(values, dtype=float)
    return ax.plot(edges, np.append(v, v[-1]), drawstyle="steps-post", **kw)


def _cyclic(t, y, edges):
    """Close a periodic day at its start: the optimiser's day repeats, so the value at 24 h is the value at 0 h."""
    t, y = np.asarray(t, dtype=float), np.asarray(y, dtype=float)
    if len(t) and t[0] > edges[0] + 1e-9 and abs(t[-1] - edges[-1]) < 1e-6:
        return np.insert(t, 0, edges[0]), np.insert(y, 0, y[-1])
    return t, y


def _period_mid(edges):
    return 0.5 * (edges[:-1] + edges[1:])


# -- airflow ------------------------------------------------------------------------------------
def airflow_figure(folder: StudyFolder):
    """Zone x hour heat map of airflow, and airflow per diffuser against each zone's range."""
    air = folder.pivot("airflow_Sm3_h")
    if air is None:
        return None
    plt = _plt()
    edges = folder.period_edges_h
    zones = folder.zones
    ranges = folder.zone_airflow_range_Sm3_h()
    per_diff = folder.pivot("airflow_per_diffuser_Sm3_h")
    rows = 2 if per_diff is not None else 1
    fig, axes = plt.subplots(rows, 1, figsize=(10, 3.2 + 0.35 * len(zones) + (3.6 if rows == 2 else 0)),
                             squeeze=False, height_ratios=[1.0, 1.25][:rows])
    ax = axes[0, 0]
    values = air.to_numpy(float)
    mesh = ax.pcolormesh(edges, np.arange(len(zones) + 1), values, cmap="viridis", shading="flat")
    ax.set_ylim(len(zones), 0)
    ax.set_yticks(np.arange(len(zones)) + 0.5, zones)
    ax.set_ylabel("zone")
    ax.set_title("Airflow by zone and hour")
    cax = fig.add_axes((0.0, 0.0, 1.0, 1.0))  # placed beside the heat map once the layout is fixed
    bar = fig.colorbar(mesh, cax=cax)
    bar.set_label("airflow (Sm3/h)")
    vmin, vmax = np.nanmin(values), np.nanmax(values)
    over = np.zeros_like(values, dtype=bool)
    for i, z in enumerate(zones):
        if z in ranges:
            over[i] = values[i] > ranges[z][1] * (1 + _TINY)
    mids = _period_mid(edges)
    if len(mids) <= 48:
        for i in range(len(zones)):
            for j, x in enumerate(mids):
                v = values[i, j]
                if not np.isfinite(v):
                    continue
                light = (v - vmin) / (vmax - vmin if vmax > vmin else 1.0) > 0.6
                ax.text(x, i + 0.5, f"{v:,.0f}", ha="center", va="center", fontsize=6.5 if len(mids) > 12 else 8,
                        color="black" if light or over[i, j] else "white", rotation=90 if len(mids) > 12 else 0,
                        fontweight="bold" if over[i, j] else "normal", zorder=4,
                        bbox=dict(facecolor="white", edgecolor="none", pad=1.0) if over[i, j] else None)
    if over.any():
        ii, jj = np.nonzero(over)
        for i, j in zip(ii, jj):
            ax.add_patch(plt.Rectangle((edges[j], i), edges[j + 1] - edges[j], 1, fill=False, hatch="//",
                                       edgecolor="red", linewidth=2.0, zorder=3))
        ax.plot([], [], color="red", linestyle="none", marker="s", markerfacecolor="none",
                label=f"above the zone's maximum ({int(over.sum())} cells)")
        ax.legend(loc="upper right", fontsize=8, framealpha=0.9)
    ax.set_xlim(edges[0], edges[-1])
    ax.set_xticks(np.arange(edges[0], edges[-1] + 1e-9, 2 if edges[-1] - edges[0] <= units.HOURS_PER_DAY else 4))
    ax.set_xlabel("hour of day (h)")

    if per_diff is not None:
        ax = axes[1, 0]
        drange = folder.diffuser_range_Sm3_h()
        shown = []
        for i, z in enumerate(zones):
            v = per_diff.loc[z].to_numpy(float)
            st = _style(i)
            _steps(ax, v, edges, color=st["color"], linestyle=st["linestyle"], linewidth=1.6, label=z)
            ax.plot(_period_mid(edges), v, color=st["color"], marker=st["marker"], linestyle="none", markersize=3.5)
            shown.append(v)
            if z in ranges and len(v):
                n_diff = air.loc[z].to_numpy(float) / np.where(v > 0, v, np.nan)
                cap = ranges[z][1] / np.nanmedian(n_diff) if np.isfinite(np.nanmedian(n_diff)) else None
                bad = over[i]
                if bad.any():
                    ax.plot(_period_mid(edges)[bad], v[bad], linestyle="none", marker="x", color="red",
                            markersize=9, markeredgewidth=2.2)
                if cap is not None and z in drange and cap < drange[z][1] * (1 - 1e-3):
                    ax.hlines(cap, edges[0], edges[-1], color=st["color"], linestyle=(0, (2, 2)), linewidth=0.9)
                    shown.append([cap])
        lims = sorted({r for lohi in drange.values() for r in lohi})
        for val, text in ((min((r[0] for r in drange.values()), default=None), "diffuser minimum"),
                          (max((r[1] for r in drange.values()), default=None), "diffuser maximum")):
            if val is not None:
                ax.axhline(val, color="black", linestyle="--", linewidth=1.2)
                ax.annotate(f"{text} {val:g} Sm3/h", (edges[-1], val), xytext=(-4, 3), textcoords="offset points",
                            fontsize=8, va="bottom", ha="right",
                            bbox=dict(facecolor="white", edgecolor="none", alpha=0.9, pad=1))
        if over.any():
            ax.plot([], [], linestyle="none", marker="x", color="red", markersize=9, markeredgewidth=2.2,
                    label="above the zone's maximum")
        _include(ax, *shown, lims)
        ax.set_ylabel("airflow per diffuser (Sm3/h)")
        ax.set_title("Airflow per diffuser against the diffusers' range" +
                     (" (thin dashed: a zone's valve limit)" if any(len(s) == 1 for s in shown) else ""))
        ax.legend(fontsize=8, loc="upper center", bbox_to_anchor=(0.5, -0.12), ncol=min(len(zones) + 1, 8),
                  frameon=False)
        _hour_axis(ax, edges)
    bar_gap_in, bar_in = 0.1, 0.18
    right_in = bar_gap_in + bar_in + _y_room_in(cax, "right")
    _fixed_layout(fig, axes, right_in=right_in)
    if rows == 2:  # the zones' legend hangs 12 % of the lower panel's height below it, one line of 8 pt high
        low = axes[1, 0].get_position().height * fig.get_size_inches()[1]
        legend_in = 0.12 * low + _line_in(8) + 0.1 - _x_room_in(axes[1, 0])
        _fixed_layout(fig, axes, right_in=right_in, bottom_in=max(legend_in, 0.0))
    width = fig.get_size_inches()[0]
    top = axes[0, 0].get_position()
    cax.set_position((top.x1 + bar_gap_in / width, top.y0, bar_in / width, top.height))
    return fig


# -- DO -----------------------------------------------------------------------------------------
def do_figure(folder: StudyFolder):
    """DO of every zone under air over the day, each with its minimum (and maximum)."""
    if not folder.zones:
        return None
    plt = _plt()
    edges = folder.period_edges_h
    lim = folder.summary.get("limits", {}) or {}
    lo_lim, hi_lim = lim.get("do_min_mg_L", {}) or {}, lim.get("do_max_mg_L", {}) or {}
    zones = folder.zones
    ts = folder.timeseries
    n = len(zones)
    cols = 2 if n > 3 else 1
    nrows = int(np.ceil(n / cols))
    fig, axes = plt.subplots(nrows, cols, figsize=(10, 1.2 + 2.3 * nrows), sharex=True, sharey=True,
                             squeeze=False)
    base = folder.pivot("baseline_do_mean_mg_L")
    tops = []
    for i, z in enumerate(zones):
        ax = axes[i // cols, i % cols]
        st = _style(i)
        if ts is not None and "SO" in ts:
            d = ts[ts["zone"] == z]
            t, do = _cyclic(d["time_h"], d["SO"], edges)
            ax.plot(t, do, color=st["color"], linestyle="-", linewidth=1.5, label="DO, optimised")
        else:
            rows = folder.schedule[folder.schedule["zone"] == z]
            t, do = _period_mid(edges), rows["do_mean_mg_L"].to_numpy(float)
            ax.plot(t, do, color=st["color"], marker="o", label="DO period mean, optimised")
        tops.append(do)
        if base is not None and z in base.index and np.isfinite(base.loc[z].to_numpy(float)).any():
            _steps(ax, base.loc[z].to_numpy(float), edges, color="#777777", linestyle=":", linewidth=1.3,
                   label="baseline (period mean)")
            tops.append(base.loc[z].to_numpy(float))
        if lo_lim.get(z) is not None:
            ax.axhline(lo_lim[z], color="black", linestyle="--", linewidth=1.2, label=f"minimum {lo_lim[z]:g} mg/L")
            below = do < lo_lim[z] - 1e-3
            if below.any():
                ax.plot(t[below], do[below], linestyle="none", marker="v", color="red", markersize=5,
                        label="below the minimum")
            tops.append([lo_lim[z]])
        if hi_lim.get(z) is not None:
            ax.axhline(hi_lim[z], color="black", linestyle="-.", linewidth=1.2, label=f"maximum {hi_lim[z]:g} mg/L")
            tops.append([hi_lim[z]])
        ax.set_title(f"zone {z}", fontsize=10, loc="left")
        ax.set_ylabel("DO (mg/L)")
        ax.legend(fontsize=7, loc="best", framealpha=0.9)
        _hour_axis(ax, edges)
    _include(axes[0, 0], *tops)
    for k in range(n, nrows * cols):
        axes[k // cols, k % cols].set_visible(False)
    for k in range(n):  # hour labels only under the lowest panel of each column
        ax = axes[k // cols, k % cols]
        lowest = k + cols >= n
        ax.xaxis.set_tick_params(labelbottom=lowest)
        ax.set_xlabel("hour of day (h)" if lowest else "")
    fig.suptitle("Dissolved oxygen by zone over the day")
    _fixed_layout(fig, axes, top_in=_suptitle_room_in(fig))
    return fig


# -- effluent -----------------------------------------------------------------------------------
def effluent_figure(folder: StudyFolder):
    """Effluent NH4-N and TN over the day with their limits."""
    ts = folder.timeseries
    if ts is None or "SNH" not in ts:
        return None
    eff = ts[ts["zone"] == "effluent"]
    if not len(eff):
        return None
    plt = _plt()
    edges = folder.period_edges_h
    study = folder.study
    lim, means = study.limits, study.effluent
    has_tn = "tn_mg_L" in eff and eff["tn_mg_L"].notna().any()
    fig, axes = plt.subplots(2 if has_tn else 1, 1, figsize=(10, 6.6 if has_tn else 3.6), sharex=True,
                             squeeze=False)
    t = eff["time_h"].to_numpy(float)
    panels = [("SNH", "NH4-N", "nh4")] + ([("tn_mg_L", "TN", "tn")] if has_tn else [])
    for ax, (col, name, key) in zip(axes[:, 0], panels):
        tt, y = _cyclic(t, eff[col], edges)
        ax.plot(tt, y, color="black", linewidth=1.6, marker="o", markersize=2.5, label=f"effluent {name}")
        shown = [y]
        mean = getattr(means, f"{key}_mean_mg_L", None)
        if mean is not None:
            ax.axhline(mean, color="#555555", linestyle=":", linewidth=1.2, label=f"daily mean {mean:.2f} mg/L")
        for lk, text, ls in ((f"{key}_mean_mg_L", "daily-mean limit", "--"),
                             (f"{key}_max_mg_L", "period-mean limit", "-.")):
            v = getattr(lim, lk, None)
            if v is not None:
                ax.axhline(v, color="#b03a2e", linestyle=ls, linewidth=1.4, label=f"{text} {v:g} mg/L")
                shown.append([v])
        _include(ax, *shown)
        ax.set_ylabel(f"{name} (mg/L)")
        ax.set_title(f"Effluent {name}", loc="left", fontsize=10)
        ax.legend(fontsize=8, loc="best", framealpha=0.9)
        _hour_axis(ax, edges)
    for ax in axes[:-1, 0]:
        ax.set_xlabel("")
    _fixed_layout(fig, axes)
    return fig


# -- header pressure and power --------------------------------------------------------------------
def air_side_figure(folder: StudyFolder):
    """Blower power with the tariff behind it and the peak marked; header pressure over the day."""
    head = folder.header_by_period()
    if head is None or "power_kW" not in head:
        return None
    plt = _plt()
    edges = folder.period_edges_h
    price = folder.tariff_price()
    currency = folder.summary.get("currency") or "currency"
    has_p = "pressure_gauge_kPa" in head
    fig, axes = plt.subplots(2 if has_p else 1, 1, figsize=(10, 6.8 if has_p else 3.8), sharex=True,
                             squeeze=False)
    ax = axes[0, 0]
    power = head["power_kW"].to_numpy(float)
    if price is not None:
        ax2 = ax.twinx()
        ax2.stairs(price, edges, fill=True, color="#e3e3e3", zorder=0, label=f"energy price ({currency}/kWh)")
        _steps(ax2, price, edges, color="#9e9e9e", linewidth=0.8)
        ax2.set_ylim(0, price.max() * 1.6 if price.max() > 0 else 1.0)
        ax2.set_ylabel(f"energy price ({currency}/kWh)")
        ax.set_zorder(ax2.get_zorder() + 1)
        ax.patch.set_visible(False)
    _steps(ax, power, edges, color="black", linewidth=2.0, label="blower power, optimised")
    shown = [power]
    if "baseline_power_kW" in head:
        b = head["baseline_power_kW"].to_numpy(float)
        _steps(ax, b, edges, color="#555555", linestyle="--", linewidth=1.4, label="blower power, baseline")
        shown.append(b)
    k = int(np.argmax(power))
    mid = _period_mid(edges)[k]
    ax.plot([mid], [power[k]], marker="v", color="#b03a2e", markersize=10, linestyle="none",
            label=f"peak {power[k]:,.0f} kW, {edges[k]:g}-{edges[k + 1]:g} h")
    span = edges[-1] - edges[0]  # (the label stays inside the axes at either end of the day)
    ha = "right" if mid > edges[-1] - 0.05 * span else "left" if mid < edges[0] + 0.05 * span else "center"
    ax.annotate(f"peak {power[k]:,.0f} kW", (mid, power[k]), xytext=(0, -10), textcoords="offset points",
                ha=ha, va="top", fontsize=8, color="#b03a2e",
                bbox=dict(facecolor="white", edgecolor="none", alpha=0.85, pad=1))
    _include(ax, *shown, pad=0.18)
    ax.set_ylabel("blower power (kW)")
    ax.set_title("Blower power" + (" with the energy price behind it (grey)" if price is not None else ""),
                 loc="left", fontsize=10)
    handles, labels = ax.get_legend_handles_labels()
    if price is not None:
        h2, l2 = ax2.get_legend_handles_labels()
        handles, labels = handles + h2, labels + l2
    ax.legend(handles, labels, fontsize=8, loc="upper left", framealpha=0.9, ncol=2)
    _hour_axis(ax, edges)
    if has_p:
        ax = axes[1, 0]
        p = head["pressure_gauge_kPa"].to_numpy(float)
        _steps(ax, p, edges, color="black", linewidth=2.0, label="header pressure, optimised")
        ax.plot(_period_mid(edges), p, color="black", marker="o", markersize=3, linestyle="none")
        _include(ax, p, pad=0.25, bottom=None)
        ax.set_ylabel("header pressure (kPa gauge)")
        ax.set_title("Header pressure (above site atmosphere)", loc="left", fontsize=10)
        ax.legend(fontsize=8, loc="upper left")
        _hour_axis(ax, edges)
        axes[0, 0].set_xlabel("")
    _fixed_layout(fig, axes, right_in=_y_room_in(ax2, "right") if price is not None else 0.0)
    return fig


# -- baseline against optimised, zone by zone -------------------------------------------------------
def zone_energy(folder: StudyFolder, airflow_column: str, power_column: str) -> dict | None:
    """Zone -> (energy kWh/d, energy cost/d or None): each period's power shared by the zones in
    proportion to their airflow in that period (common practice (no source))."""
    head = folder.header_by_period()
    air = folder.pivot(airflow_column)
    if head is None or air is None or power_column not in head:
        return None
    a = air.to_numpy(float)
    a = np.where(np.isfinite(a), a, 0.0)
    total = a.sum(axis=0)
    share = np.divide(a, total, out=np.zeros_like(a), where=total > 0)
    hours = np.diff(folder.period_edges_h)
    kwh = share * head[power_column].to_numpy(float) * hours
    price = folder.tariff_price()
    return {z: (float(kwh[i].sum()), None if price is None else float((kwh[i] * price).sum()))
            for i, z in enumerate(air.index)}


def baseline_figure(folder: StudyFolder):
    """Energy (and energy cost) of every zone, baseline against optimised."""
    opt = zone_energy(folder, "airflow_Sm3_h", "power_kW")
    base = zone_energy(folder, "baseline_airflow_Sm3_h", "baseline_power_kW")
    if opt is None or base is None:
        return None
    plt = _plt()
    zones = list(opt)
    has_cost = all(v[1] is not None for v in opt.values())
    currency = folder.summary.get("currency") or "currency"
    fig, axes = plt.subplots(1, 2 if has_cost else 1, figsize=(10, 4.2), squeeze=False)
    x = np.arange(len(zones))
    w = 0.38
    for ax, k, label in ((axes[0, 0], 0, "energy (kWh/d)"),) + (((axes[0, 1], 1, f"energy cost ({currency}/d)"),)
                                                                 if has_cost else ()):
        b = np.array([base[z][k] for z in zones])
        o = np.array([opt[z][k] for z in zones])
        ax.bar(x - w / 2, b, w, color="white", edgecolor="black", hatch="///", label="baseline (uniform DO)")
        ax.bar(x + w / 2, o, w, color="#555555", edgecolor="black", label="optimised")
        for xi, bi, oi in zip(x, b, o):
            if bi > 0:
                ax.annotate(f"{100 * (oi - bi) / bi:+.0f} %", (xi + w / 2, oi), xytext=(0, 3),
                            textcoords="offset points", ha="center", fontsize=8)
        ax.set_xticks(x, zones)
        ax.set_xlabel("zone")
        ax.set_ylabel(label)
        ax.set_ylim(0, max(b.max(), o.max()) * 1.18)
        ax.grid(True, axis="y", color="#dddddd", linewidth=0.6)
        ax.legend(fontsize=8, loc="upper right")
    fig.suptitle("Baseline against optimised, zone by zone (each hour's blower power shared by airflow)")
    _fixed_layout(fig, axes, top_in=_suptitle_room_in(fig))
    return fig


# -- the train ------------------------------------------------------------------------------------
def train_figure(folder: StudyFolder):
    """The train to scale by volume: zone kind, diffuser density, feeds, recycles and return sludge.

    Drawn from the folder's resolved plant (``folder.plant``); the flows' labels echo the layout
    as given (recycle names and ratios, step-feed shares).
    """
    plant = folder.plant
    if plant is None:
        return None
    layout = plant.layout  # the input as given, for the flows' labels only
    plt = _plt()
    from matplotlib.patches import FancyArrowPatch, Rectangle

    zones = plant.zones
    volume = dict(zip(plant.zone_ids, np.asarray(plant.volume_m3, dtype=float)))
    total = float(sum(volume.values()))
    width = 10.0  # drawing units for all zones together
    gap = 0.35
    h = 2.2
    fig, ax = plt.subplots(figsize=(11, 4.8))
    x = 0.0
    pos = {}
    fills = {"anoxic": ("white", ".."), "aerated": ("#cfcfcf", None), "swing": ("#efefef", "//"),
             "anaerobic": ("white", "xx")}
    for z in zones:
        w = width * volume[z.id] / total
        face, hatch = fills.get(z.kind, ("white", None))
        ax.add_patch(Rectangle((x, 0), w, h, facecolor=face, hatch=hatch, edgecolor="black", linewidth=1.4))
        if hatch:  # a clear field behind the zone's text
            ax.add_patch(Rectangle((x + 0.12 * w, 0.45), 0.76 * w, h - 0.75, facecolor="white", edgecolor="none",
                                   zorder=2))
        lines = [z.id, z.kind, f"{volume[z.id]:,.0f} m3"]
        if plant.has_diffusers(z):
            d = plant.air.zone(z)
            lines += [f"{d.diffusers:,} diff.", f"{d.density_percent:.1f} %"]
            n_dots = max(2, int(round(d.density_percent / 2.5)))
            ax.plot(x + w * (np.arange(n_dots) + 0.5) / n_dots, np.full(n_dots, 0.12), linestyle="none",
                    marker="o", markersize=3, color="black")
        ax.text(x + w / 2, h / 2 + 0.1, "\n".join(lines), ha="center", va="center", fontsize=8, zorder=5,
                bbox=dict(facecolor="white", edgecolor="none", alpha=1.0, pad=1.5))
        pos[z.id] = (x, w)
        x += w + gap
    # clarifier
    cx, cw = x + 0.3, 1.3
    ax.add_patch(Rectangle((cx, 0.3), cw, h - 0.6, facecolor="white", edgecolor="black", linewidth=1.4,
                           linestyle="--"))
    ax.text(cx + cw / 2, h / 2, "clarifier", ha="center", va="center", fontsize=8)

    def arrow(p, q, rad=0.0, **kw):
        ax.add_patch(FancyArrowPatch(p, q, arrowstyle="-|>", mutation_scale=12, linewidth=1.3,
                                     connectionstyle=f"arc3,rad={rad}", color=kw.get("color", "black"),
                                     linestyle=kw.get("linestyle", "-")))

    ids = list(plant.zone_ids)
    for a, b in zip(ids[:-1], ids[1:]):
        xa, wa = pos[a]
        xb, _ = pos[b]
        arrow((xa + wa - 0.05, h * 0.78), (xb + 0.05, h * 0.78))
    xl, wl = pos[ids[-1]]
    arrow((xl + wl, h * 0.78), (cx, h * 0.78))
    arrow((cx + cw, h * 0.78), (cx + cw + 0.9, h * 0.78))
    ax.text(cx + cw + 0.95, h * 0.78, "effluent", va="center", fontsize=8)
    arrow((cx + cw / 2, 0.3), (cx + cw / 2, -0.5))
    srt = plant.hydraulics.srt_d
    ax.text(cx + cw / 2 + 0.1, -0.45, "waste" + (f"\nSRT {srt:g} d" if srt else ""), fontsize=8, va="top")
    for s in layout.step_feed:
        xs, ws = pos[s.zone]
        arrow((xs + ws / 2, h + 0.9), (xs + ws / 2, h + 0.02))
        ax.text(xs + ws / 2, h + 0.95, f"influent {100 * s.fraction:g} %", ha="center", va="bottom", fontsize=8)
    depth = -0.7
    items = [(r.from_zone, r.to_zone, f"{r.id} {r.ratio:g} x Q" if r.ratio is not None else r.id, "-")
             for r in layout.recycles]
    rs = layout.return_sludge
    items.append((None, rs.to_zone, f"return sludge {rs.ratio:g} x Q" if rs.ratio is not None else "return sludge", "--"))
    for src, dst, label, ls in items:
        xd, wd = pos[dst]
        x1 = cx + cw * 0.3 if src is None else pos[src][0] + pos[src][1] * 0.6
        x0 = xd + wd * 0.4
        y = depth
        ax.plot([x1, x1], [0 if src is not None else 0.3, y], color="black", linestyle=ls, linewidth=1.3)
        ax.plot([x1, x0], [y, y], color="black", linestyle=ls, linewidth=1.3)
        arrow((x0, y), (x0, -0.02), linestyle=ls)
        ax.text((x0 + x1) / 2, y - 0.08, label, ha="center", va="top", fontsize=8)
        depth -= 0.6
    ax.set_xlim(-0.3, cx + cw + 2.0)
    ax.set_ylim(depth - 0.2, h + 1.5)
    ax.set_aspect("equal")
    ax.axis("off")
    ax.set_title(f"The train: zone widths to scale by volume ({total:,.0f} m3 in all); "
                 "grey aerated, dotted anoxic, hatched swing; dots show diffuser density", fontsize=10)
    _fixed_layout(fig, np.array([[ax]]))
    return fig


# -- blowers --------------------------------------------------------------------------------------
def blower_figure(folder: StudyFolder):
    """Which blower runs when, with its airflow."""
    bl = folder.blowers
    if bl is None or not {"period_start_h", "period_end_h", "blower", "running"} <= set(bl.columns):
        return None
    plt = _plt()
    names = list(dict.fromkeys(bl["blower"].astype(str)))
    edges = folder.period_edges_h
    fig, ax = plt.subplots(figsize=(10, 1.6 + 0.55 * len(names)))
    starts = []
    for i, name in enumerate(names):
        rows = bl[bl["blower"].astype(str) == name]
        for _, r in rows.iterrows():
            on = bool(r["running"]) and str(r["running"]).lower() not in ("false", "0")
            x0, x1 = float(r["period_start_h"]), float(r["period_end_h"])
            ax.add_patch(plt.Rectangle((x0, i + 0.1), x1 - x0, 0.8, facecolor="#555555" if on else "white",
                                       edgecolor="#999999", linewidth=0.5))
            if on and "airflow_Sm3_h" in r and np.isfinite(r["airflow_Sm3_h"]) and len(edges) <= 25:
                ax.text((x0 + x1) / 2, i + 0.5, f"{r['airflow_Sm3_h']:,.0f}", ha="center", va="center",
                        fontsize=6.5, rotation=90, color="white")
        if "starts" in rows:
            n = int(rows["starts"].sum())
            starts.append(f"{n} start{'' if n == 1 else 's'}")
            ax.text(edges[-1] + 0.2, i + 0.5, starts[-1], va="center", fontsize=8)
    ax.set_ylim(len(names), 0)
    ax.set_yticks(np.arange(len(names)) + 0.5, names)
    ax.set_ylabel("blower")
    _hour_axis(ax, edges)
    ax.grid(False)
    ax.set_title("Blower run chart: dark = running (numbers: airflow, Sm3/h)", loc="left", fontsize=10)
    _fixed_layout(fig, np.array([[ax]]), right_in=max((_text_in(t, 8) for t in starts), default=0.0) + 0.1)
    return fig


#: (name, caption, function) in report order.
FIGURES: tuple[tuple[str, str, Callable], ...] = (
    ("train", "The train as the layout describes it.", train_figure),
    ("airflow", "Airflow schedule. Cells framed and hatched red exceed the zone's maximum (diffusers or valve).",
     airflow_figure),
    ("do", "DO in each zone under air, with its minimum (and maximum where set).", do_figure),
    ("effluent", "Effluent NH4-N and TN with their limits.", effluent_figure),
    ("air_side", "Blower power and header pressure over the day.", air_side_figure),
    ("baseline", "Energy by zone: uniform-DO baseline against the optimised schedule (energy charge only; "
                 "the demand charge is not split by zone).", baseline_figure),
    ("blowers", "Blower run chart.", blower_figure),
)


#: zlib level of the PNG files: 1 encodes the report's figures in about half the time of Pillow's default (6) for
#: files about 7 % larger (demo: 560 against 524 kB for all seven); the pixels are the same.
PNG_COMPRESS_LEVEL = 1


def figure_png(fig, dpi: int = 100) -> bytes:
    """Render and close a figure; PNG bytes (no timestamp in the metadata, so reruns give equal bytes).

    A figure with a layout engine (constrained layout) gets its layout once, here, and is then drawn once:
    ``savefig`` would draw the whole figure a second time (with the output disabled) only to lay it out. The
    layout is the same (the same engine at the same resolution), and so are the bytes; about a third of the
    report's figure time.
    """
    plt = _plt()
    engine = fig.get_layout_engine()
    if engine is not None and dpi == fig.dpi:
        import matplotlib

        engine.execute(fig)
        with matplotlib.rc_context({"figure.autolayout": False, "figure.constrained_layout.use": False}):
            fig.set_layout_engine(None)  # laid out: savefig draws once
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, metadata={"Software": None},
                pil_kwargs={"compress_level": PNG_COMPRESS_LEVEL})
    plt.close(fig)
    return buf.getvalue()


def render_figures(folder: StudyFolder) -> dict[str, bytes]:
    """PNG of every figure the folder has the files for, by name, in report order."""
    out = {}
    for name, _caption, fn in FIGURES:
        fig = fn(folder)
        if fig is not None:
            out[name] = figure_png(fig)
    return out


__all__ = ["FIGURES", "air_side_figure", "airflow_figure", "baseline_figure", "blower_figure", "do_figure",
           "effluent_figure", "figure_png", "render_figures", "train_figure", "zone_energy"]
