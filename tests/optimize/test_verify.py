"""The verification: which periods hold a swing zone's DO minimum; the start from the optimiser's state."""

from __future__ import annotations

import numpy as np
import pytest

from airtaper.optimize.compliance import DO_TOLERANCE_mg_L
from airtaper.optimize.simday import simulate_day
from airtaper.optimize.verify import DAY_REPEAT_TOL, LEAD_IN_h, do_max_margin, lead_in_periods, start_state_of, swing_do_margins, \
    verify_day
from airtaper.plant import resolve_plant


def test_swing_zone_do_minimum_is_checked_only_while_aerated_after_an_aerated_period(fenwhistle):
    fenwhistle = resolve_plant(fenwhistle)
    lo = fenwhistle.zone("Z2").do_min_mg_L  # 0.5 mg/L (layouts/fenwhistle.toml)
    on = np.array([False, True, True, True, False, False])
    lows = {"Z2": np.array([0.0, 0.0, lo + 0.2, lo - 0.1, 0.0, 0.0])}  # switch-on period 2 rises from nothing
    margin, periods = swing_do_margins(fenwhistle, lows, {"Z2": on})["Z2"]
    assert margin == pytest.approx(-0.1) and periods == [4]
    lows["Z2"][3] = lo - 0.5 * DO_TOLERANCE_mg_L  # within the tolerance: listed as a margin, not a breach
    margin, periods = swing_do_margins(fenwhistle, lows, {"Z2": on})["Z2"]
    assert margin == pytest.approx(-0.5 * DO_TOLERANCE_mg_L) and periods == []
    # never aerated after an aerated period, or no swing states at all: nothing to check
    assert swing_do_margins(fenwhistle, lows, {"Z2": np.array([True, False] * 3)}) == {}
    assert swing_do_margins(fenwhistle, lows, None) == {}


def test_lead_in_covers_its_hours_in_whole_periods_and_never_the_whole_day():
    assert lead_in_periods(24, 1.0) == int(LEAD_IN_h)
    assert lead_in_periods(6, 4.0) == 1
    assert lead_in_periods(2, 12.0) == 1
    assert lead_in_periods(1, 24.0) == 0  # one period: the state at 0 h, no lead-in
    assert lead_in_periods(48, 0.5) == int(2 * LEAD_IN_h)


@pytest.mark.solver
def test_the_lead_in_gives_the_day_a_start_at_0_h_gives_in_fewer_days(three_tank_diurnal):
    """The verification starts from the optimiser's state some hours before the day's end and simulates them
    first: the same re-simulated day as from the optimiser's state at 0 h, within the day-repeat tolerance,
    in fewer simulated days (the optimiser's DO and NH4-N at its time points differ from the simulator's;
    its slow states are periodic within the tolerance on hourly steps, as on the demo: four steps per
    4-hour period here; with one step per period they are not, and both starts take two days)."""
    from airtaper.optimize.diurnal import StudyOptions, run_optimization
    from airtaper.optimize.horizon import with_periods

    lay = with_periods(three_tank_diurnal, 6, steps_per_period=8)
    assert lay.influent.flow_m3_d == three_tank_diurnal.influent.flow_m3_d  # the diurnal load kept
    res = run_optimization(lay, StudyOptions(verify=False, marginal=False, prescreen=False, complying_baseline=False))
    study = res.study
    ver, day = verify_day(study.plant, study.schedule_by_zone(), study.figures(), study.m)
    state, waste = start_state_of(study.m)
    at_0h = simulate_day(lay, schedule=study.schedule_by_zone(), start_state=state, start_waste_m3_d=waste,
                         tol=DAY_REPEAT_TOL)
    assert day.converged and at_0h.converged
    assert day.days < at_0h.days
    assert ver["start"].startswith(f"optimiser's state at {24.0 - 4.0 * lead_in_periods(6, 4.0):g} h")
    for key in ("nh4_mean_mg_L", "nh4_max_mg_L", "tn_mean_mg_L"):
        assert day.figures[key] == pytest.approx(at_0h.figures[key], rel=DAY_REPEAT_TOL)
    assert day.figures["min_do_margin_mg_L"] == pytest.approx(at_0h.figures["min_do_margin_mg_L"], abs=1e-3)
    assert day.energy_kWh_per_day == pytest.approx(at_0h.energy_kWh_per_day, rel=1e-9)  # the same schedule
    # the model's state at the end of a period is the one its last time point holds
    first, _ = start_state_of(study.m, 5)
    t = 5 * len(study.m.STEPS) // 6
    assert first["zones"]["T1"][7] == study.m.conc[t, "T1", "SO"].value


