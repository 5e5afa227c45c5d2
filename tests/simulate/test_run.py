"""Steady state and periodic day of the invented layouts and of BSM1."""

import dataclasses

import numpy as np
import pytest

from airtaper import simulate
from airtaper.errors import InputError
from airtaper.layout import load_layout
from airtaper.layout.types import ASM1_COMPONENTS
from airtaper.simulate.summary import summarize


@pytest.fixture(scope="module")
def demo():
    return load_layout("layouts/demo.toml")


@pytest.fixture(scope="module")
def demo_day(demo):
    return simulate.periodic(demo, do_setpoint_mg_L=2.0)


def test_demo_steady_state_holds_setpoint_and_srt(demo):
    r = simulate.steady_state(demo, do_setpoint_mg_L=2.0)
    aerated = r.zones[[z.kind == "aerated" for z in demo.zones]]
    np.testing.assert_allclose(aerated["SO"], 2.0, atol=1e-6)
    assert r.srt_d == pytest.approx(demo.wasting.srt_d, rel=1e-9)
    assert abs(r.balance["cod_net"]) / r.balance["cod_in"] < 1e-6
    assert abs(r.balance["n_net"]) / r.balance["n_in"] < 1e-6
    lo_hi = [demo.zone_airflow_range_Sm3_h(z) for z in demo.zones]
    for (lo, hi), q, z in zip(lo_hi, r.zones["airflow_Sm3_h"], demo.zones):
        if z.kind == "aerated":
            assert lo - 1e-6 <= q <= hi + 1e-6


def test_demo_day_repeats_and_closes_cod_and_n(demo_day):
    # closure of the ThOD and N balances over the cyclic day (ASM1 stoichiometry, Henze et al. 1987)
    assert demo_day.converged and demo_day.day_change < 1e-3
    assert demo_day.balance["cod_closure"] < 1e-6
    assert demo_day.balance["n_closure"] < 1e-6


def test_demo_day_tables(demo, demo_day):
    ts = demo_day.timeseries
    n_steps = demo.horizon.n_periods * demo.horizon.steps_per_period
    assert len(ts) == n_steps * len(demo.zones)
    for col in ("time_h", "zone", "SNH", "airflow_Sm3_h", "kla_per_h", "otr_kg_h"):
        assert col in ts.columns
    assert ts["time_h"].min() == 0.0 and ts["time_h"].max() < 24.0
    aer = ts[ts.zone.isin([z.id for z in demo.zones if z.kind == "aerated"])]
    # ideal DO control holds the setpoint wherever the airflow range allows
    inside = aer[(aer.airflow_Sm3_h > aer.groupby("zone").airflow_Sm3_h.transform("min") + 1e-6)]
    assert np.max(np.abs(inside.SO - 2.0)) < 0.05
    s = summarize(demo_day)
    assert s["blower_kWh_per_day"] > 0 and s["air_Sm3_per_day"] > 0
    assert s["effluent_mg_L"]["SNH"]["max"] >= s["effluent_mg_L"]["SNH"]["mean"]


def test_airflow_schedule_drives_the_zones(demo, demo_day):
    # feeding the DO-controlled airflows back as a schedule reproduces the same day
    ts = demo_day.timeseries
    steps = demo.horizon.steps_per_period
    period = np.floor(ts.time_h / demo.horizon.period_h + 1e-6).astype(int)
    first = ts.assign(period=period).groupby(["period", "zone"], sort=False).airflow_Sm3_h.first()
    sched = first.unstack("zone")[[z.id for z in demo.zones]].to_numpy()
    r = simulate.periodic(demo, schedule=sched, max_days=10)
    assert r.converged
    assert r.balance["cod_closure"] < 1e-6
    # a period-constant airflow equal to the controller's airflow at the period start:
    # effluent ammonia stays close (not identical: the controller varies within a period)
    assert r.effluent.SNH.mean() == pytest.approx(demo_day.effluent.SNH.mean(), rel=0.15)
    assert steps >= 1


