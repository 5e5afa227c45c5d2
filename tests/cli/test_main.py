"""The command's own error handling: Python warnings reach stderr as one line each, in the CLI's form; the parser
imports only the module of the command it runs."""

import os
import pathlib
import re
import subprocess
import sys
import warnings

import numpy as np

from airtaper.cli.main import COMMANDS, run_handler, warning_line
from airtaper.errors import EXIT_INPUT, EXIT_OK
from airtaper.physics.extrapolation import SoteExtrapolationWarning, warn_if_outside

SRC = pathlib.Path(__file__).resolve().parents[2] / "src"


def _env() -> dict:
    """The environment of a fresh interpreter running this checkout's airtaper."""
    return dict(os.environ, PYTHONPATH=os.pathsep.join([str(SRC), os.environ.get("PYTHONPATH", "")]))


def test_a_curve_extrapolation_warning_is_one_line_without_a_source_path(capsys):
    def handler(args):
        for _ in range(3):  # the same warning from a loop is printed once
            warn_if_outside(np.array([0.5, 12.0]), (1.0, 10.0), "airflow per diffuser (Sm3/h)", "SOTE curve of disc_040",
                            SoteExtrapolationWarning)
        warnings.warn("overflow in exp", RuntimeWarning)
        return EXIT_OK

    assert run_handler(handler, None) == EXIT_OK
    lines = capsys.readouterr().err.splitlines()
    assert lines == [
        "warning: SOTE curve of disc_040: airflow per diffuser (Sm3/h) 0.5..12 is outside the tested range 1..10; "
        "the fitted curve is extrapolated",
        "warning: RuntimeWarning: overflow in exp",
    ]
    assert not any(".py" in line or "warnings.warn" in line for line in lines)


def test_the_callers_warning_printer_is_restored():
    before = warnings.showwarning
    run_handler(lambda args: EXIT_OK, None)
    assert warnings.showwarning is before


def test_a_command_runs_with_the_garbage_collectors_thresholds_and_restores_the_callers():
    import gc

    from airtaper.cli.main import GC_THRESHOLD

    before = gc.get_threshold()
    seen = []
    try:
        gc.set_threshold(500, 5, 5)  # a caller's own (a sweep worker, a notebook)
        run_handler(lambda args: seen.append(gc.get_threshold()) or EXIT_OK, None)
        assert seen == [GC_THRESHOLD] and gc.get_threshold() == (500, 5, 5)

        def failing(args):
            raise RuntimeError("boom")
        run_handler(failing, None)  # an internal failure: reported, and the thresholds are still restored
        assert gc.get_threshold() == (500, 5, 5)
    finally:
        gc.set_threshold(*before)


def test_warning_line_keeps_a_message_on_one_line():
    assert warning_line("a\nb", UserWarning) == "warning: UserWarning: a\\nb"


def _run_cli(*argv: str) -> subprocess.CompletedProcess:
    """``airtaper ARGV`` in a fresh interpreter that then prints the airtaper.cli modules it imported."""
    code = ("import sys\nfrom airtaper.cli.main import main\ncode = main(sys.argv[1:])\n"
            "print('MODULES', *sorted(m for m in sys.modules if m.startswith('airtaper.cli.')))\nsys.exit(code)")
    return subprocess.run([sys.executable, "-c", code, *argv], capture_output=True, text=True, env=_env(), check=False)


def _modules(out: str) -> set[str]:
    return set(next(line for line in out.splitlines() if line.startswith("MODULES")).split()[1:])


def test_a_command_imports_only_its_own_module():
    r = _run_cli("check", "--help")
    assert r.returncode == 0 and "usage: airtaper check" in r.stdout
    assert _modules(r.stdout) == {"airtaper.cli.main", "airtaper.cli.check"}
    r = _run_cli("optimize", "--help")
    assert r.returncode == 0 and "--solve-budget" in r.stdout
    assert _modules(r.stdout) == {"airtaper.cli.main", "airtaper.cli.optimize"}


def test_the_command_list_and_usage_errors_still_name_every_command():
    r = _run_cli("--help")
    assert r.returncode == 0
    listing = r.stdout.split("positional arguments:")[1]
    assert all(re.search(rf"^    {name}\b", listing, re.MULTILINE) for name in COMMANDS)
    r = _run_cli("optimise", "layouts/demo.toml")  # not a command: argparse's own one line, every choice named
    assert r.returncode == EXIT_INPUT
    error = [line for line in r.stderr.splitlines() if line.startswith("airtaper: error:")]
    assert len(error) == 1 and "invalid choice: 'optimise'" in error[0] and all(n in error[0] for n in COMMANDS)
    r = _run_cli("optimize", "layouts/demo.toml", "--out", "unused", "--no-such-option")  # argparse's one line
    assert r.returncode == EXIT_INPUT
    assert [line for line in r.stderr.splitlines() if "error:" in line] == \
        ["airtaper: error: unrecognized arguments: --no-such-option"]


def test_the_console_entry_runs_the_exit_handlers_and_keeps_the_exit_code():
    """console() leaves without the interpreter's teardown: what was printed, the exit handlers (a library's
    temporary files) and the exit code survive."""
    code = ("import atexit\nimport airtaper.cli.main as m\natexit.register(print, 'handler ran')\n"
            "def fake(argv=None):\n    print('work done', end='')\n    return 3\n"
            "m.main = fake\nm.console()\nprint('not reached')")
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=_env(), check=False)
    assert r.returncode == 3
    assert r.stdout == "work donehandler ran\n"
    r = subprocess.run([sys.executable, "-m", "airtaper", "check", "--help"], capture_output=True, text=True,
                       env=_env(), check=False)
    assert r.returncode == 0 and r.stdout.startswith("usage: airtaper check")


#: In a fresh interpreter: import the command, say whether scipy.stats came with it, then use scipy.stats
#: through Pyomo's deferred scipy and directly (both must still work).
_STATS = ("import sys\n{before}\nimport airtaper.cli.main as m, airtaper.cli.optimize, airtaper.optimize.diurnal\n"
          "print('STATS', 'scipy.stats' in sys.modules)\n"
          "from pyomo.common.dependencies import scipy, scipy_available\n"
          "import scipy.stats\n"
          "print('T', bool(scipy_available), round(float(scipy.stats.t.ppf(0.975, 10)), 4))\n")


def _stats_run(before: str = "") -> list[str]:
    r = subprocess.run([sys.executable, "-c", _STATS.format(before=before)], capture_output=True, text=True,
                       env=_env(), check=False)
    assert r.returncode == 0, r.stderr
    return r.stdout.split()


def test_the_optimize_command_does_not_import_scipy_stats_and_scipy_stats_still_works():
    # t(0.975, 10) = 2.2281: Student's t table, NIST/SEMATECH e-Handbook of Statistical Methods, 1.3.6.7.2
    # (from memory)
    assert _stats_run() == ["STATS", "False", "T", "True", "2.2281"]


def test_import_works_when_pyomo_has_no_private_hook_or_scipy_came_first():
    """pyomo_without_scipy_stats relies on a private Pyomo attribute: with an indicator without it (as another
    Pyomo version may have), or with scipy imported before Pyomo, it does nothing, the imports work and Pyomo
    imports scipy.stats as it always did."""
    other_pyomo = ("import pyomo.common.dependencies as d\n"
                   "d.scipy_available = type('OtherIndicator', (), {'__bool__': lambda self: True})()")
    assert _stats_run(other_pyomo) == ["STATS", "True", "T", "True", "2.2281"]
    assert _stats_run("import scipy") == ["STATS", "True", "T", "True", "2.2281"]
