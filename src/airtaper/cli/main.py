"""The `airtaper` command: argument parsing, subcommand registration, error handling.

Each subcommand lives in its own module of this package and exposes
``register(subparsers)``, which adds its parser and sets ``handler`` (a function
taking the parsed arguments and returning an exit code). Adding a subcommand is
one entry in :data:`COMMANDS`.

Every handler runs through :func:`run_handler`: an
:class:`~airtaper.errors.InputError` becomes one ``error: <file>: <key>: ...``
line per problem on stderr and exit code 2; no traceback reaches the user
(set ``AIRTAPER_DEBUG=1`` to see one for an internal failure).
"""

from __future__ import annotations

import argparse
import importlib
import os
import sys

from airtaper import __version__
from airtaper.errors import EXIT_FAILURE, EXIT_INPUT, EXIT_OK, AirtaperError, InputError

#: Subcommand modules under airtaper.cli, in the order `airtaper --help` lists them.
COMMANDS: tuple[str, ...] = ("check", "simulate", "optimize", "report")


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="airtaper",
        description="Tapered-aeration schedules for activated-sludge trains. "
                    "Results are planning estimates; local codes, permits and licensed engineers decide.",
    )
    parser.add_argument("--version", action="version", version=f"airtaper {__version__}")
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMANDS:
        importlib.import_module(f"airtaper.cli.{name}").register(subparsers)
    return parser


def run_handler(handler, args) -> int:
    """Run a subcommand handler, turning the project's errors into messages and exit codes."""
    try:
        code = handler(args)
        return EXIT_OK if code is None else int(code)
    except InputError as exc:
        for problem in exc.problems:
            print(str(problem), file=sys.stderr)
        return EXIT_INPUT
    except AirtaperError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return getattr(exc, "exit_code", EXIT_FAILURE)
    except KeyboardInterrupt:
        print("error: interrupted", file=sys.stderr)
        return 130
    except Exception as exc:  # an internal failure: say so, without a traceback
        if os.environ.get("AIRTAPER_DEBUG"):
            raise
        print(f"error: internal failure: {type(exc).__name__}: {exc} "
              "(a bug in airtaper; rerun with AIRTAPER_DEBUG=1 for a traceback)", file=sys.stderr)
        return EXIT_FAILURE


def main(argv: list[str] | None = None) -> int:
    """Entry point of the `airtaper` console script; returns the exit code."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # --help, --version (0) or a usage error (2, argparse's own message)
        return exc.code if isinstance(exc.code, int) else EXIT_INPUT
    if getattr(args, "handler", None) is None:
        parser.print_help(sys.stderr)
        return EXIT_INPUT
    return run_handler(args.handler, args)


if __name__ == "__main__":
    sys.exit(main())
