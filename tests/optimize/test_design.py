"""Diffuser-grid design over load days: economics, design ranges, the whole-count search, monotonicity."""

from __future__ import annotations

import itertools
import tomllib
from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd
import pyomo.environ as pyo
import pytest

from airtaper.layout import parse_layout
from airtaper.layout.loaddays import day_layout
from airtaper.optimize.design import (Candidate, DaySolve, DesignOptions, GridDesign, capital_recovery_factor,
                                      net_present_value, payback_text, run_design, simple_payback_years)
from airtaper.plant import resolve_plant

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


def test_no_payback_when_cheaper_to_build_but_dearer_to_run():
    # less capital now but more energy every year: nothing is paid back (the capital saved is spent again); the
    # words say which case it is
    assert simple_payback_years(-2_000.0, -300.0) is None
    assert "cheaper to build but dearer to run" in payback_text(-2_000.0, -300.0)
    assert simple_payback_years(2_000.0, -300.0) is None
    assert "costs more to build and saves nothing" in payback_text(2_000.0, -300.0)
    assert payback_text(1_000.0, 250.0) == "4.0 years"
    assert simple_payback_years(0.0, 0.0) == 0.0
    # its net present value says the same: negative over any life
    assert net_present_value(-2_000.0, -300.0, 0.05, 15.0) < 0.0


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
    # the design reads its ranges from the resolved plant (plant.resolve.design_count_range)
    layout = _small(step=100)
    # disc_030: 0.030 m2 on 111.1 m2 of floor is 0.027 % a diffuser; tested 6-15 % -> 222.2-555.6 diffusers
    assert resolve_plant(layout).diffused[0].count_range == (300, 500)
    assert GridDesign(layout, OPTIONS).ranges[layout.zones[0].id] == (300, 500)
    assert resolve_plant(_small(step=1)).diffused[0].count_range == (223, 555)


class _Bisected(GridDesign):
    """The design's search with each day's verdict on a grid given by a rule instead of a solve: the minimum day
    fails above ``turndown`` diffusers in the first zone (turndown), the peak day below ``transfer`` (transfer)."""

    def __init__(self, transfer: float, turndown: float):
        super().__init__(_small(step=1), OPTIONS)
        self.days = (replace(self.days[0], id="minimum"), replace(self.days[1], id="peak"))
        self.transfer, self.turndown = transfer, turndown
        self.grids = []

    def evaluate(self, counts, whole=True):
        n = float(counts[self.ids[0]])
        self.grids.append(n)
        solves = [DaySolve("optimal" if n <= self.turndown else "infeasible", goal=1.0),
                  DaySolve("optimal" if n >= self.transfer else "infeasible", goal=1.0)]
        for s in solves:
            s.goal = s.goal if s.status == "optimal" else None
        self._solved[self._key(counts)] = solves
        failed = next((d.id for d, s in zip(self.days, solves) if not s.ok), None)
        c = Candidate(dict(counts), None if failed else 1.0, "infeasible" if failed else "optimal", 0.0,
                      objective=None if failed else 1.0, failed_day=failed)
        self.candidates.append(c)
        return c


def _bisect(g: _Bisected, a: float, b: float):
    other = {z: 300.0 for z in g.ids[1:]}
    ca, cb = g.evaluate({g.ids[0]: a, **other}), g.evaluate({g.ids[0]: b, **other})
    tried = [(np.array([a] + [300.0] * (len(g.ids) - 1)), ca), (np.array([b] + [300.0] * (len(g.ids) - 1)), cb)]
    return g._between(tried, lambda x: dict(zip(g.ids, map(float, x))))


@pytest.mark.parametrize("transfer, turndown", [(400.0, 420.0), (230.0, 250.0), (500.0, 540.0)])
def test_failed_grids_are_bisected_to_one_meeting_both_days(transfer, turndown):
    # a grid too large fails the minimum day, one too small the peak day: the bisection of the segment between them
    # finds a grid meeting both, in the window [transfer, turndown], in at most six halvings (the window is 20 or
    # 40 diffusers of the 330 between the ends: 1/16 of the segment at least, so four halvings reach it)
    g = _Bisected(transfer, turndown)
    found = _bisect(g, 550.0, 220.0)  # the large end fails the minimum day, the small end the peak day
    assert found is not None
    x, c = found
    assert transfer <= x[0] <= turndown and c.objective is not None
    assert len(g.grids) - 2 <= 5


