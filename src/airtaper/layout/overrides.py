"""Override files: values put into a layout's data before it is validated, the layout file untouched.

An override file is TOML whose leaves are key paths into the layout, for example::

    [zones.Z2]
    alpha = 0.41            # zones.Z2.alpha

    [kinetics.overrides]
    mu_A = 0.74             # kinetics.overrides.mu_A

Arrays of tables in the layout (``zones``, ``diffuser_types``, ``blowers``, ...) are
addressed by their ``id``; missing tables on the way are created (``kinetics.overrides``
when the layout has none). :func:`apply_overrides` writes the values into a copy of
the layout's raw data; :func:`load_layout_with_overrides` then validates it through the
normal parser, so every check applies, and a problem found at an overridden key (or
inside it) names the override file and the key instead of the layout file.

``airtaper calibrate`` writes such a file (:func:`overrides_to_toml`); ``optimize``
(and later commands) read one with ``--overrides FILE``.
"""

from __future__ import annotations

import copy
import math
import os
import re

from airtaper.errors import InputError, Problem
from airtaper.layout.parse import MAX_LAYOUT_BYTES, load_layout, parse_layout, parse_toml_text
from airtaper.layout.textfile import read_text_file
from airtaper.layout.types import Layout

MAX_OVERRIDE_BYTES = 1_000_000
_BARE_KEY = re.compile(r"^[A-Za-z0-9_-]+$")


def flatten(data: dict, prefix: str = "") -> dict:
    """Nested tables to ``{"a.b.c": leaf}`` (lists are leaves)."""
    out = {}
    for k, v in data.items():
        path = f"{prefix}.{k}" if prefix else str(k)
        if isinstance(v, dict):
            out.update(flatten(v, path))
        else:
            out[path] = v
    return out


def read_overrides(path) -> dict:
    """An override file as ``{key path: value}``; a TOML or key problem is an InputError naming the file."""
    label, text = read_text_file(path, MAX_OVERRIDE_BYTES, "override file", "TOML")
    values = flatten(parse_toml_text(text, label))
    if not values:
        raise InputError(Problem(label, "(file)", "no overrides in the file", None, "key = value lines"))
    return values


def _find_id(items: list, ident: str):
    for item in items:
        if isinstance(item, dict) and item.get("id") == ident:
            return item
    return None


def apply_overrides(data: dict, overrides: dict, file: str) -> tuple[dict, set[str]]:
    """A deep copy of the layout's raw ``data`` with ``overrides`` ({key path: value}) written in.

    Returns the new data and the key paths of tables the overrides created. A path
    through an array of tables picks the table by its ``id``; a path that cannot be
    followed is an :class:`InputError` naming ``file`` and the key.
    """
    out = copy.deepcopy(data)
    created: set[str] = set()
    problems = []
    for path, value in overrides.items():
        parts = path.split(".")
        node = out
        walked = []
        ok = True
        for part in parts[:-1]:
            walked.append(part)
            here = ".".join(walked)
            nxt = node.get(part) if isinstance(node, dict) else None
            if isinstance(node, list):
                item = _find_id(node, part)
                if item is None:
                    ids = [str(x.get("id")) for x in node if isinstance(x, dict) and "id" in x]
                    problems.append(Problem(file, path, f"no table with id {part!r} in {'.'.join(walked[:-1])}",
                                            part, "one of " + ", ".join(ids) if ids else "an existing id"))
                    ok = False
                    break
                node = item
                continue
            if nxt is None:
                node[part] = nxt = {}
                created.add(here)
            if not isinstance(nxt, (dict, list)):
                problems.append(Problem(file, path, f"{here} is a value in the layout, not a table", nxt,
                                        "a key path that ends at a value"))
                ok = False
                break
            node = nxt
        if not ok:
            continue
        if isinstance(node, list):
            problems.append(Problem(file, path, f"{'.'.join(parts[:-1])} is an array of tables: name the table "
                                                "by its id", parts[-1], f"{'.'.join(parts[:-1])}.<id>.{parts[-1]}"))
            continue
        if isinstance(node.get(parts[-1]), (dict, list)) and not isinstance(value, type(node.get(parts[-1]))):
            problems.append(Problem(file, path, "overrides a whole table with a value", value,
                                    "a key path to a value inside it"))
            continue
        node[parts[-1]] = copy.deepcopy(value)
    if problems:
        raise InputError(problems)
    return out, created


