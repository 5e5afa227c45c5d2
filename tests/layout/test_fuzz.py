"""Fuzzing the parser: whatever the TOML tree or CSV text, only InputError comes out."""

from __future__ import annotations

import copy
import datetime as dt
import os
import tempfile
import tomllib
from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from airtaper.errors import InputError
from airtaper.layout import layout_to_data, parse_layout, parse_toml_text
from airtaper.layout.graph import build_graph
from airtaper.layout.influent import CSV_COLUMNS, influent_from_csv_text, read_fractionation
from airtaper.layout.reader import Collector

LAYOUTS = Path(__file__).resolve().parents[2] / "layouts"
with open(LAYOUTS / "demo.toml", "rb") as _fh:
    DEMO = tomllib.load(_fh)
with open(LAYOUTS / "three_tank.toml", "rb") as _fh:
    THREE = tomllib.load(_fh)


def _vocabulary(tree, out: set) -> set:
    if isinstance(tree, dict):
        for k, v in tree.items():
            out.add(k)
            _vocabulary(v, out)
    elif isinstance(tree, list):
        for v in tree:
            _vocabulary(v, out)
    elif isinstance(tree, str):
        out.add(tree)
    return out


WORDS = sorted(_vocabulary(DEMO, _vocabulary(THREE, set())) | {"asm1", "settling", "overrides", "layered"})
#: Examples per fuzz test; AIRTAPER_FUZZ_EXAMPLES=5000 for a longer hunt.
N_EXAMPLES = int(os.environ.get("AIRTAPER_FUZZ_EXAMPLES", "200"))
FUZZ = settings(max_examples=N_EXAMPLES, deadline=None, suppress_health_check=[HealthCheck.too_slow])

# Everything tomllib can produce: tables, arrays, str, int, float (nan, inf), bool, dates and times.
scalars = st.one_of(
    st.integers(min_value=-10**20, max_value=10**20), st.floats(allow_nan=True, allow_infinity=True),
    st.booleans(), st.text(max_size=12), st.sampled_from(WORDS),
    st.dates(), st.times(), st.datetimes(timezones=st.none() | st.just(dt.timezone.utc)),
)
keys = st.one_of(st.sampled_from(WORDS), st.text(max_size=8))
trees = st.recursive(scalars, lambda kids: st.one_of(st.lists(kids, max_size=5),
                                                     st.dictionaries(keys, kids, max_size=6)), max_leaves=40)


def _parse_quietly(data, base=LAYOUTS):
    try:
        layout = parse_layout(data, "fuzz.toml", base)
    except InputError as exc:
        assert exc.problems, "an InputError must list at least one problem"
        for p in exc.problems:
            assert str(p).startswith("error: ")
        return None
    build_graph(layout)
    return layout


@FUZZ
@given(st.dictionaries(keys, trees, max_size=8))
def test_random_trees_raise_only_input_error(data):
    _parse_quietly(data)


def _paths(tree, prefix=()):
    yield prefix
    if isinstance(tree, dict):
        for k, v in tree.items():
            yield from _paths(v, prefix + (k,))
    elif isinstance(tree, list):
        for i, v in enumerate(tree):
            yield from _paths(v, prefix + (i,))


DEMO_PATHS = [p for p in _paths(DEMO) if p]
THREE_PATHS = [p for p in _paths(THREE) if p]


@st.composite
def mutated(draw):
    """A shipped layout with a few values replaced by random trees, or deleted."""
    base, paths = draw(st.sampled_from([(DEMO, DEMO_PATHS), (THREE, THREE_PATHS)]))
    data = copy.deepcopy(base)
    for _ in range(draw(st.integers(1, 3))):
        path = draw(st.sampled_from(paths))
        node = data
        try:
            for k in path[:-1]:
                node = node[k]
            if draw(st.booleans()) and isinstance(node, dict):
                node.pop(path[-1], None)
            else:
                node[path[-1]] = draw(trees)
        except (KeyError, IndexError, TypeError):
            continue  # an earlier mutation removed or replaced this path
    return data


@FUZZ
@given(mutated())
def test_mutated_layouts_raise_only_input_error(data):
    layout = _parse_quietly(data)
    if layout is not None:  # what parses must round-trip
        assert parse_layout(layout_to_data(layout), "fuzz.toml", LAYOUTS) == layout


@FUZZ
@given(st.text(max_size=300))
def test_random_toml_text_raises_only_input_error(text):
    try:
        data = parse_toml_text(text, "fuzz.toml")
    except InputError as exc:
        assert len(exc.problems) == 1
        return
    _parse_quietly(data)


# --- CSV -------------------------------------------------------------------------------------------
cells = st.one_of(
    st.floats(min_value=-10, max_value=30, allow_nan=False).map(lambda x: f"{x:g}"),
    st.integers(-5, 20000).map(str), st.sampled_from(["", "nan", "inf", "-0", "1e400", "x", " 3 ", '"4"']),
)


@st.composite
def csv_texts(draw):
    if draw(st.booleans()):
        return draw(st.text(max_size=400))
    header = draw(st.permutations(list(CSV_COLUMNS)))
    if draw(st.integers(0, 4)) == 0:
        header = header[:-1] + [draw(st.sampled_from(["nh3_mg_L", "flow", "", "time_h"]))]
    lines = [",".join(header)]
    for _ in range(draw(st.integers(0, 6))):
        n = len(header) + draw(st.sampled_from([0, 0, 0, -1, 1]))
        lines.append(",".join(draw(cells) for _ in range(max(n, 0))))
    if draw(st.booleans()):
        lines.insert(draw(st.integers(0, len(lines))), "# a comment")
    return "\n".join(lines)


@FUZZ
@given(csv_texts(), st.sampled_from([1, 5, 24, 96]))
def test_random_csv_text_gives_problems_or_an_influent(text, n_periods):
    col = Collector("fuzz.toml")
    frac = read_fractionation(None)
    influent = influent_from_csv_text(col, "fuzz.csv", "fuzz.csv", text, n_periods, frac)
    if influent is None:
        assert col.problems and all(p.file == "fuzz.csv" for p in col.problems)
        assert all(p.key.startswith("row ") for p in col.problems)
    else:
        assert not col.problems
        assert len(influent.flow_m3_d) == n_periods and min(influent.flow_m3_d) > 0


@settings(max_examples=40, deadline=None)
@given(st.binary(max_size=300))
def test_random_csv_bytes_through_load_raise_only_input_error(raw):
    with tempfile.TemporaryDirectory() as tmp:
        with open(os.path.join(tmp, "demo_influent.csv"), "wb") as fh:
            fh.write(raw)
        _parse_quietly(copy.deepcopy(DEMO), base=tmp)
