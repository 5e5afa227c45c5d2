"""Grid files: the scenarios of a sweep, each a set of layout values by key path.

A grid file is TOML with up to three parts::

    [common]                                  # applied to every scenario (optional)
    "horizon.n_periods" = 12

    [grid]                                    # every combination of these values (optional)
    "plant.water_temperature_C" = [10.0, 14.0, 18.0]
    "zone_defaults.fouling" = [0.8, 0.6]

    [[scenarios]]                             # listed scenarios (optional)
    id = "winter-fouled"
    set = { "plant.water_temperature_C" = 9.0, "zones.Z2.alpha" = 0.35 }

A top-level ``day = "ID"`` makes every scenario optimise the layout's load day ID
(``optimize --day ID``) instead of its base profile; its values are then swept by
key path too (``"load_days.peak.load_factor" = [1.3, 1.5, 1.7]``).

Key paths are those of override files (:mod:`airtaper.layout.overrides`): arrays of
tables in the layout are addressed by ``id``. Keys may be quoted (``"a.b" = ...``)
or written as nested tables; both give the same path. The grid's scenarios come
first, named ``g001``, ``g002``, ... in the order of the combinations (the last axis
varies fastest), then the listed ones under their own ids.

:func:`read_grid` checks the file's own shape (one :class:`InputError` naming the
file and key). :func:`check_scenario` then validates each scenario's layout through
the layout's parser; a problem there names the grid file, the scenario and the key,
and is that scenario's failed row rather than the end of the sweep.
"""

from __future__ import annotations

import itertools
import re
from dataclasses import dataclass

from airtaper.errors import InputError, Problem
from airtaper.layout.overrides import flatten, load_layout_with_values
from airtaper.layout.parse import parse_toml_text
from airtaper.layout.textfile import read_text_file
from airtaper.layout.types import Layout

MAX_GRID_BYTES = 2_000_000
#: Most scenarios one grid file may describe (a typo such as a 1000-value axis times
#: five others would otherwise queue a year of solves).
MAX_SCENARIOS = 20_000
_ID = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_-]{0,63}$")
_PARTS = ("day", "common", "grid", "scenarios")


@dataclass(frozen=True)
class Scenario:
    """One run of a sweep: its id and the layout values it sets ({key path: value}, common ones included)."""

    id: str
    values: dict
    swept: tuple[str, ...]  # the key paths that vary between scenarios (the table's input columns)
    options: tuple[str, ...] = ()  # further `optimize` options of this scenario (a year's `--day ID`)
    shown: dict | None = None  # the table's input cells when they are not the values (a year's month)

    def inputs(self) -> dict:
        return dict(self.shown) if self.shown is not None else {k: self.values.get(k) for k in self.swept}


@dataclass(frozen=True)
class Grid:
    path: str
    scenarios: tuple[Scenario, ...]
    axes: tuple[str, ...]  # key paths of [grid], in file order
    inputs: tuple[str, ...]  # every key path some scenario sets apart from [common]
    day: str | None = None  # the load day every scenario optimises (`day = "ID"`; None: the base profile)


def _values_table(node, label: str, key: str, problems: list) -> dict:
    if not isinstance(node, dict):
        problems.append(Problem(label, key, "must be a table of key paths", node, "key path = value lines"))
        return {}
    return flatten(node)