def test_no_bisection_without_a_pair_of_failed_grids_each_meeting_the_others_day():
    g = _Bisected(400.0, 420.0)
    assert _bisect(g, 550.0, 500.0) is None  # both ends fail the same day (the minimum day): no bracket
    assert len(g.grids) == 2
    g = _Bisected(450.0, 420.0)  # no grid meets both days: the halvings end without one
    assert _bisect(g, 550.0, 220.0) is None
    assert 2 < len(g.grids) <= 2 + 6


class _Restored(_Bisected):
    """As :class:`_Bisected`, with each failed day's least excess and its gradient by the counts (linear in the
    first zone's count: the turndown's excess grows by 1 a diffuser above ``turndown``, the transfer's by 1 a
    diffuser below ``transfer``), as the restoration reads them; every day is solved on every grid."""

    def evaluate(self, counts, whole=True, every_day=False):
        n = float(counts[self.ids[0]])
        self.grids.append(n)
        unit = np.eye(len(self.ids))[0]
        solves = []
        for excess, slope in ((n - self.turndown, 1.0), (self.transfer - n, -1.0)):
            if excess <= 0.0:
                solves.append(DaySolve("optimal", goal=1.0, objective=1.0, gradient=np.zeros(len(self.ids))))
            else:
                solves.append(DaySolve("infeasible", excess=excess, excess_gradient=slope * unit))
        self._solved[self._key(counts)] = solves
        failed = next((d.id for d, s in zip(self.days, solves) if not s.ok), None)
        bad = next((s for s in solves if not s.ok), None)
        c = Candidate(dict(counts), None if failed else 1.0, "infeasible" if failed else "optimal", 0.0,
                      objective=None if failed else 1.0, gradient=None if failed else dict.fromkeys(self.ids, 0.0),
                      failed_day=failed, excess=None if bad is None else bad.excess)
        self.candidates.append(c)
        return c


def _restore_from(g: _Restored, first: float):
    """The restoration after one grid with ``first`` diffusers in the first zone (300 in the others)."""
    g.evaluate({g.ids[0]: first, **{z: 300.0 for z in g.ids[1:]}})
    lo = np.array([g.ranges[z][0] for z in g.ids], dtype=float)
    hi = np.array([g.ranges[z][1] for z in g.ids], dtype=float)
    return g._restore(lambda x: dict(zip(g.ids, map(float, x))), lo, hi)


def test_the_restoration_remembers_both_days_and_lands_between_them():
    # the peak day fails below 400 diffusers in the first zone, the minimum day above 410. From 230 (fails the
    # peak day by 170) the step aimed 1.5 times the peak's linearised excess lands on 485 (fails the minimum day by
    # 75); the peak day's linearisation from 230 is kept, so the next step meets both linearisations, aimed as far
    # beyond them as they allow: 400 + 170 a = 410 - 75 a, a = 10/245, the grid 406.9. Newton steps on the last
    # grid's failing day alone swung from side to side of so narrow a band (485, 284, 555, 223, ...) without one.
    g = _Restored(400.0, 410.0)
    found = _restore_from(g, 230.0)
    assert found is not None
    x, c = found
    assert x[0] == pytest.approx(400.0 + 170.0 * 10.0 / 245.0, abs=1e-6) and c.objective is not None
    assert g.grids[1] == pytest.approx(485.0) and len(g.grids) == 3


def test_the_restoration_ends_when_the_days_linearisations_leave_no_grid():
    # the peak day needs 420 or more, the minimum day 410 or fewer: no grid; the two days' linearisations say so
    # after two grids (230, then 515), without spending the rounds
    g = _Restored(420.0, 410.0)
    assert _restore_from(g, 230.0) is None
    assert len(g.grids) == 2


