"""One optimisation of the demo plant, shared by every report test (session scope: one solve)."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from airtaper.cli.main import main
from airtaper.errors import EXIT_OK

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "layouts" / "demo.toml"


@pytest.fixture(scope="session")
def demo_dir(tmp_path_factory) -> Path:
    """A finished output folder of `airtaper optimize layouts/demo.toml` (do not modify: copy it)."""
    out = tmp_path_factory.mktemp("demo") / "out"
    assert main(["optimize", str(DEMO), "--out", str(out), "--quiet"]) == EXIT_OK
    return out


@pytest.fixture
def demo_copy(demo_dir, tmp_path) -> Path:
    """A private copy of the demo's output folder, free to edit."""
    dest = tmp_path / "copy"
    shutil.copytree(demo_dir, dest)
    return dest
