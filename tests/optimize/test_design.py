"""Diffuser-grid design over load days: economics, design ranges, the whole-count search, monotonicity."""

from __future__ import annotations

import copy
import itertools
import tomllib
from dataclasses import replace
from pathlib import Path

import pytest

from airtaper.layout import parse_layout
from airtaper.layout.loaddays import day_layout
from airtaper.optimize.design import (DesignOptions, GridDesign, capital_recovery_factor, count_range,
                                      net_present_value, run_design, simple_payback_years)

ROOT = Path(__file__).resolve().parents[2]
LAYOUTS = ROOT / "layouts"


# --- economics (pure) -------------------------------------------------------------------------
def test_capital_recovery_factor_matches_the_annuity_formula():
    # i (1 + i)^n / ((1 + i)^n - 1) at 5 %, 15 years: 0.0963423 (the uniform-series capital recovery factor,
    # tabulated in engineering-economics texts, e.g. Grant, Ireson and Leavenworth, Principles of Engineering
    # Economy, Wiley, interest tables; value from memory, recomputed here to 7 digits)
    assert capital_recovery_factor(0.05, 15.0) == pytest.approx(0.0963423, abs=5e-8)
    assert capital_recovery_factor(0.0, 20.0) == pytest.approx(1.0 / 20.0)
    # paying the factor every year repays the capital with interest: the present value of the payments is 1
    i, n = 0.07, 12
    pv = sum(capital_recovery_factor(i, n) / (1 + i) ** k for k in range(1, n + 1))
    assert pv == pytest.approx(1.0, rel=1e-12)


def test_net_present_value_and_payback():
    # 10,000 now against 1,000 a year for 15 years at 5 %: 1,000 x 10.3797 - 10,000 (the annuity's present-value
    # factor (1 - 1.05^-15) / 0.05 = 10.3797, from memory, recomputed)
    assert net_present_value(10_000.0, 1_000.0, 0.05, 15.0) == pytest.approx(10_379.658 - 10_000.0, abs=1e-3)
    assert simple_payback_years(10_000.0, 2_500.0) == pytest.approx(4.0)
    assert simple_payback_years(10_000.0, -5.0) is None
    assert simple_payback_years(-100.0, 10.0) == 0.0


# --- a small design case: three tanks, two load days, a flat tariff -----------------------------
def _small_data(step: int = 100) -> dict:
    with open(LAYOUTS / "three_tank.toml", "rb") as fh:
        d = tomllib.load(fh)
    for z in d["zones"]:
        z["grid"]["count_step"] = step
    d["tariff"] = {"currency": "EUR", "price_per_kWh": 0.15}  # flat: cost is energy times one price
    d["capital"] = {"cost_per_diffuser": 60.0, "cost_per_zone": 5000.0, "interest_rate": 0.05, "life_years": 15.0}
    d["load_days"] = [{"id": "average", "days_per_year": 300.0},
                      {"id": "peak", "days_per_year": 65.0, "flow_factor": 1.2, "load_factor": 1.4}]
    return d


def _small(step: int = 100, **capital):
    d = _small_data(step)
    d["capital"].update(capital)
    return parse_layout(d, str(LAYOUTS / "small.toml"), LAYOUTS)


OPTIONS = DesignOptions(n_periods=6, steps_per_period=2)


def test_count_range_is_the_tested_density_range_in_whole_steps():
    layout = _small(step=100)
    z = layout.zones[0]
    # disc_030: 0.030 m2 on 111.1 m2 of floor is 0.027 % a diffuser; tested 6-15 % -> 222.2-555.6 diffusers
    assert count_range(layout, z) == (300, 500)
    fine = _small(step=1)
    assert count_range(fine, fine.zones[0]) == (223, 555)


@pytest.fixture(scope="module")
def solved():
    g = GridDesign(_small(), OPTIONS)
    g.build()
    r = g.solve_relaxed()
    assert r.ok
    best = g.search()
    return g, best


@pytest.mark.solver
@pytest.mark.slow
def test_whole_count_search_finds_the_enumerated_optimum(solved):
    g, best = solved
    # exhaustive enumeration of every whole-count grid of the design ranges (3 x 3 x 3), each re-solved
    grids = [dict(zip(g.ids, c)) for c in itertools.product(*[range(lo, hi + 1, 100) for lo, hi in
                                                              (g.ranges[z] for z in g.ids)])]
    assert len(grids) == 27
    costs = {tuple(c.values()): g.evaluate(c).annual_cost for c in grids}
    feasible = {k: v for k, v in costs.items() if v is not None}
    assert feasible
    optimum = min(feasible, key=feasible.get)
    assert tuple(best.counts[z] for z in g.ids) == optimum
    assert best.annual_cost == pytest.approx(feasible[optimum], rel=1e-9)
    # the relaxed optimum is a lower bound of every whole-count grid
    assert g.relaxed_result.objective <= min(feasible.values()) / g.reference + 1e-3


