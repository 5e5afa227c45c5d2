"""The command's own error handling: Python warnings reach stderr as one line each, in the CLI's form."""

import warnings

import numpy as np

from airtaper.cli.main import run_handler, warning_line
from airtaper.errors import EXIT_OK
from airtaper.physics.extrapolation import SoteExtrapolationWarning, warn_if_outside


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


def test_warning_line_keeps_a_message_on_one_line():
    assert warning_line("a\nb", UserWarning) == "warning: UserWarning: a\\nb"
