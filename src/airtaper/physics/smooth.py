"""Smooth stand-ins for max, min and the unit step, for floats, numpy arrays and Pyomo expressions.

Ipopt needs twice-differentiable equations; a hard ``max`` (a velocity clamped at 0,
the most demanding zone setting the header pressure, the lesser of two settling
fluxes) has a kink. The functions below replace it by the Chen-Harker-Kanzow-Smale
(CHKS) smoothing of the plus function, written once with :mod:`airtaper.physics.backend`
so that the model (Pyomo) and the simulator (numpy) evaluate the same formula:

* ``plus(x, s) = (x + sqrt(x**2 + s**2)) / 2`` approximates ``max(x, 0)``: it is
  infinitely differentiable, above ``max(x, 0)`` everywhere and at most ``s / 2`` above
  it (the largest excess at ``x = 0``);
* :func:`smooth_max` ``(a, b) = b + plus(a - b)`` and :func:`smooth_min` ``(a, b) = a - plus(a - b)``;
* :func:`smooth_step` ``(x, w) = d plus(x, w) / dx = (1 + x / sqrt(x**2 + w**2)) / 2``, a
  switch from 0 to 1 around ``x = 0`` (1/2 at ``x = 0``).

In the terms of Chen & Mangasarian (1996), ``plus`` is their smooth plus function
``p(x, beta)`` for the density ``d(t) = 2 / (t**2 + 4)**1.5`` with ``beta = s / 2``, and
:func:`smooth_step` is the distribution function of that density.

References
----------
Chen, C., Mangasarian, O.L. (1996). A class of smoothing functions for nonlinear and
mixed complementarity problems. Computational Optimization and Applications 5(2),
97-138, doi:10.1007/BF00249052 (from memory).
Kanzow, C. (1996). Some noninterior continuation methods for linear complementarity
problems. SIAM Journal on Matrix Analysis and Applications 17(4), 851-868,
doi:10.1137/S0895479894273134 (from memory).
"""

from __future__ import annotations

from airtaper.physics.backend import sqrt


def smooth_max(a, b, smoothing):
    """Smooth upper approximation of ``max(a, b)``, at most ``smoothing / 2`` above it.

    Parameters
    ----------
    a, b : float, ndarray or Pyomo expression
        The two values (same unit).
    smoothing : float
        ``s > 0``, in the unit of ``a`` and ``b``: the excess over ``max(a, b)`` is ``s / 2``
        at ``a == b`` and falls off like ``s**2 / (4 |a - b|)`` away from it.

    Notes
    -----
    ``smax(a, b) = (a + b + sqrt((a - b)**2 + s**2)) / 2`` (the CHKS plus function of
    ``a - b``, added to ``b``; see the module notes).
    """
    return 0.5 * (a + b + sqrt((a - b) ** 2 + smoothing**2))


def smooth_min(a, b, smoothing):
    """Smooth lower approximation of ``min(a, b)``, at most ``smoothing / 2`` below it.

    Notes
    -----
    ``smin(a, b) = (a + b - sqrt((a - b)**2 + s**2)) / 2 = -smax(-a, -b)``.
    """
    return 0.5 * (a + b - sqrt((a - b) ** 2 + smoothing**2))


def smooth_step(x, width):
    """Smooth switch from 0 (``x`` well below 0) to 1 (well above), 1/2 at ``x = 0``.

    Parameters
    ----------
    x : float, ndarray or Pyomo expression
        Distance past the switch point.
    width : float
        ``w > 0``, the unit of ``x``: at ``x = +-w`` the switch is at 0.85 / 0.15.

    Notes
    -----
    ``step(x, w) = (1 + x / sqrt(x**2 + w**2)) / 2``, the derivative of
    ``smooth_max(x, 0, w)`` with respect to ``x`` (an algebraic sigmoid; see the module notes).
    """
    return 0.5 * (1.0 + x / sqrt(x**2 + width**2))


__all__ = ["smooth_max", "smooth_min", "smooth_step"]