class _Band(GridDesign):
    """The design's whole-count search with each day's verdict by a rule: the peak day needs at least ``transfer``
    diffusers in the first zone, the minimum day at most ``turndown`` in the second (a band one step wide)."""

    def __init__(self, transfer: float, turndown: float):
        super().__init__(_small(step=1), OPTIONS)
        self.days = (replace(self.days[0], id="minimum"), replace(self.days[1], id="peak"))
        self.transfer, self.turndown = transfer, turndown
        self.grids = []

    def evaluate(self, counts, whole=True, every_day=False):
        a, b = (float(counts[z]) for z in self.ids[:2])
        self.grids.append(tuple(counts[z] for z in self.ids))
        failed = "minimum" if b > self.turndown else "peak" if a < self.transfer else None
        c = Candidate(dict(counts), None if failed else 1.0, "infeasible" if failed else "optimal", 0.0,
                      objective=None if failed else 1.0 + 1e-3 * (a - b),
                      gradient=None if failed else dict.fromkeys(self.ids, 0.0), failed_day=failed)
        self.candidates.append(c)
        return c


def test_whole_counts_try_the_corners_around_the_continuous_optimum():
    # the continuous optimum 400.4 / 300.6 / 300 rounds to 400 / 301 / 300 (fails both days), up to 401 / 301 / 300
    # (fails the minimum day), down to 400 / 300 / 300 (fails the peak day); the corner 401 / 300 / 300 meets both
    g = _Band(transfer=401.0, turndown=300.0)
    g.relaxed = dict(zip(g.ids, (400.4, 300.6, 300.0)))
    best = g.search()
    assert best is not None and best.objective is not None
    assert tuple(best.counts[z] for z in g.ids) == (401, 300, 300)
    assert g.grids[:4] == [(400, 301, 300), (401, 301, 300), (400, 300, 300), (401, 300, 300)]


@pytest.fixture(scope="module")
def solved():
    g = GridDesign(_small(), OPTIONS)
    g.build()
    assert g.solve_relaxed() is not None
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
    searched = len(g.candidates)
    costs = {tuple(c.values()): g.evaluate(c).objective for c in grids}
    feasible = {k: v for k, v in costs.items() if v is not None}
    assert feasible
    optimum = min(feasible, key=feasible.get)
    assert tuple(best.counts[z] for z in g.ids) == optimum
    assert best.objective == pytest.approx(feasible[optimum], rel=1e-9)
    # the search needed fewer whole-count grids than the enumeration
    assert sum(c.whole for c in g.candidates[:searched]) < len(grids)


@pytest.mark.solver
@pytest.mark.slow
def test_count_sensitivity_from_the_duals_matches_re_solved_days(solved):
    """The gradient of the annual cost from each day's duals (envelope theorem: d f*/d q = dL/dq at the optimum,
    Fiacco, Introduction to Sensitivity and Stability Analysis in Nonlinear Programming, Academic Press 1983,
    Theorem 2.4.4; from memory) against a central difference of the days re-solved at +-2 diffusers."""
    g, best = solved
    base = g.evaluate(best.counts)
    checked = 0
    for z in g.ids:
        lo, hi = g.ranges[z]
        n = best.counts[z]
        if not lo + 2 <= n <= hi - 2:
            continue
        up = g.evaluate(dict(best.counts, **{z: n + 2.0}), whole=False)
        down = g.evaluate(dict(best.counts, **{z: n - 2.0}), whole=False)
        fd = (up.objective - down.objective) / 4.0
        assert base.gradient[z] == pytest.approx(fd, rel=0.05, abs=0.05 * g.crf * 60.0), z
        checked += 1
    assert checked >= 1


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
    assert dear.solve_relaxed() is not None
    best_dear = dear.search()
    # with capital c x total count added to the same energy costs, the optimum's total count cannot rise with c
    assert sum(best_dear.counts.values()) <= sum(best.counts.values())
    for z in g.ids:
        assert best_dear.counts[z] <= best.counts[z]