def read_grid(path) -> Grid:
    """The scenarios of the grid file at ``path``; an :class:`InputError` names the file and key."""
    label, text = read_text_file(path, MAX_GRID_BYTES, "grid file", "TOML")
    data = parse_toml_text(text, label)
    problems: list[Problem] = []
    for key in data:
        if key not in _PARTS:
            problems.append(Problem(label, key, "unknown key", key, "day, common, grid or scenarios"))
    day = data.get("day")
    if day is not None and not (isinstance(day, str) and _ID.match(day)):
        problems.append(Problem(label, "day", "must be the id of one of the layout's load days", day,
                                'a string such as "peak"'))
    common = _values_table(data.get("common", {}), label, "common", problems)
    axes = _values_table(data.get("grid", {}), label, "grid", problems)
    for key, values in axes.items():
        if not isinstance(values, list) or not values:
            problems.append(Problem(label, f"grid.{key}", "must be a list of the values to sweep", values,
                                    "[value, value, ...]"))
        elif key in common:
            problems.append(Problem(label, f"grid.{key}", "also set in [common]", key, "a key in one of them"))
    listed = data.get("scenarios", [])
    if not isinstance(listed, list) or not all(isinstance(s, dict) for s in listed):
        problems.append(Problem(label, "scenarios", "must be an array of tables", type(listed).__name__,
                                "[[scenarios]] tables with id and set"))
        listed = []
    ids: set[str] = set()
    own: list[tuple[str, dict]] = []
    for i, item in enumerate(listed):
        where = f"scenarios[{i}]"
        sid = item.get("id")
        for key in item:
            if key not in ("id", "set"):
                problems.append(Problem(label, f"{where}.{key}", "unknown key", key, "id or set"))
        if not isinstance(sid, str) or not _ID.match(sid):
            problems.append(Problem(label, f"{where}.id", "must be a short name of letters, digits, - and _", sid,
                                    'an id such as "winter-fouled"'))
            continue
        if sid in ids or re.fullmatch(r"g\d+", sid):
            problems.append(Problem(label, f"{where}.id", "repeats an id (g<number> names the grid's scenarios)",
                                    sid, "a unique id"))
            continue
        ids.add(sid)
        values = _values_table(item.get("set", {}), label, f"{where}.set", problems)
        if not values:
            problems.append(Problem(label, f"{where}.set", "sets no value", None, "key path = value pairs"))
        own.append((sid, values))
    n_grid = 1
    for values in axes.values():
        n_grid *= len(values) if isinstance(values, list) and values else 1
    n = (n_grid if axes else 0) + len(own)
    if not problems and n == 0:
        problems.append(Problem(label, "(file)", "no scenario", None, "a [grid] table or [[scenarios]] tables"))
    if n > MAX_SCENARIOS:
        problems.append(Problem(label, "grid", "too many scenarios", n, f"at most {MAX_SCENARIOS}"))
    if problems:
        raise InputError(problems)

    names = list(axes)
    opts = ("--day", day) if day else ()
    listed_keys = [k for _, v in own for k in v if k not in names]
    inputs = tuple(dict.fromkeys(names + listed_keys))
    scenarios = []
    if axes:
        width = max(3, len(str(n_grid)))
        for i, combo in enumerate(itertools.product(*(axes[k] for k in names)), start=1):
            scenarios.append(Scenario(f"g{i:0{width}d}", {**common, **dict(zip(names, combo))}, inputs, opts))
    for sid, values in own:
        scenarios.append(Scenario(sid, {**common, **values}, inputs, opts))
    return Grid(label, tuple(scenarios), tuple(names), inputs, day)


def scenario_problem(grid_path: str, scenario_id: str, problem: Problem, values_label: str) -> Problem:
    """A layout problem of one scenario in the grid's error form: the grid file, ``scenario ID: key``.

    Problems at keys the scenario did not set keep the layout file's name.
    """
    if problem.file != values_label:
        return Problem(problem.file, f"scenario {scenario_id}: {problem.key}", problem.problem, problem.got,
                       problem.expected)
    return Problem(grid_path, f"scenario {scenario_id}: {problem.key}", problem.problem, problem.got,
                   problem.expected)


def check_scenario(layout_path, grid_path: str, scenario: Scenario, warnings: list | None = None) -> Layout:
    """The scenario's layout, validated by the layout's parser; an :class:`InputError` names the scenario.

    A problem at a key the scenario sets names the grid file; one elsewhere in the
    layout names the layout file; both carry ``scenario ID:`` before the key.
    """
    label = f"{grid_path} [{scenario.id}]"
    try:
        layout = load_layout_with_values(layout_path, scenario.values, label, warnings=warnings)
    except InputError as exc:
        raise InputError([scenario_problem(grid_path, scenario.id, p, label) for p in exc.problems],
                         warnings=exc.warnings) from None
    if "--day" in scenario.options:
        day = scenario.options[scenario.options.index("--day") + 1]
        ids = [d.id for d in layout.load_days]
        if day not in ids:
            raise InputError(Problem(grid_path, f"scenario {scenario.id}: day", "no load day with that id", day,
                                     f"one of {', '.join(ids)}" if ids else "a layout with [[load_days]]"))
    return layout


__all__ = ["Grid", "MAX_SCENARIOS", "Scenario", "check_scenario", "read_grid", "scenario_problem"]
