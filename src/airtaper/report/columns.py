"""Units and meanings of the output tables' columns: the workbook's headings and docs/outputs.md follow them.

A column not listed here keeps its own name in the workbook (its unit is then the
suffix of the name, the project's convention: ``_Sm3_h``, ``_mg_L``, ``_kPa`` ...).
"""

from __future__ import annotations

#: column -> (unit for a heading, "" when none)
UNITS: dict[str, str] = {
    "period_start_h": "h",
    "period_end_h": "h",
    "time_h": "h",
    "zone": "",
    "blower": "",
    "running": "",
    "starts": "",
    "airflow_Sm3_h": "Sm3/h",
    "airflow_per_diffuser_Sm3_h": "Sm3/h",
    "baseline_airflow_Sm3_h": "Sm3/h",
    "do_min_mg_L": "mg/L",
    "do_mean_mg_L": "mg/L",
    "baseline_do_mean_mg_L": "mg/L",
    "nh4_mean_mg_L": "mg N/L",
    "otr_kg_h": "kg O2/h",
    "pressure_gauge_kPa": "kPa gauge",
    "discharge_gauge_kPa": "kPa gauge",
    "power_kW": "kW",
    "baseline_power_kW": "kW",
    "efficiency": "-",
    "tn_mg_L": "mg N/L",
    "kla_per_h": "1/h",
    # ASM1 state variables (docs/model.md)
    "SI": "g COD/m3", "SS": "g COD/m3", "XI": "g COD/m3", "XS": "g COD/m3", "XBH": "g COD/m3",
    "XBA": "g COD/m3", "XP": "g COD/m3", "SO": "g O2/m3", "SNO": "g N/m3", "SNH": "g N/m3", "SND": "g N/m3",
    "XND": "g N/m3", "SALK": "mol/m3",
}

_SUFFIXES = (("_Sm3_h", "Sm3/h"), ("_mg_L", "mg/L"), ("_kPa", "kPa"), ("_kW", "kW"), ("_kWh_per_day", "kWh/d"),
             ("_per_day", "per d"), ("_m3_d", "m3/d"), ("_kg_h", "kg/h"), ("_h", "h"), ("_s", "s"),
             ("_percent", "%"))


def unit_of(column: str) -> str:
    """The unit of a column: listed, else read from the name's suffix, else ""."""
    if column in UNITS:
        return UNITS[column]
    for suffix, unit in _SUFFIXES:
        if column.endswith(suffix):
            return unit
    return ""


def heading(column: str) -> str:
    """A workbook heading: the column name with its unit, e.g. ``airflow_Sm3_h (Sm3/h)``."""
    unit = unit_of(column)
    return f"{column} ({unit})" if unit else column


__all__ = ["UNITS", "heading", "unit_of"]