@pytest.mark.solver
@pytest.mark.slow
def test_the_designed_grid_passes_every_days_verification():
    d = _small_data()
    d["load_days"][1]["water_temperature_C"] = 15.0  # a day's own per-period values, verified on the layout's grid
    result = run_design(parse_layout(d, str(LAYOUTS / "small.toml"), LAYOUTS), OPTIONS)
    assert result.exit_code == 0 and result.summary["status"] == "optimal"
    assert list(result.days["verified"]) == [True, True]
    s = result.summary
    design, current, comp = s["design"], s["current"], s["comparison"]
    assert comp["extra_capital"] == pytest.approx(design["capital"] - current["capital"])
    assert comp["energy_saving_per_year"] == pytest.approx(current["energy_cost_per_year"]
                                                           - comp["design_energy_cost_per_year_compared"])
    # weights: the year is 300 average days and 65 peak days
    days = result.days.set_index("load_day")
    assert design["energy_kWh_per_year"] == pytest.approx(300 * days.loc["average", "energy_kWh_per_day_design"]
                                                          + 65 * days.loc["peak", "energy_kWh_per_day_design"])
    # the peak day needs more air than the average day on the same grid
    assert days.loc["peak", "energy_kWh_per_day_design"] > days.loc["average", "energy_kWh_per_day_design"]
    assert set(result.schedule["load_day"]) == {"average", "peak"}
    # designed on 6 periods, the days are solved again on the layout's own 24 for the chosen grid, and those
    # schedules (held and re-simulated) are the ones reported
    assert (result.schedule.groupby(["load_day", "zone"]).size() == 24).all()
    assert result.design.refined == {"average": "on the layout's 24 periods", "peak": "on the layout's 24 periods"}
    # the studies replaced by the re-solves carry their own variables (a warm start or load writes into them)
    g = result.design
    for st, variables in zip(g.studies, g._vars):
        model_vars = list(st.m.component_data_objects(pyo.Var, descend_into=True))
        assert len(variables) == len(model_vars) and all(a is b for a, b in zip(variables, model_vars))
    assert s["prescreen"]["feasible"] is True and set(s["prescreen"]["days"]) == {"average", "peak"}
    assert sum("the schedule reported is solved on the layout's 24 periods" in m for m in s["messages"]) == 2


@pytest.mark.solver
@pytest.mark.slow
def test_coarse_steps_get_optimizes_back_off_rule_and_a_refined_day(monkeypatch):
    """The chosen grid's days are held by ``optimize``'s back-off with its rule for model steps longer than
    REFINED_STEP_H (here 2-hour steps: ``coarse``), and a day whose coarse rounds cannot hold the DO range is solved
    again on the finer steps for that grid, whose schedule is the one verified and reported. The small case holds
    its range on 2-hour steps, so the back-off's verdict is forced to "refine" for the peak day."""
    from airtaper.optimize import design as module
    from airtaper.optimize.backoff import REFINED_STEP_H
    from airtaper.optimize.diurnal import model_steps_per_period

    calls, real = [], module.hold_do

    def held(study, verify, progress=None, relax=None, coarse=False):
        out = real(study, verify, progress, relax=relax, coarse=coarse)
        calls.append(coarse)
        if len(calls) == 2:  # the second day (peak): as if its coarse rounds could not hold the range
            out = dict(out, refine=True, refine_reason="forced by the test")
        return out

    monkeypatch.setattr(module, "hold_do", held)
    result = run_design(_small(), replace(OPTIONS, verify_layout_periods=False))
    # 4-hour periods of two steps: 2-hour steps are coarse; the peak day solved again is held on its 0.5-hour steps
    assert calls == [True, True, False]
    g = result.design
    steps = {d.id: model_steps_per_period(st.plant, st.options) for d, st in zip(g.days, g.studies)}
    assert steps == {"average": 2, "peak": int(4 / REFINED_STEP_H)}
    assert g.refined == {"peak": f"on {REFINED_STEP_H:g}-hour model steps"}
    assert result.exit_code == 0 and list(result.days["verified"]) == [True, True]
    assert any("peak: the schedule reported is solved on 0.5-hour model steps" in m for m in result.summary["messages"])
    # the schedule reported is the refined study's, for the designed counts
    peak = result.schedule[result.schedule["load_day"] == "peak"]
    st = g.studies[1]
    for z, q in st.schedule_by_zone().items():
        assert peak[peak["zone"] == z]["airflow_Sm3_h"].to_numpy() == pytest.approx(q)
    assert {z: float(st.m.diffuser_count[z].value) for z in g.ids} == {
        z: float(n) for z, n in result.summary["design"]["counts"].items()}


