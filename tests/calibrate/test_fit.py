"""The calibration recovers known values from synthetic plant data, with honest intervals.

Truth: synthetic records made by the independent simulator (airtaper.simulate, its own
rate expressions, balances and BDF integrator) with the values in conftest.py and
Gaussian noise of stated size (fixed seeds). The fit runs on the Pyomo model through the
Ipopt bridge. Interval arithmetic: Bard (1974), Nonlinear Parameter Estimation, ch. 7.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from airtaper.calibrate import CalibrationOptions, run_calibration
from airtaper.calibrate.fit import identifiability_of_data
from airtaper.layout.plantdata import load_plant_data
from airtaper.model.data import train_data

from .conftest import MODEL_STEPS, TRUE_ALPHA_F, TRUE_MU_A

pytestmark = [pytest.mark.solver, pytest.mark.slow]


def _options(**kw):
    return CalibrationOptions(mu_A=True, do_sd_mg_L=0.1, nh4_sd_mg_L=0.2, warmup_h=0.0, steps_per_period=MODEL_STEPS,
                              **kw)


@pytest.fixture(scope="module")
def fit_1day(plant, data_1day):
    return run_calibration(plant, load_plant_data(data_1day, plant), _options())


@pytest.fixture(scope="module")
def fit_2day(plant, data_2day):
    return run_calibration(plant, load_plant_data(data_2day, plant), _options())


def _truth(name):
    return TRUE_MU_A if name == "mu_A" else TRUE_ALPHA_F[name.split(".")[1]]


@pytest.mark.parametrize("which", ["fit_1day", "fit_2day"])
def test_every_true_value_lies_in_its_95_percent_interval(which, request):
    res = request.getfixturevalue(which)
    assert res.status == "fitted", res.messages
    est = res.estimates.set_index("parameter")
    assert set(est.index) == {f"alpha_F.{z}" for z in TRUE_ALPHA_F} | {"mu_A"}
    for name, row in est.iterrows():
        truth = _truth(name)
        assert row["ci95_low"] <= truth <= row["ci95_high"], (name, truth, row.to_dict())
        # and the start was far from the truth: the data moved it
        assert abs(row["layout_value"] - truth) > 3 * row["standard_error"]


def test_intervals_shrink_with_more_days(fit_1day, fit_2day):
    one = fit_1day.estimates.set_index("parameter")["standard_error"]
    three = fit_2day.estimates.set_index("parameter")["standard_error"]
    for name in one.index:
        assert three[name] < one[name], name
    # about 1/sqrt(days) for independent noise: two days, about 0.7 of the width
    assert np.median(three / one) < 0.85


def test_do_rms_error_matches_the_noise(fit_2day):
    # the stated DO noise is 0.1 mg/L; model and simulator differ only by the time discretisation
    # (30-min Radau steps: about 0.01 mg/L): the RMS error must be the noise, not more (48 values a zone)
    for z in TRUE_ALPHA_F:
        assert 0.07 < fit_2day.rms[f"do.{z}"] < 0.13, z
    assert 0.13 < fit_2day.rms["nh4.effluent"] < 0.27


def test_reduced_hessian_agrees_with_gauss_newton(fit_2day):
    # with small residuals both approximate the inverse covariance (Bard 1974, ch. 7)
    st = fit_2day.statistics
    h, gn = st.reduced_hessian, st.gauss_newton
    assert np.allclose(np.diag(h), np.diag(gn), rtol=0.1)
    assert np.isfinite(st.condition_number) and st.condition_number < 1e4
    assert not st.weak_directions


def test_same_optimum_from_perturbed_starts(plant, data_1day, fit_1day):
    # start the parameters elsewhere (alpha x F 30 % high, mu_A 40 % low): the same optimum
    record = load_plant_data(data_1day, plant)
    from dataclasses import replace

    zones = tuple(replace(z, alpha=min(1.2, 1.3 * z.alpha)) if z.grid else z for z in plant.zones)
    moved = replace(plant, zones=zones, kinetics=replace(plant.kinetics, overrides=(("mu_A", 0.48),)))
    res = run_calibration(moved, record, _options())
    a = fit_1day.estimates.set_index("parameter")
    b = res.estimates.set_index("parameter")
    assert np.allclose(a["fitted"], b["fitted"], rtol=1e-4)
    assert np.allclose(a["standard_error"], b["standard_error"], rtol=1e-2)


def test_a_zone_at_saturation_is_reported_and_held(plant, data_1day, tmp_path):
    # replace T3's DO by its field saturation (plus probe noise): no information on its alpha x F
    frame = pd.read_csv(data_1day, comment="#")
    from airtaper.calibrate.horizon import record_layout
    from airtaper.layout.plantdata import period_inputs

    record = load_plant_data(data_1day, plant)
    data = train_data(record_layout(plant, period_inputs(record, plant.horizon.period_h), 1))
    sat = data.aeration[plant.zone_index("T3")].do_sat_mg_L
    k = np.minimum((frame["time_h"].to_numpy() // plant.horizon.period_h).astype(int), len(sat) - 1)
    rng = np.random.default_rng(5)
    frame["do_T3_mg_L"] = np.round(sat[k] - np.abs(0.1 * rng.standard_normal(len(frame))), 3)
    path = tmp_path / "saturated.csv"
    frame.to_csv(path, index=False)
    rec = load_plant_data(path, plant)
    held = identifiability_of_data(plant, rec, {"T3": sat[k], "T2": sat[k]})
    assert list(held) == ["T3"]
    assert "sits at saturation" in held["T3"] and "cannot be identified" in held["T3"]
    res = run_calibration(plant, rec, _options())
    assert "T3" in res.held and "alpha_F.T3" not in set(res.estimates["parameter"])
    assert any("sits at saturation" in m for m in res.messages)
    assert "zones.T3.alpha" not in res.overrides
    obs = res.observations
    assert not ((obs["kind"] == "do") & (obs["location"] == "T3")).any()  # the stuck probe is not fitted
    est = res.estimates.set_index("parameter")
    for z in ("T1", "T2"):  # and the others are still found, near their truth (T3's held value is wrong,
        # which shifts the ammonia profile a little)
        assert est.loc[f"alpha_F.{z}", "fitted"] == pytest.approx(TRUE_ALPHA_F[z], rel=0.05), z


def test_a_zone_at_zero_do_is_reported(plant, data_1day):
    rec = load_plant_data(data_1day, plant)
    do = dict(rec.do_mg_L)
    do["T2"] = np.full_like(do["T2"], 0.05)
    from dataclasses import replace

    held = identifiability_of_data(plant, replace(rec, do_mg_L=do), {z: np.full(len(rec.time_h), 10.0) for z in do})
    assert list(held) == ["T2"] and "sits at zero" in held["T2"]


def test_overrides_name_the_layout_keys(fit_2day, plant):
    ov = fit_2day.overrides
    assert set(ov) == {f"zones.{z}.alpha" for z in TRUE_ALPHA_F} | {"kinetics.overrides.mu_A"}
    est = fit_2day.estimates.set_index("parameter")["fitted"]
    for z in TRUE_ALPHA_F:
        assert ov[f"zones.{z}.alpha"] * plant.zone(z).fouling == pytest.approx(est[f"alpha_F.{z}"], rel=1e-5)
