"""The study's typed summary: its keys, its JSON form and the read-back (no solve needed)."""

import dataclasses
import json
import math
from pathlib import Path

import numpy as np
import pytest

from airtaper.plant import resolve_plant
from airtaper.optimize.results import (
    SUMMARY_KEYS, UNSET, BaselineSummary, DispatchSummary, EffluentFigures, Limits, Smoothing, SolverSummary,
    StudySummary, VerificationSummary, empty_tables, jsonable,
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


def _bill(**kw) -> dict:
    return {"energy_kWh_per_day": 2400.0, "energy_cost": 300.0, "demand_charge": 80.0, "start_costs": 8.0,
            "cost_per_day": 388.0, "peak_kW": 130.0, "peak_period": 9, "peak_period_start_h": 8.0,
            "blowers": {"B1": {"running_h": 24.0, "starts": 0, "out_of_service": False}}, **kw}


def _baseline(**kw) -> dict:
    return {"control": "uniform DO setpoint", "setpoint_mg_L": 2.0, "do_setpoint_mg_L": {"Z2": 2.0},
            "energy_kWh_per_day": 2900.0, "cost_per_day": 450.0,
            "effluent": {"nh4_mean_mg_L": 0.8, "nh4_max_mg_L": 2.0, "tn_mean_mg_L": 9.0}, "min_do_margin_mg_L": 0.9,
            "compliant": False, "violations": ["a limit"], "setpoint_not_held": [], "simulated_days": 3,
            "periodic": True, **kw}


#: The nested parts as runs write them: every optional key of each part present in one and absent in another.
NESTED_CASES = [
    {"baseline": _baseline(dispatch=_bill(shortfall=["period 3: short"])),
     "complying_baseline": _baseline(saving_percent=12.5, cost_saving_percent=None, dispatch=_bill()),
     "dispatch": _bill(rounds=[{"round": 1}], converged=True, stopped="the dispatch repeats",
                       redispatched_at_final_schedule=False, swing_zones={"Z2": {"aerated_periods": [1, 2],
                                                                                  "switches": 1}},
                       feasibility_breaches=[]),
     "verification": {"verified": True, "rule": "r", "effluent": {"nh4_mean_mg_L": 1.0, "nh4_max_mg_L": 2.0,
                                                                   "tn_mean_mg_L": None},
                      "min_do_margin_mg_L": 0.01, "violations": [], "start": "optimiser's state at 0 h",
                      "seconds": 1.5},
     "solver": {"status": "optimal", "message": "ok", "iterations": 40, "attempts": [], "variables": 10,
                "constraints": 8, "scaling": {}, "timings": {"ipopt_s": 1.0}}},
    {"baseline": _baseline(), "complying_baseline": None,
     "dispatch": _bill(rounds=[], converged=False, stopped="the blowers cannot meet the air demand",
                       redispatched_at_final_schedule=False, swing_zones={}),
     "verification": {"verified": None, "skipped": True},
     "solver": {"status": None, "timings": {"prescreen_s": 0.1, "total_s": 0.2}}},
]


@pytest.mark.parametrize("nested", NESTED_CASES)
def test_nested_parts_are_typed_and_keep_the_files_shape(nested):
    """Read back and written again, the file is the same text: the same keys in the same order at every level
    (a key a run does not reach stays out of the file, a figure it could not give is null)."""
    data = _summary().to_dict()
    data.update(nested)
    again = StudySummary.from_dict(json.loads(json.dumps(data)))
    assert isinstance(again.baseline, BaselineSummary) and isinstance(again.baseline.effluent, EffluentFigures)
    assert isinstance(again.dispatch, DispatchSummary) and isinstance(again.verification, VerificationSummary)
    assert isinstance(again.solver, SolverSummary)
    assert json.dumps(again.to_dict()) == json.dumps(data)


def test_typed_parts_leave_out_what_the_run_did_not_reach_and_keep_unknown_keys():
    assert SolverSummary(status=None, timings={"total_s": 1.0}).to_dict() == {"status": None, "timings": {"total_s": 1.0}}
    assert StudySummary(status="optimal", plant="p", layout="l", objective="energy").to_dict()["verification"] == \
        {"verified": None, "skipped": True}
    d = DispatchSummary.from_dict(_bill(a_later_key=1))
    assert d.rounds is UNSET and d.extra == {"a_later_key": 1} and list(d.to_dict())[-1] == "a_later_key"
    b = BaselineSummary.from_dict(_baseline())
    assert b.dispatch is UNSET and "dispatch" not in b.to_dict()
    b.dispatch = d
    assert b.to_dict()["dispatch"]["a_later_key"] == 1


def test_every_summary_key_and_nested_figure_is_in_the_output_docs():
    doc = DOCS.read_text(encoding="utf-8")
    section = doc[doc.index("### `summary.json`"):doc.index("### `results.xlsx`")]
    for key in SUMMARY_KEYS:
        assert f"`{key}`" in section, key
    for kind in (EffluentFigures, Smoothing, BaselineSummary, DispatchSummary, VerificationSummary, SolverSummary):
        for f in dataclasses.fields(kind):
            assert f.name == "extra" or f"`{f.name}`" in section, (kind.__name__, f.name)


def test_empty_tables_have_the_columns_of_a_run():
    schedule, header, ts = empty_tables()
    assert len(schedule) == len(header) == len(ts) == 0
    assert list(header.columns) == ["period_start_h", "period_end_h", "pressure_gauge_kPa", "airflow_Sm3_h", "power_kW"]
    assert {"period_start_h", "period_end_h", "zone", "airflow_Sm3_h"} <= set(schedule.columns)
    assert ts.columns[0] == "time_h" and "SNH" in ts.columns


def test_limits_of_a_plant(three_tank):
    lim = Limits.of_plant(resolve_plant(three_tank))
    assert lim.nh4_mean_mg_L == three_tank.limits.nh4_mean_mg_L
    assert lim.do_min_mg_L == {z.id: z.do_min_mg_L for z in three_tank.zones if z.do_min_mg_L is not None}


def test_jsonable_nested():
    got = jsonable({1: (np.float64(1.5), [np.int32(2), math.inf]), "b": np.bool_(False)})
    assert got == {"1": [1.5, [2, None]], "b": False}
