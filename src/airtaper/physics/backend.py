"""Elementary functions that work on floats, numpy arrays and Pyomo expressions.

Every physics function in airtaper is written once, with plain arithmetic
(``+ - * / **``) and the functions below. They pick the implementation from the
type of the argument:

* a Pyomo component or expression (``Var``, ``Param``, ``Expression``, any
  numeric expression built from them) gets the Pyomo intrinsic
  (``pyomo.environ.exp`` ...), so the result is a Pyomo expression that Ipopt
  can differentiate;
* anything else (``float``, ``int``, numpy scalars and arrays) gets the numpy
  ufunc.

Pyomo inputs are scalar components or expressions; an array *of* Pyomo
objects is not supported (build one expression per index instead). Pyomo is
imported only when a Pyomo object is actually met, so numpy-only callers (the
independent simulator) never pay for the import.
"""

from __future__ import annotations

import numbers

import numpy as np


def is_pyomo(value) -> bool:
    """True when ``value`` is a Pyomo component or expression."""
    if isinstance(value, (numbers.Number, np.ndarray, np.generic)):
        return False
    return type(value).__module__.startswith("pyomo.")


def any_pyomo(*values) -> bool:
    """True when any of ``values`` is a Pyomo component or expression."""
    return any(is_pyomo(v) for v in values)


def is_numeric(value) -> bool:
    """True for floats, ints and numpy scalars/arrays (not Pyomo objects)."""
    return isinstance(value, (numbers.Real, np.ndarray, np.generic)) and not isinstance(value, bool)


def _pyomo():
    import pyomo.environ as pyo

    return pyo


def exp(x):
    """exp(x) for float, ndarray or Pyomo expression."""
    return _pyomo().exp(x) if is_pyomo(x) else np.exp(x)


def log(x):
    """Natural log for float, ndarray or Pyomo expression."""
    return _pyomo().log(x) if is_pyomo(x) else np.log(x)


def sqrt(x):
    """Square root for float, ndarray or Pyomo expression."""
    return _pyomo().sqrt(x) if is_pyomo(x) else np.sqrt(x)


def power(base, exponent):
    """``base ** exponent`` for float, ndarray or Pyomo expression.

    Plain ``**`` already works on all three; this wrapper exists so that a
    numeric negative base raised to a fractional power gives ``nan`` (numpy)
    instead of a Python complex number, and so float inputs always return
    numpy floats.
    """
    if any_pyomo(base, exponent):
        return base**exponent
    return np.power(np.asarray(base, dtype=float), exponent)[()]


def value(x):
    """Numeric value of ``x``: ``pyomo.environ.value`` for Pyomo, else ``x`` as ndarray/float."""
    if is_pyomo(x):
        return _pyomo().value(x)
    return np.asarray(x, dtype=float)[()]
