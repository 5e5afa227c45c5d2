"""Override files: values land at their key paths before validation, problems name the override file,
the layout file is never touched, and the writer's TOML reads back to the same values."""

from __future__ import annotations

import shutil

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from airtaper.errors import InputError
from airtaper.layout import layout_to_data, load_layout, parse_layout
from airtaper.layout.overrides import (
    apply_overrides, flatten, load_layout_with_overrides, overrides_to_toml, read_overrides,
)
from airtaper.layout.parse import parse_toml_text

from .conftest import LAYOUTS

FUZZ = int(__import__("os").environ.get("AIRTAPER_FUZZ_EXAMPLES", "60"))


@pytest.fixture()
def demo_dir(tmp_path):
    shutil.copy(LAYOUTS / "demo.toml", tmp_path / "demo.toml")
    shutil.copy(LAYOUTS / "demo_influent.csv", tmp_path / "demo_influent.csv")
    return tmp_path


def _write(path, text):
    path.write_text(text)
    return path


def test_values_land_at_their_keys_and_the_layout_file_is_untouched(demo_dir):
    layout_file = demo_dir / "demo.toml"
    before = layout_file.read_bytes()
    ov = _write(demo_dir / "ov.toml", "[zones.Z2]\nalpha = 0.41\n\n[kinetics.overrides]\nmu_A = 0.7\n"
                                      "\n[diffuser_types.disc_040]\nairflow_max_Sm3_h = 7.5\n")
    lay = load_layout_with_overrides(layout_file, ov)
    plain = load_layout(layout_file)
    assert lay.zone("Z2").alpha == 0.41 and dict(lay.kinetics.overrides)["mu_A"] == 0.7
    assert lay.diffuser_type("disc_040").airflow_max_Sm3_h == 7.5
    assert layout_file.read_bytes() == before
    # the same as editing the layout's data by hand and parsing it
    data = layout_to_data(plain)
    next(z for z in data["zones"] if z["id"] == "Z2")["alpha"] = 0.41
    data["kinetics"]["overrides"]["mu_A"] = 0.7
    data["diffuser_types"][0]["airflow_max_Sm3_h"] = 7.5
    assert parse_layout(data, str(layout_file), demo_dir) == lay


def test_no_override_file_is_the_plain_layout(demo_dir):
    assert load_layout_with_overrides(demo_dir / "demo.toml") == load_layout(demo_dir / "demo.toml")


def test_problems_name_the_override_file_and_key(demo_dir):
    ov = _write(demo_dir / "ov.toml", "[zones.Z2]\nalpha = 7.0\nalpah = 0.3\n\n[kinetcs]\nx = 1\n")
    with pytest.raises(InputError) as exc:
        load_layout_with_overrides(demo_dir / "demo.toml", ov)
    lines = [str(p) for p in exc.value.problems]
    assert lines == [
        f"error: {ov}: zones.Z2.alpha: out of range (got 7.0, expected > 0 and <= 1.2)",
        f"error: {ov}: zones.Z2.alpah: unknown key, did you mean 'alpha'?",
        f"error: {ov}: kinetcs: unknown key, did you mean 'kinetics'?",
    ]


@pytest.mark.parametrize("text, expected", [
    ("[zones.Z9]\nalpha = 0.3\n", "zones.Z9.alpha: no table with id 'Z9' in zones (got 'Z9', expected one of Z1, Z2, "
                                  "Z3, Z4, Z5, Z6)"),
    ("[zones]\nalpha = 0.3\n", "zones.alpha: zones is an array of tables: name the table by its id (got 'alpha', "
                               "expected zones.<id>.alpha)"),
    ("[plant.name]\nx = 1\n", "plant.name.x: plant.name is a value in the layout, not a table"),
    ("[zones.Z2]\ngrid = 3\n", "zones.Z2.grid: overrides a whole table with a value (got 3, expected a key path to a "
                               "value inside it)"),
    ("", "(file): no overrides in the file (expected key = value lines)"),
    ("[zones.Z2\nalpha = 1\n", "line 1, column 10: TOML syntax"),
])
def test_paths_that_cannot_be_followed(demo_dir, text, expected):
    ov = _write(demo_dir / "ov.toml", text)
    with pytest.raises(InputError) as exc:
        load_layout_with_overrides(demo_dir / "demo.toml", ov)
    lines = [str(p) for p in exc.value.problems]
    assert any(line.startswith(f"error: {ov}: {expected}") for line in lines), lines


def test_apply_does_not_change_its_input():
    data = {"zones": [{"id": "A", "alpha": 0.5}], "plant": {"name": "x"}}
    new, created = apply_overrides(data, {"zones.A.alpha": 0.4, "kinetics.overrides.mu_A": 0.7}, "ov.toml")
    assert data == {"zones": [{"id": "A", "alpha": 0.5}], "plant": {"name": "x"}}
    assert new["zones"][0]["alpha"] == 0.4 and new["kinetics"] == {"overrides": {"mu_A": 0.7}}
    assert created == {"kinetics", "kinetics.overrides"}


_keys = st.text("abcdefgXYZ_-0123456789", min_size=1, max_size=8)
_values = st.one_of(st.floats(allow_nan=False, allow_infinity=False), st.integers(-10**6, 10**6), st.booleans(),
                    st.text(max_size=12), st.lists(st.floats(allow_nan=False, allow_infinity=False), max_size=3),
                    # arrays of inline tables (a year writes a month as one [[load_days]] table)
                    st.lists(st.dictionaries(_keys, st.one_of(st.floats(allow_nan=False, allow_infinity=False),
                                                              st.text(max_size=5)), max_size=3), max_size=2))


@settings(max_examples=FUZZ, deadline=None)
@given(st.dictionaries(st.lists(_keys, min_size=1, max_size=3).map(".".join), _values, min_size=1, max_size=6))
def test_written_overrides_read_back_to_the_same_values(values):
    # a key path may not be both a value and a table: keep only paths none of which prefixes another
    paths = sorted(values)
    values = {p: values[p] for p in paths if not any(q.startswith(p + ".") for q in paths)}
    text = overrides_to_toml(values, "header line\nsecond", {p: "note" for p in values})
    assert flatten(parse_toml_text(text, "ov.toml")) == values


def test_read_overrides_flattens_inline_tables(tmp_path):
    ov = _write(tmp_path / "ov.toml", 'zones.Z2 = { alpha = 0.4, grid = { count = 700 } }\n')
    assert read_overrides(ov) == {"zones.Z2.alpha": 0.4, "zones.Z2.grid.count": 700}
