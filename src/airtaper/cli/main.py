"""The `airtaper` command: argument parsing, subcommand registration, error handling.

Each subcommand lives in its own module of this package and exposes
``register(subparsers)``, which adds its parser and sets ``handler`` (a function
taking the parsed arguments and returning an exit code). Adding a subcommand is
one entry in :data:`COMMANDS`. A run imports only the module of the command it
names (:func:`build_parser`); ``airtaper --help`` and a word that is no command
import them all, for the list of commands.

Every handler runs through :func:`run_handler`: an
:class:`~airtaper.errors.InputError` becomes one ``error: <file>: <key>: ...``
line per problem on stderr (after the warnings found in the same input, which
often name the cause) and exit code 2; no traceback reaches the user (set
``AIRTAPER_DEBUG=1`` to see one for an internal failure). A Python warning raised
during the run (a fitted curve used beyond its tested range, say) is printed once
as one ``warning: ...`` line, never with Python's source path and code line. A reader that stops
reading (``airtaper check ... | head``) ends the command quietly; SIGTERM is
handled like Ctrl-C, so a command writing an output folder removes its
unfinished copy (:mod:`airtaper.report.outputs`).
"""

from __future__ import annotations

import argparse
import atexit
import gc
import importlib
import math
import os
import signal
import sys
import threading
import warnings

from airtaper import __version__
from airtaper.errors import EXIT_FAILURE, EXIT_INPUT, EXIT_OK, AirtaperError, InputError, one_line


def pyomo_without_scipy_stats() -> bool:
    """Keep Pyomo from importing ``scipy.stats`` (about 0.4 CPU s of every run that uses no statistics).

    Pyomo registers a deferred import of scipy whose completion hook imports ``scipy.stats``, ``scipy.integrate``
    and ``scipy.spatial`` as soon as anything imports scipy (and at once when scipy is imported before Pyomo).
    Pyomo offers no public switch for this, so the hook is dropped through the private attribute ``_callback``
    of ``pyomo.common.dependencies.scipy_available`` (Pyomo 6.x), before scipy is imported: only when that
    attribute is there and the import is still deferred. Otherwise (another Pyomo, scipy imported already)
    nothing changes and the imports cost what they did. scipy's own lazy submodules still load ``scipy.stats``
    for whoever uses it. Returns True when the hook was dropped.
    """
    if "scipy" in sys.modules:  # too late: Pyomo completes the import of scipy with the hook
        return False
    try:
        from pyomo.common import dependencies
    except ImportError:
        return False
    indicator = getattr(dependencies, "scipy_available", None)
    if getattr(indicator, "_module", True) is not None or not hasattr(indicator, "_callback"):
        return False  # resolved already, or a Pyomo without the attribute
    indicator._callback = None
    return True


pyomo_without_scipy_stats()  # before any airtaper module imports scipy

#: Subcommand modules under airtaper.cli, in the order `airtaper --help` lists them.
COMMANDS: tuple[str, ...] = ("check", "simulate", "optimize", "report", "calibrate", "design", "compare", "sweep",
                            "year")

#: Exit codes of a run stopped by a signal (the shell's 128 + signal number).
EXIT_INTERRUPTED = 128 + signal.SIGINT
EXIT_TERMINATED = 128 + signal.SIGTERM


def invoked_command(argv: list[str] | None) -> str | None:
    """The subcommand ``argv`` names (its first word that is not an option), or None (no command, or not one of
    :data:`COMMANDS`)."""
    args = sys.argv[1:] if argv is None else argv
    first = next((a for a in args if not a.startswith("-")), None)
    return first if first in COMMANDS else None


def build_parser(argv: list[str] | None = None, *, every_command: bool = False) -> argparse.ArgumentParser:
    """The argument parser of ``argv``: when ``argv`` names a subcommand, only that command's module is imported
    and registered (a command's module imports what its run needs: importing all of them cost every run the
    imports of the others); otherwise, or with ``every_command``, every command, for the list of commands of
    ``airtaper --help`` and argparse's own message naming the choices."""
    parser = argparse.ArgumentParser(
        prog="airtaper",
        description="Tapered-aeration schedules for activated-sludge trains. "
                    "Results are planning estimates; local codes, permits and licensed engineers decide.",
    )
    parser.add_argument("--version", action="version", version=f"airtaper {__version__}")
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND")
    command = None if every_command else invoked_command(argv)
    for name in COMMANDS if command is None else (command,):
        importlib.import_module(f"airtaper.cli.{name}").register(subparsers)
    return parser


def number_option_problems(checks) -> list:
    """Problems of numeric command-line options: ``checks`` holds (option, value, lowest allowed); an option
    not given (None) passes. One form for every command: ``must be a finite number (got .., expected >= ..)``."""
    from airtaper.errors import Problem

    return [Problem("<command line>", key, "must be a finite number", v, f">= {lo:g}")
            for key, v, lo in checks if v is not None and not (math.isfinite(v) and v >= lo)]


def add_output_options(parser: argparse.ArgumentParser) -> None:
    """``--out DIR`` and ``--overwrite``, the options of every command that writes an output folder.

    The command then opens the folder with :func:`airtaper.report.outputs.output_folder`
    (``args.out``, ``overwrite=args.overwrite``) before any work.
    """
    parser.add_argument("--out", required=True, metavar="DIR",
                        help="output folder (written as one set: it appears complete or not at all)")
    parser.add_argument("--overwrite", action="store_true",
                        help="replace the folder of an earlier run as a whole (it is kept otherwise)")


