"""Typed, path-aware reading of a parsed TOML tree, collecting every problem.

The parser never stops at the first mistake: each getter checks one key,
records a :class:`~airtaper.errors.Problem` when it is wrong and returns
``None`` so reading goes on. :meth:`Table.finish` reports the keys nobody asked
for as unknown, with a "did you mean" hint.
"""

from __future__ import annotations

import difflib
import math
import os
import stat
from dataclasses import dataclass

from airtaper.errors import Problem, one_line

MISSING = object()


@dataclass(frozen=True)
class LayoutWarning:
    """A suspicious but legal value (a 5 m3 zone, a 50 m depth)."""

    file: str
    key: str
    message: str

    def __str__(self) -> str:
        return f"warning: {one_line(self.file)}: {one_line(self.key)}: {one_line(self.message)}"


class UnreadableInput(Exception):
    """An input path that is not a readable, regular, small enough file (see :func:`read_input_file`)."""

    def __init__(self, problem: str, got=None, expected: str | None = None):
        super().__init__(problem)
        self.problem, self.got, self.expected = problem, got, expected


def read_input_file(path: str, max_bytes: int, what: str) -> bytes:
    """The bytes of an input file, refusing what is not a regular file or is larger than ``max_bytes``.

    A device (``/dev/zero``), a FIFO or a folder given as an input would be read
    forever or fail obscurely; their size on disk says nothing, so the kind of
    file is checked first and the read itself is capped. ``what`` names the
    input in the message ("the layout", "the influent CSV").

    Raises
    ------
    UnreadableInput
        With the problem, what was found and what is expected.
    """
    try:
        info = os.stat(path)
    except OSError as exc:
        raise UnreadableInput(f"cannot read {what}: {exc.strerror or exc}") from None
    except ValueError:  # a NUL character in the name: no file can have it
        raise UnreadableInput(f"cannot read {what}: the file name holds a NUL character") from None
    if stat.S_ISDIR(info.st_mode):
        raise UnreadableInput(f"cannot read {what}: it is a folder", None, "a file")
    if not stat.S_ISREG(info.st_mode):
        raise UnreadableInput(f"cannot read {what}: not a regular file", _file_kind(info.st_mode), "a regular file")
    if info.st_size > max_bytes:
        raise UnreadableInput("file too large", f"{info.st_size} bytes", f"<= {max_bytes} bytes")
    try:
        with open(path, "rb") as fh:
            data = fh.read(max_bytes + 1)
    except OSError as exc:
        raise UnreadableInput(f"cannot read {what}: {exc.strerror or exc}") from None
    if len(data) > max_bytes:
        raise UnreadableInput("file too large", f"more than {max_bytes} bytes", f"<= {max_bytes} bytes")
    return data


def _file_kind(mode: int) -> str:
    for test, name in ((stat.S_ISCHR, "a character device"), (stat.S_ISBLK, "a block device"),
                       (stat.S_ISFIFO, "a pipe"), (stat.S_ISSOCK, "a socket")):
        if test(mode):
            return name
    return "a special file"


class Collector:
    """Problems and warnings found in one file."""

    def __init__(self, file: str):
        self.file = file
        self.problems: list[Problem] = []
        self.warnings: list[LayoutWarning] = []

    def error(self, key: str, problem: str, got=None, expected: str | None = None, file: str | None = None):
        self.problems.append(Problem(file or self.file, key, problem, got, expected))

    def warn(self, key: str, message: str, file: str | None = None):
        self.warnings.append(LayoutWarning(file or self.file, key, message))

    @property
    def count(self) -> int:
        return len(self.problems)


def did_you_mean(word: str, choices) -> str | None:
    """The closest of ``choices`` to ``word``, or None."""
    match = difflib.get_close_matches(str(word), [str(c) for c in choices], n=1, cutoff=0.6)
    return match[0] if match else None


def is_number(value) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def bare_key(key) -> str:
    """A key as a key path shows it: TOML's bare form, or double-quoted when it holds other characters
    (``zones.Z3."volume m3"``), so that a ':' or '.' in a key cannot be misread."""
    key = str(key)
    if key and all(c.isascii() and (c.isalnum() or c in "_-") for c in key):
        return key
    return '"' + key.replace("\\", "\\\\").replace('"', '\\"') + '"'