@pytest.mark.solver
@pytest.mark.slow
def test_more_diffusers_never_raise_a_days_optimised_energy(solved):
    g, best = solved
    compared = 0
    for z in g.zones:
        lo, hi = g.ranges[z.id]
        for n in range(lo, hi, 100):
            fewer = dict(best.counts, **{z.id: n})
            more = dict(best.counts, **{z.id: n + 100})
            if g.evaluate(fewer).annual_cost is None or g.evaluate(more).annual_cost is None:
                continue
            g.load(fewer)
            e_fewer = {f["day"].id: (f["energy_kWh_per_day"], f["schedule"][z.id]) for f in g.day_figures()}
            g.load(more)
            for f in g.day_figures():
                e_old, q_old = e_fewer[f["day"].id]
                # the schedule on fewer diffusers still fits the larger grid (above its diffuser minimum): the
                # larger grid transfers more at the same air, so its optimum costs no more. Flat tariff: cost and
                # energy are proportional.
                if min(q_old) >= (n + 100) * 1.0:  # disc_030 minimum 1 Sm3/h per diffuser
                    assert f["energy_kWh_per_day"] <= e_old * (1 + 1e-5), (z.id, n, f["day"].id)
                    compared += 1
    assert compared >= 4


@pytest.mark.solver
@pytest.mark.slow
def test_dearer_diffusers_never_raise_the_chosen_count(solved):
    g, best = solved
    dear = GridDesign(_small(cost_per_diffuser=400.0), OPTIONS)
    dear.build()
    assert dear.solve_relaxed().ok
    best_dear = dear.search()
    # with capital c x total count added to the same energy costs, the optimum's total count cannot rise with c
    assert sum(best_dear.counts.values()) <= sum(best.counts.values())
    assert sum(dear.relaxed.values()) <= sum(g.relaxed.values()) + 1e-3
    for z in g.ids:
        assert best_dear.counts[z] <= best.counts[z]


@pytest.mark.solver
@pytest.mark.slow
def test_the_designed_grid_passes_every_days_verification():
    result = run_design(_small(), OPTIONS)
    assert result.exit_code == 0 and result.summary["status"] == "optimal"
    assert list(result.days["verified"]) == [True, True]
    s = result.summary
    design, current, comp = s["design"], s["current"], s["comparison"]
    assert comp["extra_capital"] == pytest.approx(design["capital"] - current["capital"])
    assert comp["energy_saving_per_year"] == pytest.approx(current["energy_cost_per_year"]
                                                           - design["energy_cost_per_year"])
    # weights: the year is 300 average days and 65 peak days
    days = result.days.set_index("load_day")
    assert design["energy_kWh_per_year"] == pytest.approx(300 * days.loc["average", "energy_kWh_per_day_design"]
                                                          + 65 * days.loc["peak", "energy_kWh_per_day_design"])
    # the peak day needs more air than the average day on the same grid
    assert days.loc["peak", "energy_kWh_per_day_design"] > days.loc["average", "energy_kWh_per_day_design"]
    assert set(result.schedule["load_day"]) == {"average", "peak"}


@pytest.mark.solver
@pytest.mark.slow
def test_design_of_one_day_grows_about_linearly(solved):
    """Cases couple only through the counts: two days give twice the variables and constraints of one, plus the
    counts (the problem size, not a timing)."""
    g, _ = solved
    one = GridDesign(replace(_small(), load_days=_small().load_days[:1]), OPTIONS)
    one.build()
    r1 = one.solve_relaxed()
    r2 = g.relaxed_result
    assert r2.n_variables == 2 * r1.n_variables - len(g.ids)
    assert r2.n_constraints == 2 * r1.n_constraints


def test_design_needs_capital():
    from airtaper.errors import ModelError
    layout = replace(_small(), capital=None)
    with pytest.raises(ModelError):
        GridDesign(layout)


@pytest.mark.solver
@pytest.mark.slow
def test_day_models_read_their_own_day(solved):
    g, _ = solved
    peak = g.studies[1]
    assert peak.layout == day_layout(g.layout, g.days[1])
    assert sum(peak.layout.influent.flow_m3_d) == pytest.approx(1.2 * sum(g.layout.influent.flow_m3_d))


@pytest.mark.solver
@pytest.mark.slow
@pytest.mark.parametrize("end", [0, 1])
def test_relaxed_design_is_the_same_from_either_end_of_the_ranges(solved, end):
    """A perturbed start (every count at the bottom, or the top, of its range) reaches the same relaxed design."""
    g0, _ = solved
    g = GridDesign(_small(), OPTIONS)
    g.build()
    for z in g.ids:
        g.model.count[z].set_value(float(g.ranges[z][end]))
    r = g.solve_relaxed()
    assert r.ok
    assert r.objective == pytest.approx(g0.relaxed_result.objective, rel=1e-5)
    for z in g.ids:
        assert g.relaxed[z] == pytest.approx(g0.relaxed[z], abs=1.0)  # within one diffuser
