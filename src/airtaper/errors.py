"""The project's own error types and process exit codes.

Bad input is reported once, at the boundary, as :class:`InputError` carrying every
problem found (not just the first). The CLI prints one line per problem and exits
with :data:`EXIT_INPUT`; no traceback reaches the user.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

EXIT_OK = 0
EXIT_FAILURE = 1  # unexpected internal failure
EXIT_INPUT = 2  # invalid layout, CSV or command-line input
EXIT_INFEASIBLE = 3  # the limits cannot all be met (elastic solve explains which)
EXIT_UNVERIFIED = 4  # the optimised schedule broke a limit when re-simulated


@dataclass(frozen=True)
class Problem:
    """One thing wrong with an input file.

    ``key`` is a dotted key path (``zones.Z1.volume_m3``) or, for CSV files,
    ``row N, column NAME``.
    """

    file: str
    key: str
    problem: str
    got: object = None
    expected: str | None = None

    def __str__(self) -> str:
        text = f"error: {one_line(self.file)}: {one_line(self.key)}: {one_line(self.problem)}"
        details = []
        if self.got is not None:
            details.append(f"got {shown(self.got)}")
        if self.expected:
            details.append(f"expected {one_line(self.expected)}")
        if details:
            text += " (" + ", ".join(details) + ")"
        return text


#: Longest value text a message shows; longer values are cut with "...".
SHOWN_MAX_CHARS = 60


def one_line(text) -> str:
    """``text`` with every control or other non-printable character escaped, so a message stays one line.

    A newline in a quoted TOML key or a CSV header becomes ``\\n``; an escape
    character ``\\x1b``: what the user typed stays visible and cannot split or
    recolour the terminal line.
    """
    text = str(text)
    if text.isprintable():
        return text
    out = []
    for ch in text:
        if ch.isprintable():
            out.append(ch)
        else:
            out.append(repr(ch)[1:-1])
    return "".join(out)


def shown(value) -> str:
    """A value as a message shows it: repr for short values, huge numbers rounded, big or nested values summarised."""
    if isinstance(value, bool) or value is None:
        return repr(value)
    if isinstance(value, int):
        if abs(value) < 10**12:
            return repr(value)
        digits = str(abs(value)) if value.bit_length() < 4000 else None
        if digits is None:
            return ("-" if value < 0 else "") + "a number of more than 1200 digits"
        mantissa = f"{digits[0]}.{digits[1:6]}".rstrip("0").rstrip(".")
        return f"{'-' if value < 0 else ''}{mantissa}e+{len(digits) - 1}"
    if isinstance(value, float):
        text = repr(value)
        return text if len(text) <= 12 or not math.isfinite(value) else f"{value:.6g}"
    if isinstance(value, dict):
        return "a table"
    if isinstance(value, (list, tuple)):
        if all(isinstance(v, (int, float, str, bool)) for v in value):
            text = "[" + ", ".join(shown(v) for v in value[:8]) + (", ..." if len(value) > 8 else "") + "]"
            if len(text) <= SHOWN_MAX_CHARS:
                return text
        return f"a list of {len(value)}"
    if isinstance(value, str):
        if len(value) > SHOWN_MAX_CHARS:
            value = value[:SHOWN_MAX_CHARS - 3] + "..."
        return one_line(repr(value))
    text = one_line(repr(value))
    return text if len(text) <= SHOWN_MAX_CHARS else text[:SHOWN_MAX_CHARS - 3] + "..."


class AirtaperError(Exception):
    """Base class of every error airtaper raises on purpose."""


class InputError(AirtaperError):
    """One or more problems with user input; ``problems`` lists them all."""

    def __init__(self, problems: list[Problem] | Problem, warnings: list | tuple = ()):
        if isinstance(problems, Problem):
            problems = [problems]
        self.problems: list[Problem] = list(problems)
        #: Warnings found in the same input (a likely unit slip): the CLI prints them before the errors,
        #: since they often name the cause of an error.
        self.warnings: list = list(warnings)
        super().__init__("\n".join(str(p) for p in self.problems))


class ModelError(AirtaperError):
    """A model could not be built or converted (names the component)."""


class SolverError(AirtaperError):
    """A solver could not be run at all (missing binary, bad option)."""


class NoSteadyStateError(AirtaperError):
    """The plant as laid out has no steady state to start a study from, said in plain words.

    ``cause``: ``"washout"`` (the sludge age is below the nitrifiers' minimum: a property
    of the layout, exit :data:`EXIT_INPUT`) or ``"no steady state"`` (the plant's own
    equations still change after a long simulated time, for example a clarifier that
    loses its sludge: the plant cannot run as laid out, exit :data:`EXIT_INFEASIBLE`).
    """

    def __init__(self, message: str, cause: str = "no steady state"):
        super().__init__(message)
        self.cause = cause
        self.exit_code = EXIT_INPUT if cause == "washout" else EXIT_INFEASIBLE