def test_bsm1_constant_day_is_its_steady_state(bsm1_layered):
    r = simulate.periodic(bsm1_layered)
    ss = r.start
    # a constant day repeats at once: one seeking day at loose tolerances, then one at the requested ones
    assert r.days == 2 and r.day_change < 1e-6
    assert simulate.periodic(bsm1_layered, seek=False).days == 1
    np.testing.assert_allclose(r.effluent.SNH, ss.effluent["SNH"], rtol=1e-6)


def test_three_tank_runs(tmp_path):
    lay = load_layout("layouts/three_tank.toml")
    r = simulate.periodic(lay)
    assert r.converged
    assert r.balance["cod_closure"] < 1e-6 and r.balance["n_closure"] < 1e-6


def test_bad_aeration_inputs(demo):
    """Schedules and setpoints passed in code are past the input boundary: a caller's mistake is a ValueError
    (the CLI's schedule reader reports a schedule file's problems as input errors, file/row/column)."""
    with pytest.raises(ValueError, match="anoxic"):
        simulate.periodic(demo, do_setpoint_mg_L={"Z1": 2.0})  # anoxic zone
    with pytest.raises(ValueError, match="per period and zone"):
        simulate.periodic(demo, schedule=np.ones((3, 2)))
    with pytest.raises(ValueError, match="no zone"):
        simulate.steady_state(demo, do_setpoint_mg_L={"nope": 2.0})
    with pytest.raises(ValueError, match="finite"):
        simulate.steady_state(demo, airflow_Sm3_h=-np.ones(len(demo.zones)))
    for call in (lambda: simulate.periodic(demo, schedule={"nope": 1.0}),
                 lambda: simulate.periodic(demo, do_setpoint_mg_L={"Z1": 2.0})):
        with pytest.raises(ValueError) as err:
            call()
        assert not isinstance(err.value, InputError)


def test_srt_target_is_met_on_the_daily_mean_with_one_waste_flow(demo, demo_day):
    """Target SRT: one waste flow all day; mean zone solids = SRT x mean solids leaving.

    The same rule as the Pyomo model's, so the two implementations compare like with like.
    """
    eff = demo_day.effluent
    assert eff["q_waste_m3_d"].nunique() == 1
    ts = demo_day.timeseries
    zones = {z.id: z.volume_m3 for z in demo.zones}
    part = ["XI", "XS", "XBH", "XBA", "XP"]
    tss = demo.clarifier.tss_per_cod * ts[part].sum(axis=1)
    inventory = (tss * ts["zone"].map(zones)).groupby(ts["time_h"]).sum().to_numpy()
    removal = inventory / eff["srt_d"].to_numpy()  # waste + effluent solids, g/d, at each output time
    assert inventory.mean() / removal.mean() == pytest.approx(demo.wasting.srt_d, rel=2e-3)


def test_periodic_day_from_a_given_start_state_reaches_the_same_day(demo, demo_day):
    """Starting from the periodic day's own 0 h state, the simulator needs fewer days and ends on the same day."""
    ts = demo_day.timeseries
    first = ts[ts["time_h"] == 0.0].set_index("zone")
    comps = ["SI", "SS", "XI", "XS", "XBH", "XBA", "XP", "SO", "SNO", "SNH", "SND", "XND", "SALK"]
    state = {"zones": {z.id: first.loc[z.id, comps].to_numpy(dtype=float) for z in demo.zones}}
    again = simulate.periodic(demo, do_setpoint_mg_L=2.0, start_state=state,
                              start_waste_m3_d=float(demo_day.effluent["q_waste_m3_d"].iloc[0]))
    assert again.converged and again.days < demo_day.days
    a = demo_day.effluent["SNH"].to_numpy()
    b = again.effluent["SNH"].to_numpy()
    assert np.max(np.abs(a - b)) < 0.01  # mg/L: the same periodic day within the day-repeat tolerance
    assert again.start is None


