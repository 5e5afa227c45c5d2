"""The study's typed summary: its keys, its JSON form and the read-back (no solve needed)."""

import dataclasses
import json
import math
from pathlib import Path

import numpy as np

from airtaper.optimize.results import (
    SUMMARY_KEYS, EffluentFigures, Limits, Smoothing, StudySummary, empty_tables, jsonable,
)

DOCS = Path(__file__).resolve().parents[2] / "docs" / "outputs.md"


def _summary(**kw) -> StudySummary:
    return StudySummary(status="optimal", plant="Test plant", layout="plant.toml", objective="energy",
                        energy_kWh_per_day=np.float64(1234.5), effluent=EffluentFigures(1.0, 2.5, float("nan")),
                        limits=Limits(1.5, 3.0, None, {"Z2": 1.0}, {}), smoothing=Smoothing(0.01, np.float32(0.25)),
                        verified=np.bool_(True), marginal_costs=[{"limit": "do_min_mg_L", "kWh_per_day": np.int64(3)}],
                        **kw)


def test_json_keys_are_the_fields_in_order_and_plain_json():
    out = _summary(extra={"airtaper_version": "0.1.0"}).to_dict()
    assert list(out) == [*SUMMARY_KEYS, "airtaper_version"]
    assert out["effluent"] == {"nh4_mean_mg_L": 1.0, "nh4_max_mg_L": 2.5, "tn_mean_mg_L": None}  # nan -> null
    assert out["limits"]["do_min_mg_L"] == {"Z2": 1.0} and out["smoothing"] == {"weight": 0.01, "penalty": 0.25}
    assert out["verified"] is True and type(out["marginal_costs"][0]["kWh_per_day"]) is int
    json.dumps(out, allow_nan=False)  # strict JSON: no numpy types, no NaN


def test_read_back_gives_the_same_summary_and_keeps_unknown_keys():
    first = _summary(extra={"airtaper_version": "0.1.0", "inputs": [{"path": "plant.toml"}]}).to_dict()
    first["a_later_key"] = 7
    again = StudySummary.from_dict(first)
    assert isinstance(again.effluent, EffluentFigures) and again.effluent.nh4_max_mg_L == 2.5
    assert isinstance(again.limits, Limits) and again.limits.do_min_mg_L == {"Z2": 1.0}
    assert again.extra == {"airtaper_version": "0.1.0", "inputs": [{"path": "plant.toml"}], "a_later_key": 7}
    assert again.to_dict() == first
    # a summary missing most keys still reads (defaults), e.g. one written by an older version
    old = StudySummary.from_dict({"status": "infeasible"})
    assert old.plant is None and old.effluent is None and old.marginal_costs == []


def test_every_summary_key_and_nested_figure_is_in_the_output_docs():
    doc = DOCS.read_text(encoding="utf-8")
    section = doc[doc.index("### `summary.json`"):doc.index("### `results.xlsx`")]
    for key in SUMMARY_KEYS:
        assert f"`{key}`" in section, key
    for kind in (EffluentFigures, Smoothing):
        for f in dataclasses.fields(kind):
            assert f"`{f.name}`" in section, f.name


def test_empty_tables_have_the_columns_of_a_run():
    schedule, header, ts = empty_tables()
    assert len(schedule) == len(header) == len(ts) == 0
    assert list(header.columns) == ["period_start_h", "period_end_h", "pressure_gauge_kPa", "airflow_Sm3_h", "power_kW"]
    assert {"period_start_h", "period_end_h", "zone", "airflow_Sm3_h"} <= set(schedule.columns)
    assert ts.columns[0] == "time_h" and "SNH" in ts.columns


def test_limits_of_a_layout(three_tank):
    lim = Limits.of_layout(three_tank)
    assert lim.nh4_mean_mg_L == three_tank.limits.nh4_mean_mg_L
    assert lim.do_min_mg_L == {z.id: z.do_min_mg_L for z in three_tank.zones if z.do_min_mg_L is not None}


def test_jsonable_nested():
    got = jsonable({1: (np.float64(1.5), [np.int32(2), math.inf]), "b": np.bool_(False)})
    assert got == {"1": [1.5, [2, None]], "b": False}
