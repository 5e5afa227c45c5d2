"""The project's own error types and process exit codes.

Bad input is reported once, at the boundary, as :class:`InputError` carrying every
problem found (not just the first). The CLI prints one line per problem and exits
with :data:`EXIT_INPUT`; no traceback reaches the user.
"""

from __future__ import annotations

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
        text = f"error: {self.file}: {self.key}: {self.problem}"
        details = []
        if self.got is not None:
            details.append(f"got {self.got!r}")
        if self.expected:
            details.append(f"expected {self.expected}")
        if details:
            text += " (" + ", ".join(details) + ")"
        return text


class AirtaperError(Exception):
    """Base class of every error airtaper raises on purpose."""


class InputError(AirtaperError):
    """One or more problems with user input; ``problems`` lists them all."""

    def __init__(self, problems: list[Problem] | Problem):
        if isinstance(problems, Problem):
            problems = [problems]
        self.problems: list[Problem] = list(problems)
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
