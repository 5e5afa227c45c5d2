"""Layouts side by side on the demo: an added aerated zone of the same total volume."""

from __future__ import annotations

import copy
import tomllib
from pathlib import Path

import pytest

from airtaper.layout import parse_layout
from airtaper.optimize.compare import run_compare

LAYOUTS = Path(__file__).resolve().parents[2] / "layouts"


def _demo_data() -> dict:
    with open(LAYOUTS / "demo.toml", "rb") as fh:
        d = tomllib.load(fh)
    del d["load_days"]  # the base day: the question is the train, not the year
    return d


def _split_last_zone(d: dict) -> dict:
    """The demo with its last aerated zone (Z6, 900 m3, 380 diffusers) built as two zones of half the volume,
    half the diffusers and half the valve each: one more aerated zone, the same volume and grid in all."""
    d = copy.deepcopy(d)
    z6 = next(z for z in d["zones"] if z["id"] == "Z6")
    a, b = copy.deepcopy(z6), copy.deepcopy(z6)
    a["id"], b["id"] = "Z6a", "Z6b"
    for z in (a, b):
        z["volume_m3"] = z6["volume_m3"] / 2
        z["valve_capacity_Sm3_h"] = z6["valve_capacity_Sm3_h"] / 2
        z["grid"] = dict(z6["grid"], count=z6["grid"]["count"] // 2, count_step=10)
    del a["do_max_mg_L"]  # the DO cap is for the zone the recycle draws from: the new last zone
    i = d["zones"].index(z6)
    d["zones"][i:i + 1] = [a, b]
    d["flows"]["recycles"][0]["from_zone"] = "Z6b"
    return d


@pytest.mark.solver
@pytest.mark.slow
def test_an_added_aerated_zone_of_the_same_volume_does_not_raise_the_energy_on_the_demo():
    base = _demo_data()
    one = parse_layout(base, str(LAYOUTS / "demo.toml"), LAYOUTS)
    two = parse_layout(_split_last_zone(base), str(LAYOUTS / "demo_split.toml"), LAYOUTS)
    assert sum(z.volume_m3 for z in two.zones) == sum(z.volume_m3 for z in one.zones)
    assert sum(z.grid.count for z in two.zones if z.grid) == sum(z.grid.count for z in one.zones if z.grid)
    # twelve 2-hour periods: a quicker day that still verifies (on six 4-hour periods the re-simulated DO dips
    # below its minimum inside the long periods and both runs come back unverified)
    result = run_compare([("demo", one), ("split", two)], n_periods=12)
    rows = result.layouts.set_index("layout")
    assert list(rows["status"]) == ["optimal", "optimal"]
    # More zones in series bring the train nearer plug flow: the tail's ammonia falls further for the same air, so
    # the optimised air (and energy) cannot rise (a common result of tanks-in-series reactor theory, e.g.
    # Levenspiel, Chemical Reaction Engineering, 3rd ed., Wiley 1999, ch. 6; from memory). 0.5 % is the
    # tolerance of two separate local optima.
    assert rows.loc["split", "energy_kWh_per_year"] <= rows.loc["demo", "energy_kWh_per_year"] * 1.005
    # On the demo the DO minimum of every zone sets most of the air, so the nearer plug flow shows as more ammonia
    # margin at about the same energy (measured: +0.03 % energy, NH4-N margin 0.23 against 0.18 mg/L)
    assert rows.loc["split", "nh4_mean_margin_mg_L"] >= rows.loc["demo", "nh4_mean_margin_mg_L"] - 0.01
    assert rows.loc["split", "energy_kWh_per_year_vs_first"] == pytest.approx(
        rows.loc["split", "energy_kWh_per_year"] - rows.loc["demo", "energy_kWh_per_year"])