def test_a_re_simulation_from_the_day_before_repeats_in_a_few_days(three_tank_diurnal):
    """Between the DO back-off's rounds the re-simulation starts from the day simulated before (``start_day``): for
    a schedule that changed in one zone-period (a round's back-off moves a few), the day repeats within
    CHAINED_MAX_DAYS days, to the day-repeat tolerance, with the figures of a run from the model-free start."""
    from airtaper.optimize.verify import CHAINED_MAX_DAYS

    plant = resolve_plant(three_tank_diurnal)
    base = simulate_day(plant, do_setpoint_mg_L=2.0)
    schedule = base.period_mean_airflow()
    day = simulate_day(plant, schedule=schedule, tol=DAY_REPEAT_TOL)  # from the mean-load steady state
    schedule["T2"] = schedule["T2"].copy()
    schedule["T2"][2] *= 1.05  # what a round changes
    alone = simulate_day(plant, schedule=schedule, tol=DAY_REPEAT_TOL)
    chained, _ = verify_day(plant, schedule, base.figures, start_day=day)
    assert day.converged and alone.converged and alone.days > CHAINED_MAX_DAYS  # the start saves days
    assert chained["periodic"] and chained["simulated_days"] <= CHAINED_MAX_DAYS, chained["simulated_days"]
    assert chained["start"].startswith("the re-simulated day before")
    for key in ("nh4_mean_mg_L", "nh4_max_mg_L", "tn_mean_mg_L"):
        assert chained["effluent"][key] == pytest.approx(alone.figures[key], rel=1e-3)
    assert chained["min_do_margin_mg_L"] == pytest.approx(alone.figures["min_do_margin_mg_L"], abs=1e-3)


def test_the_verification_takes_a_resolved_plant_only(fenwhistle):
    """The layout is resolved once, before the study: a Layout reaching the verification is an internal error."""
    with pytest.raises(TypeError, match="ResolvedPlant"):
        swing_do_margins(fenwhistle, {}, None)
    with pytest.raises(TypeError, match="ResolvedPlant"):
        verify_day(fenwhistle, {}, {})


def test_the_do_maximum_margin_leaves_out_a_zone_without_simulated_rows(demo):
    """A zone with a DO maximum but no rows in the simulated day's extremes gives no margin (not NaN): the
    margin is the smallest over the zones that have rows, None when none has."""
    from dataclasses import replace

    import pandas as pd

    layout = replace(demo, zones=tuple(replace(z, do_max_mg_L=3.0) if z.id == "Z5" else z for z in demo.zones))
    plant = resolve_plant(layout)  # Z5 (maximum 3.0) and Z6 (maximum 2.5) have a DO maximum
    z6 = pd.DataFrame({"period": [0, 1], "zone": ["Z6", "Z6"], "do_min_mg_L": [1.2, 1.1], "do_max_mg_L": [2.0, 2.4]})
    margin = do_max_margin(plant, z6)  # Z5 has no rows
    assert margin is not None and np.isfinite(margin) and margin == pytest.approx(2.5 - 2.4)
    both = pd.concat([z6, pd.DataFrame({"period": [0], "zone": ["Z5"], "do_min_mg_L": [1.5], "do_max_mg_L": [2.95]})])
    assert do_max_margin(plant, both) == pytest.approx(3.0 - 2.95)
    assert do_max_margin(plant, z6.iloc[:0]) is None