def join(path: str, key) -> str:
    return f"{path}.{bare_key(key)}" if path else bare_key(key)


def fixed(x: float, digits: int = 1) -> str:
    """``x`` with ``digits`` decimals, or three significant digits when it is huge (a message stays short)."""
    return f"{x:.{digits}f}" if abs(x) < 1e7 else f"{x:.3g}"


def _bounds_text(gt, ge, lt, le) -> str:
    parts = []
    if gt is not None:
        parts.append(f"> {gt:g}")
    if ge is not None:
        parts.append(f">= {ge:g}")
    if lt is not None:
        parts.append(f"< {lt:g}")
    if le is not None:
        parts.append(f"<= {le:g}")
    return " and ".join(parts)


def check_number(col: Collector, key: str, value, *, gt=None, ge=None, lt=None, le=None) -> float | None:
    """Check that ``value`` is a finite number within the bounds; record a problem if not."""
    if not is_number(value):
        col.error(key, "must be a number", value, "a number")
        return None
    try:
        x = float(value)
    except OverflowError:  # an integer beyond the float range (TOML integers have no size limit in tomllib)
        bounds = _bounds_text(gt, ge, lt, le)
        col.error(key, "number too large", value, bounds or "a number below 1e308 in size")
        return None
    if not math.isfinite(x):
        col.error(key, "must be finite", value, "a finite number")
        return None
    if ((gt is not None and not x > gt) or (ge is not None and not x >= ge)
            or (lt is not None and not x < lt) or (le is not None and not x <= le)):
        if gt == 0 and not x > 0 and ge is None:
            col.error(key, "must be positive", value, "> 0")
        else:
            col.error(key, "out of range", value, _bounds_text(gt, ge, lt, le))
        return None
    return x


