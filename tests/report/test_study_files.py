import json

import numpy as np
import pandas as pd

from airtaper.report.study_files import CAUTION, OUTPUT_NAMES, console_summary, write_study_outputs


def _tables(n_periods=4, zones=("Z2", "Z3")):
    rows = []
    for p in range(n_periods):
        for i, z in enumerate(zones):
            rows.append(dict(period_start_h=p * 6.0, period_end_h=(p + 1) * 6.0, zone=z,
                             airflow_Sm3_h=1000.0 - 200 * i + 50 * p, airflow_per_diffuser_Sm3_h=2.0,
                             do_min_mg_L=1.5, do_mean_mg_L=1.8, nh4_mean_mg_L=1.0, otr_kg_h=50.0))
    schedule = pd.DataFrame(rows)
    header = pd.DataFrame(dict(period_start_h=np.arange(n_periods) * 6.0, period_end_h=np.arange(1, n_periods + 1) * 6.0,
                               pressure_gauge_kPa=55.0, airflow_Sm3_h=1800.0,
                               power_kW=np.linspace(40, 60, n_periods)))
    t = np.arange(0, 24, 1.5)
    ts = pd.concat([pd.DataFrame(dict(time_h=t, zone=z, SO=1.8, SNH=1.0)) for z in (*zones, "effluent")])
    summary = dict(status="optimal", plant="Test plant", energy_kWh_per_day=1200.0, cost_per_day=150.0,
                   baseline=dict(energy_kWh_per_day=1500.0, cost_per_day=190.0), saving_percent=20.0,
                   effluent=dict(nh4_mean_mg_L=1.0, nh4_max_mg_L=2.0, tn_mean_mg_L=9.0), min_do_margin_mg_L=0.0,
                   verification=dict(verified=True, rule="within 2 %",
                                     effluent=dict(nh4_mean_mg_L=1.01, nh4_max_mg_L=2.02, tn_mean_mg_L=9.1),
                                     optimiser_effluent=dict(nh4_mean_mg_L=1.0, nh4_max_mg_L=2.0, tn_mean_mg_L=9.0),
                                     do_margin_mg_L=dict(Z2=-0.01, Z3=0.2),
                                     optimiser_do_margin_mg_L=dict(Z2=0.0, Z3=0.2)), currency="EUR",
                   marginal_costs=[dict(limit="nh4_mean_mg_L", where="effluent", kWh_per_day=-12.0,
                                        cost_per_day=-1.5, per="+0.1 mg/L")],
                   limits=dict(nh4_mean_mg_L=1.5, nh4_max_mg_L=3.0))
    return schedule, header, ts, summary


def test_all_outputs_written(tmp_path):
    schedule, header, ts, summary = _tables()
    paths = write_study_outputs(tmp_path, schedule=schedule, header=header, timeseries=ts, summary=summary)
    names = {p.name for p in paths}
    assert names <= set(OUTPUT_NAMES) and len(names) == len(paths)
    # no layout, no baseline columns, no blowers: those figures are left out, the rest written
    assert names == {"schedule.csv", "header.csv", "timeseries.csv", "summary.json", "schedule.png", "do_by_zone.png",
                     "effluent.png", "power_and_pressure.png", "report.html", "results.xlsx"}
    assert json.loads((tmp_path / "summary.json").read_text())["saving_percent"] == 20.0
    assert (tmp_path / "schedule.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    page = (tmp_path / "report.html").read_text()
    assert "Caution" in page and "licensed engineers" in page
    assert ("<td class='left'>effluent NH4-N, daily mean (mg/L)</td><td>1.000</td><td>1.010</td><td>1.5</td>"
            in page)
    assert "<td>+0.000</td><td>-0.010</td>" in page  # the re-simulated dip below Z2's minimum, not rounded away
    assert "summary names no layout file" in page  # said, not an error
    assert pd.read_excel(tmp_path / "results.xlsx", sheet_name="header").shape == header.shape
    assert pd.read_csv(tmp_path / "schedule.csv").shape == schedule.shape


def test_console_summary_names_figures_and_caution():
    *_, summary = _tables()
    text = console_summary(summary)
    assert "1,200.0 kWh/d" in text and "saving 20.0 %" in text
    assert CAUTION in text
    assert "min DO margin     -0.010 mg/L re-simulated (optimiser +0.000 mg/L)" in console_summary(
        dict(summary, verification=dict(summary["verification"], min_do_margin_mg_L=-0.01)))


def test_console_summary_lists_every_marginal_cost_and_no_negative_zero():
    *_, summary = _tables()
    summary["marginal_costs"] = [dict(limit="do_min_mg_L", where=f"Z{i}", kWh_per_day=-1e-9, cost_per_day=-1e-10,
                                      per="per 0.1 mg/L higher DO minimum", binding=i % 2 == 0) for i in range(15)]
    summary["min_do_margin_mg_L"] = -0.001
    text = console_summary(summary)
    # in words, as the report says them (no internal keys such as do_min_mg_L)
    assert text.count("marginal          Raising Z") == 15 and "do_min_mg_L" not in text
    assert "marginal          Raising Z3's DO minimum by 0.1 mg/L costs nothing: the limit is not reached" in text
    assert "-0.0 " not in text and "-0.00 " not in text  # no negative zero
    assert "min DO margin     -0.001 mg/L" in text  # a real dip below the minimum is not rounded away
    assert text.count("costs nothing") == 7


def test_console_summary_says_when_the_baseline_breaks_a_limit():
    *_, summary = _tables()
    summary["baseline_compliant"] = False
    summary["complying_baseline"] = dict(energy_kWh_per_day=1400.0, setpoint_mg_L=2.6, saving_percent=14.3)
    text = console_summary(summary)
    energy_line = next(line for line in text.splitlines() if line.startswith("energy"))
    assert "a baseline that breaks a limit" in energy_line
    assert "complying base    1,400.0 kWh/d at a uniform DO of 2.60 mg/L, saving 14.3 %" in text
