"""Atomic output writing: a reader never sees a half-written file.

Each writer writes to a temporary file in the destination folder, flushes and
fsyncs it, then renames it over the destination (``os.replace`` is atomic on
POSIX and Windows within one file system). Writers refuse to overwrite a file
that the caller names as an input (:func:`guard_inputs`). A run's whole output
folder is written as one set by :mod:`airtaper.report.outputs`.
"""

from __future__ import annotations

import json
import os
import tempfile
from pathlib import Path
from typing import Iterable

from airtaper.errors import InputError, Problem


def write_bytes_atomic(path: str | os.PathLike, data: bytes) -> Path:
    """Write ``data`` to ``path`` atomically; create parent folders as needed."""
    dest = Path(path)
    dest.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{dest.name}.", suffix=".tmp", dir=dest.parent)
    try:
        os.fchmod(fd, 0o666 & ~current_umask())  # mkstemp makes 0600; outputs get the usual permissions
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, dest)
    except BaseException:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        raise
    return dest


def current_umask() -> int:
    """The process's file-creation mask (read without changing it for longer than a moment)."""
    mask = os.umask(0)
    os.umask(mask)
    return mask


def write_text_atomic(path: str | os.PathLike, text: str) -> Path:
    """Write UTF-8 text atomically."""
    return write_bytes_atomic(path, text.encode("utf-8"))


def write_json_atomic(path: str | os.PathLike, obj, *, indent: int = 2) -> Path:
    """Write ``obj`` as JSON atomically (NaN/inf are refused: JSON has none)."""
    return write_text_atomic(path, json.dumps(obj, indent=indent, allow_nan=False) + "\n")


def write_csv_atomic(path: str | os.PathLike, frame, *, float_format: str = "%.6g") -> Path:
    """Write a pandas DataFrame as CSV (no index) atomically."""
    return write_text_atomic(path, frame.to_csv(index=False, float_format=float_format, lineterminator="\n"))


def guard_inputs(out_dir: str | os.PathLike, inputs: Iterable[str | os.PathLike], names: Iterable[str]) -> None:
    """Refuse to write outputs named ``names`` in ``out_dir`` over any of ``inputs``.

    Raises :class:`InputError` (exit code 2) naming the clash.
    """
    out = Path(out_dir).resolve()
    protected = {Path(p).resolve() for p in inputs}
    clashes = [out / n for n in names if (out / n).resolve() in protected]
    if clashes:
        raise InputError([Problem(str(c), "--out", "output would overwrite an input file",
                                  expected="an output folder that holds no input") for c in clashes])
