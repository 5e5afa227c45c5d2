"""Warnings raised when a fitted curve is evaluated outside the data it was fitted to.

Only numeric inputs (floats, numpy arrays) are checked: a Pyomo variable has no
value worth checking when an expression is built, so the model layer keeps
variables inside :attr:`range` attributes with bounds instead.
"""

from __future__ import annotations

import warnings

import numpy as np

from airtaper.physics.backend import is_numeric

#: Relative slack allowed at the ends of a tested range before warning.
RANGE_TOLERANCE = 1e-9


class ExtrapolationWarning(UserWarning):
    """A fitted curve was evaluated outside its tested range."""


class SoteExtrapolationWarning(ExtrapolationWarning):
    """A SOTE curve was evaluated outside its clean-water test points."""


class HeadlossExtrapolationWarning(ExtrapolationWarning):
    """A diffuser headloss curve was evaluated outside its test points."""


def warn_if_outside(
    values,
    value_range: tuple[float, float],
    what: str,
    curve: str,
    category: type[ExtrapolationWarning] = ExtrapolationWarning,
    stacklevel: int = 3,
) -> bool:
    """Warn (``category``) when numeric ``values`` leave ``value_range``.

    Returns True when a warning was issued. Pyomo objects are ignored.
    """
    if not is_numeric(values):
        return False
    arr = np.asarray(values, dtype=float)
    if arr.size == 0:
        return False
    lo, hi = value_range
    slack = RANGE_TOLERANCE * max(abs(lo), abs(hi), 1.0)
    low = float(np.nanmin(arr))
    high = float(np.nanmax(arr))
    if low < lo - slack or high > hi + slack:
        warnings.warn(
            f"{curve}: {what} {low:g}..{high:g} is outside the tested range {lo:g}..{hi:g}; "
            "the fitted curve is extrapolated",
            category,
            stacklevel=stacklevel,
        )
        return True
    return False
