"""Figures of the report, drawn from the demo's output folder: labels with units, limits inside the axes, flags."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from airtaper.report import figures as F
from airtaper.report.folder import read_study_folder

pytestmark = [pytest.mark.solver, pytest.mark.slow]

PNG = b"\x89PNG\r\n\x1a\n"


@pytest.fixture(scope="module")
def folder(demo_dir):
    return read_study_folder(demo_dir)


def _labels(fig) -> set[str]:
    out = set()
    for ax in fig.axes:
        out |= {ax.get_xlabel(), ax.get_ylabel(), ax.get_title()}
        leg = ax.get_legend()
        if leg is not None:
            out |= {t.get_text() for t in leg.get_texts()}
    return out - {""}


def _blowers_csv(folder) -> pd.DataFrame:
    """An invented two-blower dispatch over the demo's day, in the columns the blower work writes."""
    head = folder.header_by_period()
    rows = []
    for _, r in head.iterrows():
        big = r["airflow_Sm3_h"] > 5000
        for name, on, share in (("B1", big, 0.6), ("B3", True, 0.4 if big else 1.0)):
            rows.append(dict(period_start_h=r["period_start_h"], period_end_h=r["period_end_h"], blower=name,
                             running=bool(on), airflow_Sm3_h=r["airflow_Sm3_h"] * share if on else 0.0,
                             power_kW=r["power_kW"] * share if on else 0.0, efficiency=0.7 if on else None,
                             discharge_gauge_kPa=r["pressure_gauge_kPa"] + 1.0, starts=0))
    return pd.DataFrame(rows)


EXPECTED = {
    "airflow_figure": {"zone", "airflow (Sm3/h)", "hour of day (h)", "airflow per diffuser (Sm3/h)"},
    "do_figure": {"DO (mg/L)", "hour of day (h)", "minimum 1 mg/L", "maximum 2.5 mg/L", "DO, optimised",
                  "baseline (period mean)"},
    "effluent_figure": {"NH4-N (mg/L)", "TN (mg/L)", "hour of day (h)", "daily-mean limit 1 mg/L",
                        "period-mean limit 3 mg/L", "daily-mean limit 14 mg/L"},
    "air_side_figure": {"blower power (kW)", "energy price (EUR/kWh)", "header pressure (kPa gauge)",
                        "hour of day (h)", "blower power, baseline"},
    "baseline_figure": {"zone", "energy (kWh/d)", "energy cost (EUR/d)", "baseline (uniform DO)", "optimised"},
    "blower_figure": {"blower", "hour of day (h)"},
}


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_every_figure_gives_a_png_with_labelled_axes(folder, name):
    if name == "blower_figure":
        folder = read_study_folder(folder.path)
        folder.blowers = _blowers_csv(folder)
    fig = getattr(F, name)(folder)
    assert fig is not None
    labels = _labels(fig)
    assert EXPECTED[name] <= labels, EXPECTED[name] - labels
    colorbar_labels = {ax.get_ylabel() for ax in fig.axes}
    assert labels | colorbar_labels
    png = F.figure_png(fig)
    assert png[:8] == PNG and len(png) > 10_000


def test_train_drawing_scales_zones_by_volume(folder):
    fig = F.train_figure(folder)
    ax = fig.axes[0]
    assert "to scale by volume" in ax.get_title()
    boxes = [p for p in ax.patches if type(p).__name__ == "Rectangle" and p.get_height() > 2.0]
    widths = [p.get_width() for p in boxes][:6]  # the six zones, in flow order
    volumes = list(folder.plant.volume_m3)
    assert np.allclose(np.array(widths) / widths[0], np.array(volumes) / volumes[0])
    texts = " ".join(t.get_text() for t in ax.texts)
    assert "IR 2.5 x Q" in texts and "return sludge 0.8 x Q" in texts and "influent 100 %" in texts
    assert F.figure_png(fig)[:8] == PNG