def test_given_start_state_skips_the_mean_load_steady_state(demo, demo_day, monkeypatch):
    """With a start state (and no first waste flow) no steady state is solved; the day is the same."""
    import airtaper.simulate.run as run

    def refuse(*args, **kwargs):
        raise AssertionError("mean-load steady state solved although a start state was given")

    monkeypatch.setattr(run, "solve_steady", refuse)
    ts = demo_day.timeseries
    first = ts[ts["time_h"] == 0.0].set_index("zone")
    state = {"zones": {z.id: first.loc[z.id, list(ASM1_COMPONENTS)].to_numpy(dtype=float) for z in demo.zones}}
    again = simulate.periodic(demo, do_setpoint_mg_L=2.0, start_state=state)
    assert again.start is None and again.converged
    assert again.balance["cod_closure"] < 1e-6 and again.balance["n_closure"] < 1e-6
    assert np.max(np.abs(again.effluent["SNH"].to_numpy() - demo_day.effluent["SNH"].to_numpy())) < 0.01  # mg/L
    assert summarize(again)  # the summary does not need the steady state


def test_start_state_of_the_wrong_size_is_refused(demo):
    with pytest.raises(ValueError, match="start_state"):
        simulate.periodic(demo, do_setpoint_mg_L=2.0, start_state={"zones": {z.id: [1.0] * 12 for z in demo.zones}})


def _state_dict(layout, y):
    """The simulator's state vector as the ``start_state`` mapping."""
    blocks = np.asarray(y, dtype=float).reshape(-1, len(ASM1_COMPONENTS))
    nz = len(layout.zones)
    out = {"zones": {z.id: blocks[i] for i, z in enumerate(layout.zones)}}
    if blocks.shape[0] > nz:
        out["layers"] = blocks[nz:]
    return out


def _trapezoid_per_period(values, q, period, n_periods):
    """Flow-weighted daily mean and period means by the trapezoidal rule on equal steps of every period.

    ``values`` sampled at the start of each step; the end of a period is the next period's first sample
    (the state is continuous), the end of the day the first sample (periodic day).
    """
    v = np.asarray(values, dtype=float)
    nxt = np.roll(v, -1)
    mid = 0.5 * (v + nxt)  # trapezoid of every step
    qm = np.asarray(q, dtype=float)  # constant within a period
    daily = float((qm * mid).sum() / qm.sum())
    means = np.array([mid[period == k].mean() for k in range(n_periods)])
    return daily, means