@pytest.mark.solver
@pytest.mark.slow
def test_payback_against_a_current_grid_that_fails_a_day():
    """A current grid that cannot meet a load day (here the peak day: a heavy day with a low alpha, too much for the
    current 420/340/260 diffusers) is compared with the designed grid on the days it meets: the same days on both
    sides, the day it breaks named."""
    d = _small_data()
    d["load_days"][1].update(flow_factor=1.5, load_factor=2.2, alpha_factor=0.7)
    result = run_design(parse_layout(d, str(LAYOUTS / "small.toml"), LAYOUTS), OPTIONS)
    s = result.summary
    assert result.exit_code == 0
    comp, current, design = s["comparison"], s["current"], s["design"]
    assert comp["load_days_compared"] == ["average"] and comp["days_per_year_compared"] == 300.0
    assert list(comp["load_days_not_met_by_current"]) == ["peak"]
    assert "broken by" in comp["load_days_not_met_by_current"]["peak"]  # the limit and its least excess
    days = result.days.set_index("load_day")
    # both grids compared as the search solved them (the design's 6 periods): the designed grid's average day there
    searched = result.design._solved[result.design._key(design["counts"])][0]
    assert comp["design_energy_cost_per_year_compared"] == pytest.approx(300.0 * searched.goal, rel=1e-6)
    saving = current["energy_cost_per_year"] - comp["design_energy_cost_per_year_compared"]
    assert comp["energy_saving_per_year"] == pytest.approx(saving, rel=1e-9) and comp["periods"] == 6
    assert current["energy_cost_per_year"] == pytest.approx(300.0 * days.loc["average", "cost_per_day_current"])
    assert pd.isna(days.loc["peak", "cost_per_day_current"])
    extra = design["capital"] - current["capital"]
    assert comp["net_present_value"] == pytest.approx(net_present_value(extra, saving, 0.05, 15.0))
    assert comp["payback_years"] == pytest.approx(simple_payback_years(extra, saving), rel=1e-9)
    assert any("current grid cannot meet load day(s) peak" in m for m in s["messages"])
    # the report and the console say on which days the figures stand
    from airtaper.report.design import design_console, design_html

    assert "it cannot meet peak" in design_console(s)
    assert "The current grid cannot meet every load day" in design_html(s, result.zones, result.days, {},
                                                                          result.binding)


@pytest.mark.solver
@pytest.mark.slow
def test_a_grids_annual_cost_is_the_sum_of_its_days_solved_alone(solved):
    """Decomposition: the days couple only through the counts, so a two-day design's annual cost of a grid is the
    annualised capital plus each day's weighted optimum, each day solved by a design of that day alone."""
    g, best = solved
    both = g.evaluate(best.counts)
    layout = _small()
    singles = [GridDesign(replace(layout, load_days=layout.load_days[k:k + 1]), OPTIONS).evaluate(best.counts)
               for k in range(2)]
    capital = g.crf * (60.0 * sum(best.counts.values()) + 3 * 5000.0)  # 60 EUR a diffuser, 5000 EUR a zone
    assert both.objective == pytest.approx(capital + sum(c.objective - capital for c in singles), rel=1e-6)
    for z in g.ids:  # the gradients add the same way (the capital's share counted once)
        assert both.gradient[z] == pytest.approx(
            g.crf * 60.0 + sum(c.gradient[z] - g.crf * 60.0 for c in singles), rel=1e-4, abs=1e-3)


def _with_minimum_day(**zones) -> dict:
    d = _small_data()
    d["load_days"].append({"id": "night", "basis": "minimum_day", "days_per_year": 1.0})
    if zones:
        d["load_days"][-1]["zones"] = zones
    return d


