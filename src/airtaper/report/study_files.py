"""Outputs of an aeration study: CSV tables, summary JSON, and the report built from them.

Every file is written atomically (:mod:`airtaper.report.atomic`). The tables are the
ones the optimisation produces:

* ``schedule`` — one row per period and aerated zone: ``period_start_h``,
  ``period_end_h``, ``zone``, ``airflow_Sm3_h``, ``airflow_per_diffuser_Sm3_h``,
  ``do_min_mg_L``, ``do_mean_mg_L``, ``nh4_mean_mg_L``, ``otr_kg_h``;
* ``header`` — one row per period: ``period_start_h``, ``period_end_h``,
  ``pressure_gauge_kPa``, ``airflow_Sm3_h``, ``power_kW``;
* ``blowers`` — one row per period and blower, when the run stages blowers;
* ``timeseries`` — one row per time step and zone (states, airflow, OTR);
* ``summary`` — a JSON-serialisable dict (see docs and :func:`console_summary`).

docs/outputs.md lists every file and column with its unit and meaning.
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from airtaper.units import clock
from airtaper.report.atomic import write_csv_atomic, write_json_atomic
from airtaper.report.build import REPORT_NAMES, write_report
from airtaper.report.text import CAUTION
from airtaper.report.text import fmt as _fmt
from airtaper.report.text import fmt_margin, marginal_sentence

OUTPUT_NAMES = ("schedule.csv", "header.csv", "blowers.csv", "timeseries.csv", "summary.json") + REPORT_NAMES


def write_study_outputs(out_dir: str | Path, *, schedule: pd.DataFrame, header: pd.DataFrame,
                        timeseries: pd.DataFrame, summary: dict, figure: bool = True,
                        blowers: pd.DataFrame | None = None, report: bool = True) -> list[Path]:
    """Write the study's tables and summary into ``out_dir``, then its report from them; return the paths.

    The report (the figures' PNG files, ``report.html``, ``results.xlsx``) is built from the files just
    written, by the same :func:`~airtaper.report.build.write_report` that ``airtaper report`` runs;
    ``report`` False leaves it for a later ``airtaper report DIR`` (a sweep's scenarios).
    """
    out = Path(out_dir)
    written = [
        write_csv_atomic(out / "schedule.csv", schedule),
        write_csv_atomic(out / "header.csv", header),
        *([write_csv_atomic(out / "blowers.csv", blowers)] if blowers is not None else []),
        write_csv_atomic(out / "timeseries.csv", timeseries),
        write_json_atomic(out / "summary.json", summary),
    ]
    return written + (write_report(out, figures=figure) if report else [])


def _do_margin_line(optimiser, resimulated) -> str:
    """The smallest DO margin, signed and never rounded to zero; the re-simulated one first when there is one."""
    if resimulated is None:
        return f"min DO margin     {fmt_margin(optimiser)} mg/L"
    return f"min DO margin     {fmt_margin(resimulated)} mg/L re-simulated (optimiser {fmt_margin(optimiser)} mg/L)"


def _peak_when(dp: dict) -> str:
    """When the day's peak falls: the period's start as a clock time (its number when the start is missing)."""
    start = dp.get("peak_period_start_h")
    if isinstance(start, (int, float)):
        return f"in the period from {clock(start)}"
    return f"in period {dp.get('peak_period')}"


def _dispatch_lines(dp: dict | None, cur: str) -> list[str]:
    """The blower dispatch in a few console lines."""
    if not dp:
        return []
    blowers = dp.get("blowers") or {}
    used = [f"{b} {_fmt(v.get('running_h'), 0)} h ({v.get('starts')} start{'s' if v.get('starts') != 1 else ''})"
            for b, v in blowers.items() if v.get("running_h")]
    idle = [b + (" (out of service)" if v.get("out_of_service") else "") for b, v in blowers.items()
            if not v.get("running_h")]
    lines = [f"blowers           {', '.join(used) or 'none running'}"
             + (f"; idle {', '.join(idle)}" if idle else "")
             + f"; peak {_fmt(dp.get('peak_kW'), 1)} kW {_peak_when(dp)}"]
    if dp.get("cost_per_day") is not None:
        lines.append(f"bill              energy {_fmt(dp.get('energy_cost'), 2)} + demand {_fmt(dp.get('demand_charge'), 2)}"
                     f" + starts {_fmt(dp.get('start_costs'), 2)} = {_fmt(dp.get('cost_per_day'), 2)} {cur}/d")
    rounds = [r for r in dp.get("rounds") or [] if isinstance(r, dict) and "cost" in r]
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
        f"   (baseline {_fmt(base.get('energy_kWh_per_day'))} kWh/d, saving {_fmt(summary.get('saving_percent'))} %"
        + (", a baseline that breaks a limit)" if summary.get("baseline_compliant") is False else ")"),
        f"cost              {_fmt(summary.get('cost_per_day'), 2)} {cur}/d"
        f"   (baseline {_fmt(base.get('cost_per_day'), 2)} {cur}/d)",
    ]
    comp = summary.get("complying_baseline")
    if comp:
        lines.append(f"complying base    {_fmt(comp.get('energy_kWh_per_day'))} kWh/d at a uniform DO of "
                     f"{_fmt(comp.get('setpoint_mg_L'), 2)} mg/L, saving {_fmt(comp.get('saving_percent'))} %")
    lines += [
        f"effluent NH4-N    mean {_fmt(eff.get('nh4_mean_mg_L'), 2)} mg/L, max period {_fmt(eff.get('nh4_max_mg_L'), 2)} mg/L"
        f", TN mean {_fmt(eff.get('tn_mean_mg_L'), 2)} mg/L",
        _do_margin_line(summary.get("optimiser_min_do_margin_mg_L", summary.get("min_do_margin_mg_L")),
                        ver.get("min_do_margin_mg_L")),
        f"verified          {_fmt(ver.get('verified'))}",
    ]
    lines.extend(_dispatch_lines(summary.get("dispatch"), cur))
    for item in summary.get("marginal_costs") or []:  # in the report's words (report.text)
        lines.append(f"marginal          {marginal_sentence(item, cur)}")
    for m in summary.get("messages", []) or []:
        lines.append(f"note              {m}")
    lines.append("caution           " + CAUTION)
    return "\n".join(lines)


__all__ = ["CAUTION", "OUTPUT_NAMES", "console_summary", "write_study_outputs"]
