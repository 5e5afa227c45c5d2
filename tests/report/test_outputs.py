"""Output folders as one set: checked before any work, the old set or the new set, never a mix."""

from __future__ import annotations

import hashlib
import json
import os

import pytest

from airtaper import __version__
from airtaper.errors import InputError
from airtaper.report import outputs
from airtaper.report.atomic import write_text_atomic
from airtaper.report.outputs import MARKER, output_folder, prepare_output_folder


def _write_set(folder, tag: str, names=("a.csv", "b.csv", "summary.json")) -> None:
    for name in names:
        write_text_atomic(folder.file(name), f"{tag} {name}\n")


def _contents(path) -> dict[str, str]:
    return {p.name: p.read_text() for p in sorted(path.iterdir()) if p.name != MARKER}


def _siblings(path) -> list[str]:
    return sorted(p.name for p in path.parent.iterdir() if p.name != path.name)


def test_a_new_folder_appears_complete_with_its_provenance(tmp_path):
    layout = tmp_path / "plant.toml"
    layout.write_text("x = 1\n")
    out = tmp_path / "run" / "one"
    with output_folder(out, inputs=[layout]) as folder:
        assert not out.exists()  # nothing at the destination while the set is written
        _write_set(folder, "new")
    assert _contents(out) == {"a.csv": "new a.csv\n", "b.csv": "new b.csv\n", "summary.json": "new summary.json\n"}
    marker = json.loads((out / MARKER).read_text())
    assert marker == {"airtaper_version": __version__,
                      "inputs": [{"path": str(layout), "sha256": hashlib.sha256(b"x = 1\n").hexdigest()}]}
    assert _siblings(out) == []  # no staging folder left beside it
    assert oct(out.stat().st_mode & 0o777) == oct(0o777 & ~outputs.current_umask())


def test_an_earlier_run_is_kept_without_overwrite(tmp_path):
    out = tmp_path / "out"
    with output_folder(out) as folder:
        _write_set(folder, "old")
    with pytest.raises(InputError) as info:
        prepare_output_folder(out)
    assert [str(p) for p in info.value.problems] == [
        f"error: {out}: --out: the folder holds an earlier run or other files (kept) "
        "(expected a new folder, or --overwrite to replace an earlier run)"]
    assert _contents(out)["a.csv"] == "old a.csv\n"
    assert _siblings(out) == []


def test_overwrite_replaces_the_earlier_run_as_a_whole(tmp_path):
    out = tmp_path / "out"
    with output_folder(out) as folder:
        _write_set(folder, "old", names=("a.csv", "b.csv", "old_only.png", "summary.json"))
    with output_folder(out, overwrite=True) as folder:
        _write_set(folder, "new")
    assert _contents(out) == {"a.csv": "new a.csv\n", "b.csv": "new b.csv\n", "summary.json": "new summary.json\n"}
    assert _siblings(out) == []


@pytest.mark.parametrize("when", ["first file", "midway", "last file"])
@pytest.mark.parametrize("exc", [KeyboardInterrupt, RuntimeError])
def test_an_interrupted_write_leaves_the_old_set(tmp_path, when, exc):
    out = tmp_path / "out"
    with output_folder(out) as folder:
        _write_set(folder, "old")
    old = _contents(out)
    stop_at = {"first file": 0, "midway": 1, "last file": 2}[when]
    with pytest.raises(exc):
        with output_folder(out, overwrite=True) as folder:
            for i, name in enumerate(("a.csv", "b.csv", "summary.json")):
                if i == stop_at:
                    raise exc()
                write_text_atomic(folder.file(name), f"new {name}\n")
    assert _contents(out) == old
    assert _siblings(out) == []


def test_an_interrupt_while_moving_into_place_puts_the_old_set_back(tmp_path, monkeypatch):
    out = tmp_path / "out"
    with output_folder(out) as folder:
        _write_set(folder, "old")
    old = _contents(out)
    real_rename = os.rename
    calls = []

    def rename(src, dst):
        calls.append((src, dst))
        if len(calls) == 2:  # the earlier run is aside, the new set not yet in place
            raise KeyboardInterrupt()
        return real_rename(src, dst)

    monkeypatch.setattr(outputs.os, "rename", rename)
    with pytest.raises(KeyboardInterrupt):
        with output_folder(out, overwrite=True) as folder:
            _write_set(folder, "new")
    monkeypatch.setattr(outputs.os, "rename", real_rename)
    assert _contents(out) == old
    assert _siblings(out) == []


def test_an_existing_file_is_refused_at_once(tmp_path):
    target = tmp_path / "results.csv"
    target.write_text("mine\n")
    with pytest.raises(InputError) as info:
        prepare_output_folder(target)
    assert [str(p) for p in info.value.problems] == [
        f"error: {target}: --out: names an existing file, not a folder (expected a folder path (new, or an earlier "
        "run))"]
    assert target.read_text() == "mine\n"


def test_a_folder_under_a_file_cannot_be_made(tmp_path):
    blocker = tmp_path / "file"
    blocker.write_text("")
    with pytest.raises(InputError) as info:
        prepare_output_folder(blocker / "out")
    assert [str(p) for p in info.value.problems] == [
        f"error: {blocker / 'out'}: --out: cannot write in {blocker}: File exists (expected a folder you can write to)"]


@pytest.mark.skipif(os.geteuid() == 0, reason="root writes into read-only folders")
def test_a_read_only_folder_is_refused_at_once(tmp_path):
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(0o555)
    try:
        with pytest.raises(InputError, match="not writable"):
            prepare_output_folder(ro)
        with pytest.raises(InputError, match="cannot write in"):
            prepare_output_folder(ro / "sub")
    finally:
        ro.chmod(0o755)


def test_a_folder_holding_an_input_is_refused(tmp_path):
    layout = tmp_path / "plant.toml"
    layout.write_text("x = 1\n")
    with pytest.raises(InputError, match="would overwrite an input"):
        prepare_output_folder(tmp_path, inputs=[layout], overwrite=True)
    assert layout.read_text() == "x = 1\n"


def test_overwrite_never_replaces_someone_elses_files(tmp_path):
    out = tmp_path / "documents"
    out.mkdir()
    (out / "thesis.txt").write_text("years of work\n")
    with pytest.raises(InputError, match="no airtaper run wrote"):
        prepare_output_folder(out, overwrite=True)
    assert (out / "thesis.txt").read_text() == "years of work\n"
    assert _siblings(out) == []


def test_an_empty_folder_is_used(tmp_path):
    out = tmp_path / "empty"
    out.mkdir()
    with output_folder(out) as folder:
        _write_set(folder, "new")
    assert _contents(out)["b.csv"] == "new b.csv\n"


def test_output_names_stay_inside_the_folder(tmp_path):
    folder = prepare_output_folder(tmp_path / "out")
    try:
        for bad in ("../x.csv", "", "..", MARKER):
            with pytest.raises(ValueError):
                folder.file(bad)
    finally:
        folder.discard()
    assert _siblings(tmp_path / "out") == []