def test_prescreen_names_a_day_no_grid_can_meet_before_any_search():
    """A minimum day whose last tank may not rise above 0.6 mg/L: with every tank's DO held at its minimum (0.5
    mg/L) and its air at the least the fewest diffusers of the range allow (the mixing minimum), T3's DO is far
    above it all day, so no grid of the ranges can meet the day: exit 3 naming it, no day model solved."""
    import time

    from airtaper.errors import EXIT_INFEASIBLE

    layout = parse_layout(_with_minimum_day(T3={"do_max_mg_L": 0.6}), str(LAYOUTS / "small.toml"), LAYOUTS)
    t0 = time.process_time()
    result = run_design(layout, OPTIONS)
    seconds = time.process_time() - t0
    s = result.summary
    assert result.exit_code == EXIT_INFEASIBLE and s["status"] == "infeasible"
    screen = s["prescreen"]
    assert screen["feasible"] is False
    assert [d for d, r in screen["days"].items() if not r["feasible"]] == ["night"]
    (finding,) = screen["days"]["night"]["findings"]
    assert finding["limit"] == "do_max" and finding["zone"] == "T3" and finding["spans"][0]["amount"] > 0.05
    assert any(m.startswith("no grid in the design ranges can meet load day(s) night: zone T3 cannot hold its DO "
                            "maximum of 0.6 mg/L") for m in s["messages"])
    assert s["solver"]["day_solves"] == 0 and result.candidates.empty and not result.design.studies
    # fast: a few simulated days, no optimisation (about 3 CPU s on the small case; generous bound)
    assert seconds < 60.0
    # the same day with the tank's own range passes the screen (the other days always do)
    ok = GridDesign(parse_layout(_with_minimum_day(), str(LAYOUTS / "small.toml"), LAYOUTS), OPTIONS).prescreen()
    assert ok["feasible"] and set(ok["days"]) == {"average", "peak", "night"}


def test_a_minimum_day_is_designed_on_the_layouts_own_periods():
    """Six coarse periods average the night's low flow away: a day whose basis is minimum_day is designed on the
    layout's own periods and steps (DesignOptions.own_period_days names others), the other days on the design's."""
    from airtaper.errors import ModelError

    layout = parse_layout(_with_minimum_day(), str(LAYOUTS / "small.toml"), LAYOUTS)
    g = GridDesign(layout, OPTIONS)
    assert g.own_periods == {"night"} and g.layout.horizon.n_periods == 6 and layout.horizon.n_periods == 24
    assert GridDesign(layout, replace(OPTIONS, own_period_days=("peak",))).own_periods == {"peak"}
    assert GridDesign(layout, replace(OPTIONS, own_period_days=())).own_periods == set()
    assert GridDesign(layout, DesignOptions()).own_periods == set()  # the layout's periods: nothing to do
    with pytest.raises(ModelError, match="no load day 'storm'"):
        GridDesign(layout, replace(OPTIONS, own_period_days=("storm",)))


@pytest.mark.solver
@pytest.mark.slow
def test_the_minimum_days_model_and_solves_are_on_the_layouts_periods():
    layout = parse_layout(_with_minimum_day(), str(LAYOUTS / "small.toml"), LAYOUTS)
    g = GridDesign(layout, OPTIONS)
    g.build()
    periods = {d.id: st.plant.n_periods for d, st in zip(g.days, g.studies)}
    assert periods == {"average": 6, "peak": 6, "night": 24}
    night = g.studies[2]
    assert night.plant.layout == day_layout(layout, layout.load_days[2])  # the layout's own day, not the mapped one
    c = g.evaluate(g.current, every_day=True)
    assert c.objective is not None
    assert len(g._solved[g._key(g.current)][2].state) == len(g._vars[2])


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
    assert peak.plant.layout == day_layout(g.layout, g.days[1])
    assert sum(peak.plant.hydraulics.influent_m3_d) == pytest.approx(1.2 * sum(g.plant.hydraulics.influent_m3_d))


