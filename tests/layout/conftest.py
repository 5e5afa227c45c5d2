"""Shared helpers for the layout tests: the demo layout as a dict, and a parser that returns message lines."""

from __future__ import annotations

import copy
import tomllib
from pathlib import Path

import pytest

from airtaper.errors import InputError
from airtaper.layout import parse_layout

LAYOUTS = Path(__file__).resolve().parents[2] / "layouts"
DEMO = LAYOUTS / "demo.toml"
THREE_TANK = LAYOUTS / "three_tank.toml"

with open(DEMO, "rb") as _fh:
    _DEMO_DATA = tomllib.load(_fh)
with open(THREE_TANK, "rb") as _fh:
    _THREE_DATA = tomllib.load(_fh)


@pytest.fixture
def demo_data() -> dict:
    """A fresh deep copy of layouts/demo.toml as tomllib reads it."""
    return copy.deepcopy(_DEMO_DATA)


@pytest.fixture
def three_data() -> dict:
    return copy.deepcopy(_THREE_DATA)


@pytest.fixture
def errors_of():
    """``errors_of(data, label="bad.toml")``: the error lines parse_layout reports (fails if it parses)."""
    return error_lines


@pytest.fixture
def layouts_dir() -> Path:
    return LAYOUTS


def error_lines(data: dict, label: str = "bad.toml", base_dir=LAYOUTS) -> list[str]:
    """The `error: ...` lines parse_layout reports for ``data`` (fails if it parses)."""
    with pytest.raises(InputError) as info:
        parse_layout(data, label, base_dir)
    return [str(p) for p in info.value.problems]