class Table:
    """One TOML table being read, with its dotted key path."""

    def __init__(self, col: Collector, data: dict, path: str):
        self.col = col
        self.data = data
        self.path = path
        self.known: set[str] = set()

    def key(self, name: str) -> str:
        return join(self.path, name)

    def has(self, name: str) -> bool:
        self.known.add(name)
        return name in self.data

    def allow(self, *names: str) -> None:
        """Declare keys valid here without reading them (for the unknown-key check)."""
        self.known.update(names)

    def raw(self, name: str, default=None):
        self.known.add(name)
        return self.data.get(name, default)

    def _missing(self, name: str, expected: str):
        self.col.error(self.key(name), "missing required key", None, expected)

    def number(self, name: str, default=MISSING, *, gt=None, ge=None, lt=None, le=None):
        """A float; ``default=None`` makes the key optional."""
        if not self.has(name):
            if default is MISSING:
                self._missing(name, "a number")
            return None if default is MISSING else default
        return check_number(self.col, self.key(name), self.data[name], gt=gt, ge=ge, lt=lt, le=le)

    def integer(self, name: str, default=MISSING, *, ge=None, le=None):
        if not self.has(name):
            if default is MISSING:
                self._missing(name, "an integer")
            return None if default is MISSING else default
        value = self.data[name]
        if not isinstance(value, int) or isinstance(value, bool):
            self.col.error(self.key(name), "must be an integer", value, "an integer")
            return None
        if (ge is not None and value < ge) or (le is not None and value > le):
            self.col.error(self.key(name), "out of range", value, _bounds_text(None, ge, None, le))
            return None
        return value

    def string(self, name: str, default=MISSING, *, choices=None, synonyms=None):
        if not self.has(name):
            if default is MISSING:
                self._missing(name, "a string" if choices is None else "one of " + ", ".join(choices))
            return None if default is MISSING else default
        value = self.data[name]
        if not isinstance(value, str):
            self.col.error(self.key(name), "must be a string", value, "a string")
            return None
        if choices is not None and value not in choices:
            hint = (synonyms or {}).get(value.strip().lower()) or did_you_mean(value, choices)
            problem = f"unknown value, did you mean {hint!r}?" if hint else "unknown value"
            self.col.error(self.key(name), problem, value, "one of " + ", ".join(choices))
            return None
        return value

    def boolean(self, name: str, default=MISSING):
        if not self.has(name):
            if default is MISSING:
                self._missing(name, "true or false")
            return None if default is MISSING else default
        value = self.data[name]
        if not isinstance(value, bool):
            self.col.error(self.key(name), "must be true or false", value, "true or false")
            return None
        return value

    def per_period(self, name: str, n: int, default=MISSING, *, gt=None, ge=None, lt=None, le=None):
        """A number (same every period) or a list of ``n`` numbers, as a tuple of floats."""
        if not self.has(name):
            if default is MISSING:
                self._missing(name, f"a number or a list of {n} numbers (one per period)")
                return None
            if default is None:
                return None
            return tuple(float(default) for _ in range(n))
        return read_per_period(self.col, self.key(name), self.data[name], n, gt=gt, ge=ge, lt=lt, le=le)

    def table(self, name: str, required: bool = False):
        """A sub-table as :class:`Table`, or None when absent (or not a table)."""
        if not self.has(name):
            if required:
                self._missing(name, "a table")
            return None
        value = self.data[name]
        if not isinstance(value, dict):
            self.col.error(self.key(name), "must be a table", _short(value), "a table")
            return None
        return Table(self.col, value, self.key(name))

    def array(self, name: str, required: bool = False) -> list[dict] | None:
        """An array of tables as a list of dicts (paths are made by the caller), or None."""
        if not self.has(name):
            if required:
                self._missing(name, "an array of tables")
            return None
        value = self.data[name]
        if not isinstance(value, list):
            self.col.error(self.key(name), "must be an array of tables", _short(value), "an array of tables")
            return None
        good = True
        for i, item in enumerate(value, start=1):
            if not isinstance(item, dict):
                self.col.error(f"{self.key(name)}[{i}]", "must be a table", _short(item), "a table")
                good = False
        return value if good else None

    def finish(self) -> None:
        """Report every key of this table nobody read."""
        for k in self.data:
            if k in self.known:
                continue
            hint = did_you_mean(k, sorted(self.known))
            if hint:
                self.col.error(self.key(k), f"unknown key, did you mean {hint!r}?")
            else:
                expected = ("one of " + ", ".join(sorted(self.known))) if self.known else "no keys here"
                self.col.error(self.key(k), "unknown key", None, expected)


def read_per_period(col: Collector, key: str, value, n: int, *, gt=None, ge=None, lt=None, le=None):
    """Resolve a number or an n-list of numbers to a tuple of n floats (None on error)."""
    if isinstance(value, list):
        if len(value) != n:
            col.error(key, "wrong number of values", f"{len(value)} values", f"{n} (one per period)")
            return None
        out = []
        for i, v in enumerate(value, start=1):
            out.append(check_number(col, f"{key}[{i}]", v, gt=gt, ge=ge, lt=lt, le=le))
        return None if any(v is None for v in out) else tuple(out)
    if not is_number(value):
        col.error(key, "must be a number or a list of numbers", _short(value),
                  f"a number or a list of {n} numbers (one per period)")
        return None
    x = check_number(col, key, value, gt=gt, ge=ge, lt=lt, le=le)
    return None if x is None else tuple(x for _ in range(n))


def _short(value):
    """A compact stand-in for a big value in a message."""
    if isinstance(value, dict):
        return "a table"
    if isinstance(value, list):
        return f"a list of {len(value)}"
    if isinstance(value, str) and len(value) > 60:
        return value[:57] + "..."
    return value


def valid_id(col: Collector, key: str, value, reserved=()) -> str | None:
    """An identifier: letters, digits, '_' and '-', starting with a letter."""
    if not isinstance(value, str):
        col.error(key, "must be a string", _short(value), "an identifier such as \"Z1\"")
        return None
    ok = bool(value) and value[0].isascii() and value[0].isalpha() and all(
        c.isascii() and (c.isalnum() or c in "_-") for c in value)
    if not ok:
        col.error(key, "not a valid identifier", value, "letters, digits, '_' or '-', starting with a letter")
        return None
    if value in reserved:
        col.error(key, "reserved name", value, "not one of " + ", ".join(reserved))
        return None
    return value