class _Terminated(KeyboardInterrupt):
    """SIGTERM, raised like Ctrl-C so that the same clean-up runs."""


def _on_sigterm(signum, frame):
    raise _Terminated()


def _quiet_stdout() -> None:
    """After a broken pipe: send what is left for stdout nowhere, so nothing complains at exit."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)
    except (OSError, ValueError, AttributeError):  # a captured stdout without a file descriptor
        pass


def warning_line(message, category) -> str:
    """A Python warning in the command's one form: ``warning: <message>`` (airtaper's own warnings name the
    curve or input they concern first); a warning from a library also names its kind."""
    text = one_line(str(message))
    if category.__module__.split(".")[0] == "airtaper":
        return f"warning: {text}"
    return f"warning: {category.__name__}: {text}"


class _WarningPrinter:
    """``warnings.showwarning`` for a command: each distinct warning once, as :func:`warning_line`."""

    def __init__(self):
        self.shown: set[str] = set()

    def __call__(self, message, category, filename, lineno, file=None, line=None):
        text = warning_line(message, category)
        if text not in self.shown:
            self.shown.add(text)
            print(text, file=sys.stderr)


#: Python's cyclic garbage collector while a command runs: a young generation ten times the interpreter's
#: default (700). A run builds hundreds of thousands of long-lived objects (the Pyomo model, its CasADi
#: functions, the simulator's tables), and each full collection walks all of them: on the demo's ``optimize``
#: 9 full collections took 1.18 CPU s of 26.4 (1.37 s with the young ones); with this threshold 3 took 0.14 s
#: (0.37 s in all), the peak memory the same (424 MB; load 4). Only cycles wait longer to be freed: most
#: objects are freed by reference counting as before.
GC_THRESHOLD = (7000, 10, 10)


def run_handler(handler, args) -> int:
    """Run a subcommand handler, turning the project's errors into messages and exit codes; the garbage
    collector's thresholds are :data:`GC_THRESHOLD` meanwhile (the caller's afterwards, e.g. a sweep worker's)."""
    previous = gc.get_threshold()
    gc.set_threshold(*GC_THRESHOLD)
    try:
        with warnings.catch_warnings():  # restores the caller's warning filters and printer afterwards
            warnings.showwarning = _WarningPrinter()
            return _run(handler, args)
    finally:
        gc.set_threshold(*previous)


def _run(handler, args) -> int:
    try:
        code = handler(args)
        sys.stdout.flush()  # a closed pipe shows here, not at interpreter exit
        return EXIT_OK if code is None else int(code)
    except BrokenPipeError:  # the reader went away (`| head`): what it wanted is written
        _quiet_stdout()
        return EXIT_OK
    except InputError as exc:
        for warning in exc.warnings:
            print(str(warning), file=sys.stderr)
        for problem in exc.problems:
            print(str(problem), file=sys.stderr)
        return EXIT_INPUT
    except AirtaperError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return getattr(exc, "exit_code", EXIT_FAILURE)
    except _Terminated:
        print("error: terminated", file=sys.stderr)
        return EXIT_TERMINATED
    except KeyboardInterrupt:
        print("error: interrupted", file=sys.stderr)
        return EXIT_INTERRUPTED
    except Exception as exc:  # an internal failure: say so, without a traceback
        if os.environ.get("AIRTAPER_DEBUG"):
            raise
        print(f"error: internal failure: {type(exc).__name__}: {exc} "
              "(a bug in airtaper; rerun with AIRTAPER_DEBUG=1 for a traceback)", file=sys.stderr)
        return EXIT_FAILURE


def main(argv: list[str] | None = None) -> int:
    """Entry point of the `airtaper` console script; returns the exit code."""
    parser = build_parser(argv)
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # --help, --version (0) or a usage error (2, argparse's own message)
        return exc.code if isinstance(exc.code, int) else EXIT_INPUT
    if getattr(args, "handler", None) is None:
        parser.print_help(sys.stderr)
        return EXIT_INPUT
    try:
        previous = signal.signal(signal.SIGTERM, _on_sigterm)
    except ValueError:  # not the main thread: leave signals alone
        previous = None
    try:
        return run_handler(args.handler, args)
    finally:
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)


def console() -> None:
    """Entry point of the `airtaper` console script (and ``python -m``): :func:`main`, then leave at once.

    The interpreter's own teardown (freeing every module and the solved model object by object) took about
    0.7 CPU s of every run. The exit handlers the libraries registered (temporary files, logging) still run,
    and the streams are flushed; a run that leaves a thread other than the main one exits the normal way.
    """
    code = main()
    _flush()
    if threading.active_count() > 1:
        sys.exit(code)
    atexit._run_exitfuncs()
    _flush()
    os._exit(code)


def _flush() -> None:
    try:
        sys.stdout.flush()
        sys.stderr.flush()
    except (OSError, ValueError):  # the reader went away, or a stream without a file: nothing left to say
        _quiet_stdout()


if __name__ == "__main__":
    console()