def test_header_pressure_line_sits_inside_its_axis(folder):
    fig = F.air_side_figure(folder)
    ax = next(a for a in fig.axes if a.get_ylabel() == "header pressure (kPa gauge)")
    y = ax.lines[0].get_ydata()
    lo, hi = ax.get_ylim()
    # the line keeps clear of both edges by at least a tenth of its own range
    assert lo < y.min() - 0.1 * np.ptp(y) and y.max() + 0.1 * np.ptp(y) < hi
    power = next(a for a in fig.axes if a.get_ylabel() == "blower power (kW)")
    peak = folder.header["power_kW"].max()
    assert any(f"peak {peak:,.0f} kW" in t.get_text() for t in power.texts)


def test_limits_stay_on_the_scale_and_airflow_above_a_maximum_is_flagged(folder):
    f = read_study_folder(folder.path)
    # an infeasible-looking schedule: Z2 at twice its maximum for two hours, NH4-N limit far below the data
    hi = f.zone_airflow_range_Sm3_h()["Z2"][1]
    sched = f.schedule.copy()
    rows = (sched["zone"] == "Z2") & sched["period_start_h"].isin([11.0, 12.0])
    sched.loc[rows, "airflow_Sm3_h"] = 2 * hi
    sched.loc[rows, "airflow_per_diffuser_Sm3_h"] = 2 * hi / 800
    f.schedule = sched
    f.summary = dict(f.summary, limits=dict(f.summary["limits"], nh4_mean_mg_L=0.05, nh4_max_mg_L=40.0))
    fig = F.airflow_figure(f)
    labels = _labels(fig)
    assert "above the zone's maximum (2 cells)" in labels and "above the zone's maximum" in labels
    heat = fig.axes[0]
    assert sum(1 for p in heat.patches if p.get_hatch() == "//") == 2
    fig = F.effluent_figure(f)
    ax = next(a for a in fig.axes if a.get_ylabel() == "NH4-N (mg/L)")
    lo, hi_y = ax.get_ylim()
    assert lo <= 0.05 and 40.0 < hi_y  # both limit lines on the scale


def test_do_panels_show_each_zones_minimum_and_flag_dips(folder):
    f = read_study_folder(folder.path)
    ts = f.timeseries.copy()
    dip = (ts["zone"] == "Z3") & (ts["time_h"].between(3.0, 4.0))
    ts.loc[dip, "SO"] = 0.4
    f.timeseries = ts
    fig = F.do_figure(f)
    panels = [a for a in fig.axes if a.get_visible()]
    assert len(panels) == len(f.zones)
    for ax in panels:
        lo, hi = ax.get_ylim()
        assert lo <= 1.0 < hi and ax.get_legend() is not None
        assert any(np.allclose(line.get_ydata(), 1.0) for line in ax.lines)  # the minimum line
    z3 = next(a for a in panels if a.get_title(loc="left") == "zone Z3")
    assert "below the minimum" in {t.get_text() for t in z3.get_legend().get_texts()}


def test_figures_need_only_the_files_they_use(folder):
    f = read_study_folder(folder.path)
    f.timeseries = None
    f.plant = None  # and with it the layout
    f.header = None
    if f.blowers is not None:  # a staged run writes blowers.csv: the run chart needs it and nothing else
        assert F.blower_figure(f) is not None
        f.blowers = None
    assert F.effluent_figure(f) is None and F.train_figure(f) is None and F.air_side_figure(f) is None
    assert F.baseline_figure(f) is None and F.blower_figure(f) is None
    assert F.airflow_figure(f) is not None and F.do_figure(f) is not None  # from schedule.csv alone


def test_zone_energy_adds_up_to_the_days_energy(folder):
    # the zones' shares of every hour's power add up to the day's blower energy in summary.json
    opt = F.zone_energy(folder, "airflow_Sm3_h", "power_kW")
    base = F.zone_energy(folder, "baseline_airflow_Sm3_h", "baseline_power_kW")
    assert sum(v[0] for v in opt.values()) == pytest.approx(folder.summary["energy_kWh_per_day"], rel=1e-4)
    assert sum(v[0] for v in base.values()) == pytest.approx(folder.summary["baseline"]["energy_kWh_per_day"],
                                                             rel=1e-6)
