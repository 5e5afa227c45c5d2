"""Grid files: scenarios from [common], [grid] and [[scenarios]]; problems in the layout's one-line form."""

from __future__ import annotations

import itertools
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from airtaper.errors import InputError
from airtaper.sweep.grid import check_scenario, read_grid

ROOT = Path(__file__).resolve().parents[2]
THREE = ROOT / "layouts" / "three_tank.toml"
DEMO_GRID = ROOT / "layouts" / "demo_grid.toml"


def _grid(tmp_path, text: str) -> Path:
    p = tmp_path / "g.toml"
    p.write_text(text)
    return p


def test_grid_is_every_combination_last_axis_fastest_then_listed(tmp_path):
    g = read_grid(_grid(tmp_path, """
[common]
"horizon.n_periods" = 4
[grid]
"plant.water_temperature_C" = [10.0, 20.0]
zones.T1.alpha = [0.4, 0.5, 0.6]
[[scenarios]]
id = "cold"
set = { "plant.water_temperature_C" = 8.0, "limits.nh4_mean_mg_L" = 1.5 }
"""))
    assert [s.id for s in g.scenarios] == ["g001", "g002", "g003", "g004", "g005", "g006", "cold"]
    assert g.axes == ("plant.water_temperature_C", "zones.T1.alpha")
    assert g.inputs == ("plant.water_temperature_C", "zones.T1.alpha", "limits.nh4_mean_mg_L")
    combos = list(itertools.product([10.0, 20.0], [0.4, 0.5, 0.6]))
    for sc, (t, a) in zip(g.scenarios, combos):
        assert sc.values == {"horizon.n_periods": 4, "plant.water_temperature_C": t, "zones.T1.alpha": a}
    assert g.scenarios[-1].values == {"horizon.n_periods": 4, "plant.water_temperature_C": 8.0,
                                      "limits.nh4_mean_mg_L": 1.5}


@pytest.mark.parametrize("text, line", [
    ("[grid]\n'plant.water_temperature_C' = 12.0\n",
     "error: {g}: grid.plant.water_temperature_C: must be a list of the values to sweep (got 12.0, "
     "expected [value, value, ...])"),
    ("[grid]\n'a.b' = []\n", "error: {g}: grid.a.b: must be a list of the values to sweep (got [], "
                              "expected [value, value, ...])"),
    ("[grids]\n'a.b' = [1]\n", "error: {g}: grids: unknown key (got 'grids', expected day, common, grid or scenarios)"),
    ("[[scenarios]]\nid = 'a b'\nset = { x = 1 }\n",
     "error: {g}: scenarios[0].id: must be a short name of letters, digits, - and _ (got 'a b', "
     "expected an id such as \"winter-fouled\")"),
    ("[[scenarios]]\nid = 'g001'\nset = { x = 1 }\n",
     "error: {g}: scenarios[0].id: repeats an id (g<number> names the grid's scenarios) (got 'g001', "
     "expected a unique id)"),
    ("[[scenarios]]\nid = 'a'\n", "error: {g}: scenarios[0].set: sets no value (expected key path = value pairs)"),
    ("[common]\nx = 1\n", "error: {g}: (file): no scenario (expected a [grid] table or [[scenarios]] tables)"),
    ("[grid]\na = [1, 2]\n[common]\na = 3\n", "error: {g}: grid.a: also set in [common] (got 'a', "
                                              "expected a key in one of them)"),
    ("[grid]\na = [1,\n", None),
])
def test_bad_grid_files_are_one_line_errors(tmp_path, text, line):
    g = _grid(tmp_path, text)
    with pytest.raises(InputError) as exc:
        read_grid(g)
    first = str(exc.value.problems[0])
    assert "\n" not in first and first.startswith(f"error: {g}: ")
    if line is not None:
        assert first == line.format(g=g)


def test_too_many_scenarios_is_refused(tmp_path):
    axes = "\n".join(f"k{i} = [{', '.join(str(j) for j in range(10))}]" for i in range(5))
    with pytest.raises(InputError) as exc:
        read_grid(_grid(tmp_path, "[grid]\n" + axes + "\n"))
    assert "too many scenarios (got 100000" in str(exc.value)