def _blame(problem: Problem, overrides: dict, created: set[str], file: str) -> Problem:
    """The problem against the override file when it is at, inside or created by an override."""
    key = problem.key
    for path in overrides:
        if key == path or key.startswith(path + ".") or key.startswith(path + "["):
            return Problem(file, key, problem.problem, problem.got, problem.expected)
    if key in created:
        return Problem(file, key, problem.problem, problem.got, problem.expected)
    return problem


def blame_overrides(problems, overrides_path) -> list[Problem]:
    """Problems found after validation (the plant's resolution), the ones at overridden keys naming the override file."""
    file = os.fspath(overrides_path)
    overrides = read_overrides(file)
    return [_blame(p, overrides, set(), file) for p in problems]


def load_layout_with_overrides(path, overrides_path=None, warnings: list | None = None) -> Layout:
    """:func:`~airtaper.layout.load_layout` with an override file applied before validation.

    ``overrides_path`` None: the layout as it is. Problems at overridden keys name the
    override file; all others name the layout file, as usual.
    """
    if overrides_path is None:
        return load_layout(path, warnings=warnings)
    file = os.fspath(overrides_path)
    return load_layout_with_values(path, read_overrides(file), file, warnings=warnings)


def load_layout_with_values(path, overrides: dict, file: str, warnings: list | None = None) -> Layout:
    """The layout at ``path`` with ``overrides`` ({key path: value}) applied before validation.

    ``file`` labels the problems found at overridden keys (the override file, or a
    sweep's grid file and scenario); all others name the layout file.
    """
    label, text = read_text_file(path, MAX_LAYOUT_BYTES, "layout", "TOML")
    data = parse_toml_text(text, label)
    base_dir = os.path.dirname(os.path.abspath(label))
    if not isinstance(data, dict):
        return parse_layout(data, label, base_dir, warnings=warnings)
    new, created = apply_overrides(data, overrides, file)
    try:
        return parse_layout(new, label, base_dir, warnings=warnings)
    except InputError as exc:
        raise InputError([_blame(p, overrides, created, file) for p in exc.problems]) from None


# --------------------------------------------------------------------------- writing
def _toml_key(k: str) -> str:
    return k if _BARE_KEY.match(k) else '"' + k.replace("\\", "\\\\").replace('"', '\\"') + '"'


def _escape(c: str) -> str:
    if c in ('"', "\\"):
        return "\\" + c
    if ord(c) < 0x20 or ord(c) == 0x7F:
        return f"\\u{ord(c):04x}"
    return c


def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if not math.isfinite(v):
            raise ValueError(f"an override must be finite, got {v!r}")
        text = repr(v)
        return text if any(c in text for c in ".en") else text + ".0"
    if isinstance(v, str):
        return '"' + "".join(_escape(c) for c in v) + '"'
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, dict):  # an inline table (a table inside an array: a year's month as one load day)
        return "{ " + ", ".join(f"{_toml_key(str(k))} = {_toml_value(x)}" for k, x in v.items()) + " }"
    raise ValueError(f"cannot write {type(v).__name__} to an override file")


def overrides_to_toml(values: dict, header: str = "", comments: dict | None = None) -> str:
    """``{key path: value}`` as an override file, one table per parent path, keys in the given order.

    ``header``: comment lines at the top (each prefixed with ``# ``); ``comments``:
    key path -> a comment written after the value.
    """
    comments = comments or {}
    lines = [("# " + line).rstrip() for line in header.splitlines()] if header else []
    groups: dict[str, list] = {}
    for path, v in values.items():
        parent, _, leaf = path.rpartition(".")
        groups.setdefault(parent, []).append((path, leaf, v))
    for parent, items in sorted(groups.items(), key=lambda kv: kv[0] != ""):
        if lines:
            lines.append("")
        if parent:
            lines.append("[" + ".".join(_toml_key(p) for p in parent.split(".")) + "]")
        for path, leaf, v in items:
            note = comments.get(path)
            lines.append(f"{_toml_key(leaf)} = {_toml_value(v)}" + (f"  # {note}" if note else ""))
    return "\n".join(lines) + "\n"


__all__ = ["apply_overrides", "blame_overrides", "flatten", "load_layout_with_overrides", "load_layout_with_values",
           "overrides_to_toml", "read_overrides"]