def test_day_means_integrate_the_day_within_0_05_percent_of_a_fine_step_integration(demo, demo_day):
    """The quadrature of the dense output against the same day integrated at 1e-9 tolerances with
    1-minute samples and the trapezoidal rule (an independent integration of the same equations)."""
    from dataclasses import replace

    fine_layout = replace(demo, horizon=replace(demo.horizon, steps_per_period=60))
    fine = simulate.periodic(fine_layout, do_setpoint_mg_L=2.0, start_state=_state_dict(demo, demo_day.y_start),
                             start_waste_m3_d=float(demo_day.effluent["q_waste_m3_d"].iloc[0]), max_days=1,
                             rtol=1e-9, atol=1e-9)
    eff = fine.effluent
    period = np.minimum((eff["time_h"].to_numpy() // demo.horizon.period_h).astype(int), demo.horizon.n_periods - 1)
    q = demo_day.quadrature
    s = summarize(demo_day)
    for key in ("SNH", "tn_mg_L"):
        daily, means = _trapezoid_per_period(eff[key], eff["q_effluent_m3_d"], period, demo.horizon.n_periods)
        assert q.mean(q.effluent[key], flow_weighted=True) == pytest.approx(daily, rel=5e-4), key
        assert s["effluent_mg_L"][key]["mean"] == pytest.approx(daily, rel=5e-4), key
        assert q.period_means(q.effluent[key]).max() == pytest.approx(means.max(), rel=5e-4), key
    # the left-point sum of the quarter-hour samples the verification used before is off by more
    old = demo_day.effluent
    left = float((old["q_effluent_m3_d"] * old["SNH"]).sum() / old["q_effluent_m3_d"].sum())
    daily, _ = _trapezoid_per_period(eff["SNH"], eff["q_effluent_m3_d"], period, demo.horizon.n_periods)
    assert abs(left / daily - 1.0) > 1e-3


def test_do_extremes_bound_every_fine_sample(demo):
    """Continuous-time DO minima per zone and period: at or below every 30-second sample of the same day
    integrated at 1e-9 tolerances, and equal within 0.001 mg/L to the minima of that finer day (the
    verification's integrator runs at rtol 1e-5; samples alone miss sharp minima at period starts)."""
    from dataclasses import replace

    # an invented schedule that keeps the DO near 1-3 mg/L: air following the load with a lag
    shape = np.roll(np.array(demo.influent.flow_m3_d) / np.mean(demo.influent.flow_m3_d), 2)
    schedule = {z.id: np.clip(0.42 * shape, 0.15, 1.0) * demo.zone_airflow_range_Sm3_h(z)[1]
                for z in demo.zones if z.grid is not None}
    day = simulate.periodic(demo, schedule=schedule, max_days=2)
    fine_layout = replace(demo, horizon=replace(demo.horizon, steps_per_period=120))
    fine = simulate.periodic(fine_layout, schedule=schedule, start_state=_state_dict(demo, day.y_start),
                             start_waste_m3_d=float(day.effluent["q_waste_m3_d"].iloc[0]), max_days=1,
                             rtol=1e-9, atol=1e-9)
    ts = fine.timeseries
    ex = day.do_extremes
    for z in demo.zones:
        if z.grid is None:
            continue
        rows = ts[ts["zone"] == z.id]
        per = np.minimum((rows["time_h"].to_numpy() // demo.horizon.period_h).astype(int), demo.horizon.n_periods - 1)
        sampled = np.array([rows["SO"].to_numpy()[per == k].min() for k in range(demo.horizon.n_periods)])
        lows = ex[ex["zone"] == z.id].sort_values("period")["do_min_mg_L"].to_numpy()
        fine_lows = fine.do_extremes[fine.do_extremes["zone"] == z.id].sort_values("period")["do_min_mg_L"]
        assert np.all(lows <= sampled + 1e-4), z.id
        assert np.max(np.abs(lows - fine_lows.to_numpy())) < 1e-3, z.id


def test_the_simulator_reads_only_the_resolved_plant():
    """Past the boundary the simulator computes with the resolved plant alone: with its layout taken away it
    gives the same steady state and the same day (to the last bit) as with it."""
    from dataclasses import replace

    from airtaper.plant import resolve_plant

    plant = resolve_plant(load_layout("layouts/three_tank.toml"))
    bare = replace(plant, layout=None)
    a = simulate.steady_state(plant, do_setpoint_mg_L=2.0)
    b = simulate.steady_state(bare, do_setpoint_mg_L=2.0)
    np.testing.assert_array_equal(a.y, b.y)
    day_a = simulate.periodic(plant, max_days=1)
    day_b = simulate.periodic(bare, max_days=1)
    np.testing.assert_array_equal(day_a.y_end, day_b.y_end)
    assert day_b.plant is bare
    assert summarize(day_b)["blower_kWh_per_day"] == summarize(day_a)["blower_kWh_per_day"]


def test_a_start_at_a_period_runs_the_rest_of_that_day_first(demo, demo_day):
    """``start_period``: a state at the start of a period, simulated on to 0 h before the first whole day (a lead-in).

    The periodic day's own state at the start of period 22 (21 h), taken from its recorded
    output, leads to the same periodic day in one day: the lead-in brings it to the day's
    0 h state within the integrator's tolerances, far inside the day-repeat tolerance.
    """
    steps = demo.horizon.steps_per_period
    k = demo.horizon.n_periods - 3
    ts = demo_day.timeseries
    at = ts[ts["time_h"] == ts["time_h"].unique()[k * steps]].set_index("zone")
    state = {"zones": {z.id: at.loc[z.id, list(ASM1_COMPONENTS)].to_numpy(dtype=float) for z in demo.zones}}
    waste = float(demo_day.effluent["q_waste_m3_d"].iloc[0])
    again = simulate.periodic(demo, do_setpoint_mg_L=2.0, start_state=state, start_waste_m3_d=waste, start_period=k,
                              seek=False)
    assert again.converged and again.days == 1
    scale = np.maximum(np.abs(demo_day.y_end), 1.0)
    assert np.max(np.abs(again.y_start - demo_day.y_end) / scale) < 1e-3  # the day-repeat tolerance
    assert np.max(np.abs(again.effluent["SNH"].to_numpy() - demo_day.effluent["SNH"].to_numpy())) < 0.01  # mg/L
    with pytest.raises(ValueError, match="start_period"):
        simulate.periodic(demo, do_setpoint_mg_L=2.0, start_state=state, start_period=demo.horizon.n_periods)


def test_day_extrapolation_jumps_to_the_fixed_point_of_one_slow_mode():
    """A linear day map with one slow mode (ratio 0.86) and a fast one (0.1): once three steps agree, the jump
    takes the state a hundred times closer to the fixed point (Aitken's delta-squared, exact for one mode)."""
    from airtaper.simulate.run import DayExtrapolation

    fixed = np.array([50.0, 2.0, 300.0])
    slow, fast = np.array([1.0, 0.2, 3.0]), np.array([0.5, -1.0, 0.0])

    def state(k):
        return fixed + 5.0 * 0.86 ** k * slow + 1.0 * 0.1 ** k * fast

    speed = DayExtrapolation()
    jumps = []
    for k in range(8):
        f = speed.factor(state(k), state(k + 1))
        if f:
            jumps.append(k)
            y = state(k + 1) + f * (state(k + 1) - state(k))
            before = np.max(np.abs(state(k + 1) - fixed) / np.maximum(np.abs(fixed), 1.0))
            after = np.max(np.abs(y - fixed) / np.maximum(np.abs(fixed), 1.0))
            assert before > 0.2 and after < 0.01 * before  # 5 more days of the slow mode would take it to 0.47
            break
    assert jumps  # it jumped, once three steps agreed


def test_day_extrapolation_waits_while_the_steps_turn_or_grow():
    from airtaper.simulate.run import DayExtrapolation

    speed = DayExtrapolation()
    rng = np.random.default_rng(1)
    y = np.full(4, 10.0)
    for _ in range(6):  # steps in changing directions: no single mode, no jump
        step = rng.normal(size=4)
        assert speed.factor(y, y + step) == 0.0
        y = y + step
    speed = DayExtrapolation()
    y = np.full(4, 10.0)
    for k in range(6):  # a growing step (ratio above 1): no jump
        assert speed.factor(y, y + 1.2 ** k) == 0.0
        y = y + 1.2 ** k


def test_dense_and_sparse_factorisation_give_the_same_day(monkeypatch):
    """A small plant's Jacobian is factorised dense (:data:`~airtaper.simulate.run.DENSE_LU_MAX_STATES`): the
    day is the one the sparse factorisation gives, to round-off, in the same solver steps."""
    import airtaper.simulate.run as run

    lay = load_layout("layouts/three_tank.toml")
    days = {}
    for limit in (0, 10_000):  # sparse, then dense
        monkeypatch.setattr(run, "DENSE_LU_MAX_STATES", limit)
        days[limit] = simulate.periodic(lay, do_setpoint_mg_L=2.0, max_days=1, extrapolate=False)
    sparse, dense = days[0], days[10_000]
    assert sparse.quadrature.time_h.size == dense.quadrature.time_h.size
    np.testing.assert_allclose(dense.y_end, sparse.y_end, rtol=1e-9, atol=1e-9)
    np.testing.assert_allclose(dense.quadrature.airflow_Sm3_h, sparse.quadrature.airflow_Sm3_h, rtol=1e-9)


def test_seeking_at_loose_tolerances_first_ends_on_the_same_day(demo, day_tolerances):
    """``seek``: days at SEEKING_RTOL until the day repeats, then days at the requested tolerances: the same
    periodic day as the requested tolerances alone, within the day-repeat tolerance (1e-3 of the state), and
    the day returned is one at the requested tolerances (its COD and N close as tightly)."""
    plain = simulate.periodic(demo, do_setpoint_mg_L=2.0, seek=False, **day_tolerances)
    sought = simulate.periodic(demo, do_setpoint_mg_L=2.0, seek=True, **day_tolerances)
    assert plain.converged and sought.converged and sought.day_change < 1e-3
    scale = np.maximum(np.abs(plain.y_end), 1.0)
    assert np.max(np.abs(sought.y_end - plain.y_end) / scale) < 1e-3
    assert np.max(np.abs(sought.effluent["SNH"].to_numpy() - plain.effluent["SNH"].to_numpy())) < 0.01  # mg/L
    assert sought.balance["cod_closure"] < 1e-6 and sought.balance["n_closure"] < 1e-6


def test_the_seek_leaves_the_last_day_to_the_requested_tolerances(demo, monkeypatch):
    """However few days are allowed, the recorded day is one at the requested tolerances; tolerances no tighter
    than SEEKING_RTOL, or a day-repeat tolerance below SEEKING_MARGIN times it, seek nothing."""
    import airtaper.simulate.run as run

    used = []
    real = run._simulate_day_recorded

    def spy(system, inputs, z0, period_d, steps, rtol, atol, wcod, wn):
        used.append((rtol, atol))
        return real(system, inputs, z0, period_d, steps, rtol, atol, wcod, wn)

    monkeypatch.setattr(run, "_simulate_day_recorded", spy)
    r = simulate.periodic(demo, do_setpoint_mg_L=2.0, max_days=2)
    assert r.days == 2 and used == [(run.SEEKING_RTOL, run.SEEKING_RTOL), (1e-5, 1e-5)]
    used.clear()
    assert simulate.periodic(demo, do_setpoint_mg_L=2.0, max_days=1).days == 1 and used == [(1e-5, 1e-5)]
    used.clear()
    simulate.periodic(demo, do_setpoint_mg_L=2.0, max_days=2, rtol=1e-4, atol=2e-4)
    assert used == [(1e-4, 2e-4)] * 2
    used.clear()  # a repeat test tighter than the loose days can pass seeks nothing
    simulate.periodic(demo, do_setpoint_mg_L=2.0, max_days=2, tol=run.SEEKING_MARGIN * run.SEEKING_RTOL / 2)
    assert used == [(1e-5, 1e-5)] * 2


def test_daily_waste_for_the_srt_from_the_recorded_states(demo):
    """The day's one waste flow: mean solids inventory of the zones / SRT = waste flow x mean underflow solids + mean
    effluent solids flow, over the recorded states (each state with its own period's inputs), computed here state
    by state."""
    from airtaper.process.stoichiometry import IDX, SOLIDS_COD
    from airtaper.simulate.plant import PlantData
    from airtaper.simulate.run import _daily_waste_for_srt, _simulate_day_recorded, resolve_aeration
    from airtaper.simulate.system import System

    data = PlantData(demo)
    system = System(data)
    air, sp = resolve_aeration(demo, None, 2.0)
    y0 = simulate.steady_state(demo, do_setpoint_mg_L=2.0).y
    inputs = [data.inputs(k, airflow_Sm3_h=air[k], do_setpoint_mg_L=sp) for k in range(demo.horizon.n_periods)]
    inputs = [dataclasses.replace(inp, q_waste=300.0) for inp in inputs]
    wcod, wn = system.inventory_weights(inputs[0])
    _, records, _ = _simulate_day_recorded(system, inputs, np.concatenate((y0, [0.0, 0.0])), data.period_d,
                                           demo.horizon.steps_per_period, 1e-4, 1e-4, wcod, wn)
    solids = [IDX[c] for c in SOLIDS_COD]
    inventory, xu, qe_xe = [], [], []
    for y, k in zip(records[1], records[2]):
        _, info = system.rhs(y, inputs[k], detail=True)
        cz = system.blocks(y)[: system.nz]
        inventory.append(float(system.V @ (system.tss_per_cod * cz[:, solids].sum(axis=1))))
        xu.append(float(system.tss(info["c_underflow"])))
        qe_xe.append(float(info["q_effluent_m3_d"]) * float(system.tss(info["c_effluent"])))
    srt = demo.wasting.srt_d
    expected = (np.mean(inventory) / srt - np.mean(qe_xe)) / np.mean(xu)
    assert len(set(records[2].tolist())) == demo.horizon.n_periods
    assert _daily_waste_for_srt(system, inputs, records, srt) == pytest.approx(expected, rel=1e-12)