def test_a_bad_value_names_the_grid_the_scenario_and_the_key(tmp_path):
    g = read_grid(_grid(tmp_path, """
[[scenarios]]
id = "hot"
set = { "plant.water_temperature_C" = 50.0 }
[[scenarios]]
id = "typo"
set = { "zones.T9.alpha" = 0.5 }
[[scenarios]]
id = "fine"
set = { "zones.T2.alpha" = 0.45 }
"""))
    hot, typo, fine = g.scenarios
    with pytest.raises(InputError) as exc:
        check_scenario(THREE, g.path, hot)
    assert [str(p) for p in exc.value.problems] == [
        f"error: {g.path}: scenario hot: plant.water_temperature_C: out of range (got 50.0, expected >= 0 and <= 45)"]
    with pytest.raises(InputError) as exc:
        check_scenario(THREE, g.path, typo)
    assert str(exc.value.problems[0]) == (f"error: {g.path}: scenario typo: zones.T9.alpha: no table with id 'T9' "
                                          "in zones (got 'T9', expected one of T1, T2, T3)")
    layout = check_scenario(THREE, g.path, fine)
    assert {z.id: z.alpha for z in layout.zones}["T2"] == 0.45


def test_a_problem_elsewhere_in_the_layout_keeps_the_layout_name(tmp_path):
    """A scenario shortening the horizon makes a per-period value of the layout the wrong length."""
    lay = tmp_path / "lay.toml"
    lay.write_text(THREE.read_text().replace("water_temperature_C = 14.0", "water_temperature_C = [14.0, 15.0]")
                   + "\n[horizon]\nn_periods = 2\n")
    g = read_grid(_grid(tmp_path, "[[scenarios]]\nid = 'four'\nset = { 'horizon.n_periods' = 4 }\n"))
    with pytest.raises(InputError) as exc:
        check_scenario(lay, g.path, g.scenarios[0])
    text = str(exc.value.problems[0])
    assert text.startswith(f"error: {lay}: scenario four: plant.water_temperature_C: ")


def test_the_example_grid_is_valid_on_the_demo():
    g = read_grid(DEMO_GRID)
    assert len(g.scenarios) >= 8
    for sc in g.scenarios:
        check_scenario(ROOT / "layouts" / "demo.toml", g.path, sc)  # raises on a bad scenario


@settings(max_examples=40, deadline=None)
@given(st.lists(st.lists(st.floats(5.0, 30.0, allow_nan=False), min_size=1, max_size=3), min_size=1, max_size=3))
def test_scenario_count_is_the_product_of_the_axes(tmp_path_factory, axes):
    """Property: n = product of axis lengths; every combination appears once, in order."""
    d = tmp_path_factory.mktemp("g")
    text = "[grid]\n" + "\n".join(f'"a{i}.x" = [{", ".join(repr(v) for v in vals)}]' for i, vals in enumerate(axes))
    g = read_grid(_grid(d, text))
    combos = list(itertools.product(*axes))
    assert len(g.scenarios) == len(combos)
    assert [tuple(s.values[f"a{i}.x"] for i in range(len(axes))) for s in g.scenarios] == combos


def test_a_grid_on_a_load_day_sweeps_its_load_factor(tmp_path):
    """`day` makes every scenario optimise that load day; its factors are key paths like any other."""
    demo = ROOT / "layouts" / "demo.toml"
    g = read_grid(_grid(tmp_path, 'day = "peak"\n[grid]\n"load_days.peak.load_factor" = [1.3, 1.7]\n'))
    assert g.day == "peak" and all(s.options == ("--day", "peak") for s in g.scenarios)
    layouts = [check_scenario(demo, g.path, s) for s in g.scenarios]
    assert [next(d for d in lay.load_days if d.id == "peak").load_factor for lay in layouts] == [1.3, 1.7]
    g = read_grid(_grid(tmp_path, 'day = "peek"\n[grid]\n"plant.water_temperature_C" = [12.0]\n'))
    with pytest.raises(InputError) as exc:
        check_scenario(demo, g.path, g.scenarios[0])
    assert str(exc.value.problems[0]).startswith(f"error: {g.path}: scenario g001: day: no load day with that id "
                                                 "(got 'peek', expected one of average, ")
