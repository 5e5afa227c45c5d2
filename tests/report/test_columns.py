"""One vocabulary for the output columns: a unit in every name, gauge pressures named so, periods by their hours."""

import pandas as pd
import pytest

from airtaper.layout.types import ASM1_COMPONENTS
from airtaper.report.columns import UNITS, heading, unit_of

#: Columns that name a thing, a state or a count rather than a quantity with a unit.
UNITLESS = {"zone", "blower", "running", "aerated", "starts"}


def test_unit_read_from_the_list_or_the_suffix():
    assert unit_of("pressure_gauge_kPa") == "kPa gauge"
    assert unit_of("discharge_gauge_kPa") == "kPa gauge"
    assert unit_of("inlet_kPa") == "kPa"  # not listed: the suffix, absolute by the project's rule
    assert unit_of("kla_per_h") == "1/h"  # listed: the suffix rule would read "_h" as hours
    assert heading("airflow_Sm3_h") == "airflow_Sm3_h (Sm3/h)" and heading("zone") == "zone"
    assert all(unit_of(c) for c in ASM1_COMPONENTS)  # the ASM1 symbols carry their units in the list


@pytest.mark.solver
@pytest.mark.slow
@pytest.mark.parametrize("name", ["schedule.csv", "header.csv", "timeseries.csv", "blowers.csv"])
def test_every_column_of_the_demo_outputs_has_a_unit(demo_dir, name):
    path = demo_dir / name
    if not path.exists():
        pytest.skip(f"the demo run wrote no {name}")
    columns = list(pd.read_csv(path, nrows=0).columns)
    for col in columns:
        assert col in UNITLESS or unit_of(col), f"{name}: {col} has no unit"
        # pressures in the outputs are above site atmosphere, and say so (a bare _kPa is absolute)
        assert not col.endswith("_kPa") or "gauge" in col, f"{name}: {col}"
    # a period is given by its hours, as in every table, never by a number
    assert "period" not in columns
    if name != "timeseries.csv":
        assert {"period_start_h", "period_end_h"} <= set(columns)


def test_the_list_names_no_retired_column():
    assert "pressure_kPa" not in UNITS and "period" not in UNITS