@pytest.mark.solver
@pytest.mark.slow
@pytest.mark.parametrize("end", [0, 1])
def test_the_design_is_the_same_from_either_end_of_the_ranges(solved, end):
    """A perturbed start (every count at the bottom, or the top, of its range) reaches the same whole-count grid."""
    g0, best0 = solved
    g = GridDesign(_small(), OPTIONS)
    g.build()
    assert g.solve_relaxed(start={z: g.ranges[z][end] for z in g.ids}) is not None
    best = g.search()
    assert best.counts == best0.counts
    assert best.objective == pytest.approx(best0.objective, rel=1e-6)


@pytest.mark.solver
@pytest.mark.slow
def test_what_holds_each_zone_comes_from_the_duals(solved):
    """Each binding row names a limit the day's solution sits on, and a DO minimum's value per year matches the
    day re-solved with that minimum raised (a dual is d f*/d b: the change of the optimum per unit of the bound)."""
    g, best = solved
    g.load(best.counts)
    text, rows = g.binding(best.counts)
    assert set(text) == set(g.ids) and all(text[z] for z in g.ids)
    assert rows and {r["case"] for r in rows} <= {"transfer", "turndown", "mixing"}
    days = {d.id: i for i, d in enumerate(g.days)}
    for r in rows:
        if r["case"] == "turndown":  # the air per diffuser sits on its minimum (disc_030: 1 Sm3/h) in some period
            m = g.studies[days[r["load_day"]]].m
            q = min(m.airflow_Sm3_h[r["zone"], p].value for p in m.PERIODS)
            assert q == pytest.approx(best.counts[r["zone"]] * 1.0, rel=1e-4)
    do = max((r for r in rows if r["limit"] == "DO minimum"), key=lambda r: r["cost_per_year"])
    i = days[do["load_day"]]
    st, w = g.studies[i], g.days[i].days_per_year
    ref = st.reference()
    before = ref * float(st.m.opt.objective.expr())
    lim = float(st.m.opt.do_min_mg_L[do["zone"]].value)
    try:
        st.set_limit("do_min", lim + 0.01, do["zone"])
        assert st.resolve() is not None
        after = ref * float(st.m.opt.objective.expr())
    finally:
        st.set_limit("do_min", lim, do["zone"])
        g.load(best.counts)
    # per 0.1 mg/L from a 0.01 mg/L step: the change is nearly linear over so small a step
    assert w * (after - before) * 10.0 == pytest.approx(do["cost_per_year"], rel=0.05)


@pytest.mark.solver
def test_phase_two_objective_is_built_once_and_converted_once():
    """Phase two (the least excess) keeps one objective on the day's model, deactivated between its solves, so the
    bridge converts the model for it once (a new objective each call was converted again: about 0.75 s a call on
    the demo's 6-period day) and the day's own objective is the one active afterwards."""
    from airtaper.optimize.attempts import LADDER
    from airtaper.optimize.problem import LIMIT_GROUPS

    layout = _small()
    g = GridDesign(replace(layout, load_days=layout.load_days[:1]), OPTIONS)
    g.build()
    st = g.studies[0]
    b = st.m.opt
    do_min = [grp for grp in LIMIT_GROUPS if grp.name == "do_min"]
    params = [st.m.diffuser_count[z] for z in g.ids]
    runs, objectives = [], []
    for _ in range(2):
        _reason, r, total, _grad = GridDesign._least_excess(st, LADDER[0], do_min, params)
        runs.append(r)
        objectives.append(b.component("least_excess_objective"))
        active = list(st.m.component_data_objects(pyo.Objective, active=True))
        assert active == [b.objective]  # the day's objective is back, the least excess put aside
        assert all(v.fixed and v.value == 0.0 for v in b.do_min_slack.values())
        assert total == pytest.approx(0.0, abs=1e-6)  # the start meets the DO minimum
    assert objectives[0] is not None and objectives[0] is objectives[1]
    assert runs[0].ok and runs[1].ok
    assert runs[1].timings.derivatives_s == 0.0  # the second call reused the converted structure
