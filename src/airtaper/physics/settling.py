"""Settling of activated sludge: the double-exponential velocity, the flux between layers, the limiting flux.

Written once for floats, numpy arrays and Pyomo expressions (:mod:`airtaper.physics.backend`):
the simulator's layered clarifier and the Pyomo model's compute their settling fluxes with the
same functions (:func:`flux_peak_tss_g_m3`, :func:`sending_flux_g_m2_d`,
:func:`receiving_flux_g_m2_d`, :func:`gravity_flux_g_m2_d`, :func:`interface_flux_g_m2_d`), so
the verification simulates the equations the optimiser solved; the overload check uses the
velocity and the limiting flux.

The flux between two layers is the consistent (Godunov) numerical flux of the gravity flux
``f(X) = vs(X) X`` (Bürger, Diehl & Nopens 2011): the least of ``f`` over ``[X_up, X_dn]`` when
the concentration rises downwards and the largest of ``f`` over ``[X_dn, X_up]`` when it falls.
For ``f`` that rises to one maximum at ``X_M`` and falls after it, that is
``min(f(min(X_up, X_M)), f(max(X_dn, X_M)))``: the upper layer's flux capped at the maximum
(what it can send) against the lower layer's flux floored at it (what it can take). Where the
concentration rises downwards it equals Takacs' ``min(f(X_up), f(X_dn))``; where it falls it
differs, and there Takacs' minimum had a kink wherever two layers below the flux maximum had
nearly equal concentrations (a zig-zag profile flips which layer sets the flux).

References
----------
Takacs, I., Patry, G.G., Nolasco, D. (1991). A dynamic model of the
clarification-thickening process. Water Research 25(10), 1263-1271,
doi:10.1016/0043-1354(91)90066-Y (double-exponential settling velocity, eq. 4; the layered
flux model: the settling flux between two layers the lesser of their gravity fluxes below the
feed and above it while the lower layer is under the threshold concentration).
Bürger, R., Diehl, S., Nopens, I. (2011). A consistent modelling methodology for secondary
settling tanks in wastewater treatment. Water Research 45(6), 2247-2260,
doi:10.1016/j.watres.2011.01.020 (the Godunov numerical flux of the hindered-settling flux
between layers; the doi from memory).
Chen, C., Mangasarian, O.L. (1996). A class of smoothing functions for nonlinear and mixed
complementarity problems. Computational Optimization and Applications 5(2), 97-138,
doi:10.1007/BF00249052 (the smooth minimum; from memory).
Ekama, G.A., Barnard, J.L., Guenthert, F.W., Krebs, P., McCorquodale, J.A.,
Parker, D.S., Wahlberg, E.J. (1997). Secondary Settling Tanks: Theory, Modelling,
Design and Operation. IAWQ Scientific and Technical Report No. 6 (solids flux
theory: the limiting flux of the thickening zone; from memory).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from scipy.optimize import brentq

from airtaper.physics.backend import exp, is_pyomo, sqrt
from airtaper.physics.smooth import smooth_max, smooth_min, smooth_step


#: Largest exponent the velocity evaluates for numbers (e**40 ~ 2e17: finite, and its square too).
_EXPONENT_FLOOR = 40.0

#: Smoothing of the velocity's clamps to [0, v0'], m/d (at most half of it off the hard clamp, about
#: 1e-6 of the velocities that carry solids). Common practice (no source).
VELOCITY_SMOOTHING_m_d = 0.01
#: Width of the smooth minimum of two layers' gravity fluxes relative to the fluxes themselves (see
#: :func:`interface_flux_g_m2_d`). A numerical regularisation. Common practice (no source).
FLUX_RELATIVE_WIDTH = 1e-2
#: Floor of that width, g/(m2 d): keeps it positive where both fluxes vanish. Common practice (no source).
FLUX_WIDTH_FLOOR_g_m2_d = 1.0
#: Width of the switch at the threshold concentration X_t relative to X_t. Common practice (no source).
THRESHOLD_RELATIVE_WIDTH = 1e-3
#: Width of the smooth cap of a layer's concentration at the flux maximum X_M (see
#: :func:`sending_flux_g_m2_d`) relative to X_M. ``f`` is flat at ``X_M``, so the cap is already once
#: differentiable; the smoothing only makes it twice so, and shifts a layer far below ``X_M`` by
#: ``w^2 / (4 (X_M - X))`` (5e-4 g/m3 at BSM1's plateau). Common practice (no source).
PEAK_RELATIVE_WIDTH = 1e-3


def takacs_velocity_m_d(tss_g_m3, tss_min_g_m3, v0_max_m_d, v0_m_d, rh_m3_g, rp_m3_g, smoothing_m_d=0.0):
    """Settling velocity of sludge at a solids concentration, m/d (Takacs et al. 1991, eq. 4).

    Parameters
    ----------
    tss_g_m3 : float, ndarray or Pyomo expression
        Suspended solids, g/m3.
    tss_min_g_m3 : float, ndarray or Pyomo expression
        Non-settleable solids ``fns * TSS_feed``, g/m3.
    v0_max_m_d, v0_m_d : float
        Largest practical velocity v0' and the Vesilind-type velocity v0, m/d.
    rh_m3_g, rp_m3_g : float
        Hindered- and flocculent-zone settling parameters, m3/g.
    smoothing_m_d : float
        0: the hard clamp to ``[0, v0']`` (numpy only); > 0: the smooth clamp
        ``smin(smax(v, 0), v0')`` at most ``smoothing / 2`` from it (twice
        differentiable, for the NLP; common practice (no source)).

    Notes
    -----
    ``vs = max(0, min(v0', v0 (exp(-rh (X - Xmin)) - exp(-rp (X - Xmin)))))``.
    """
    x = tss_g_m3 - tss_min_g_m3
    if not is_pyomo(x):
        # far below the non-settleable solids the velocity is clamped to 0 whatever x is; the floor
        # keeps exp(-rp x) finite for any iterate (a Newton step of a root solve may overshoot far
        # below 0 before it is corrected), so no overflow turns into inf - inf = nan
        x = np.maximum(x, -_EXPONENT_FLOOR / max(rh_m3_g, rp_m3_g))
    v = v0_m_d * (exp(-rh_m3_g * x) - exp(-rp_m3_g * x))
    if smoothing_m_d > 0.0 or is_pyomo(v):
        s = smoothing_m_d if smoothing_m_d > 0.0 else 1e-2
        v = smooth_max(v, 0.0, s)
        return -smooth_max(-v, -v0_max_m_d, s)
    return np.clip(v, 0.0, v0_max_m_d)


def gravity_flux_g_m2_d(tss_g_m3, tss_min_g_m3, v0_max_m_d, v0_m_d, rh_m3_g, rp_m3_g):
    """Gravity flux ``vs(X) X`` of one layer, g/(m2 d), with the smoothly clamped velocity.

    :func:`takacs_velocity_m_d` with :data:`VELOCITY_SMOOTHING_m_d` (the same for the model and
    the simulator) times the layer's solids; parameters as there.
    """
    v = takacs_velocity_m_d(tss_g_m3, tss_min_g_m3, v0_max_m_d, v0_m_d, rh_m3_g, rp_m3_g, VELOCITY_SMOOTHING_m_d)
    return v * tss_g_m3


@lru_cache(maxsize=64)
def _flux_peak_at_no_floor(v0_max_m_d, v0_m_d, rh_m3_g, rp_m3_g) -> tuple[float, float]:
    """``(x0, x_c)``, g/m3 above the non-settleable solids: the unclamped flux's maximum with
    ``Xmin = 0`` and the end of the velocity clamp at ``v0'`` (0 where the velocity never reaches it).

    Both are roots of smooth scalar functions in brackets where they change sign (brentq: cannot
    stall). ``x0`` solves ``f'(x) = u'(x) x + u(x) = 0`` with ``u = v0 (e^-rh x - e^-rp x)``: ``f' = u
    > 0`` where ``u`` peaks, at ``x_u = ln(rp / rh) / (rp - rh)``, and ``f' < 0`` for large ``x``.
    """
    if rp_m3_g <= rh_m3_g:  # the velocity is 0 at every concentration: no flux, any X_M will do
        return 0.0, 0.0

    def u(x):
        return v0_m_d * (np.exp(-rh_m3_g * x) - np.exp(-rp_m3_g * x))

    def df(x):
        return v0_m_d * (-rh_m3_g * np.exp(-rh_m3_g * x) + rp_m3_g * np.exp(-rp_m3_g * x)) * x + u(x)

    x_u = np.log(rp_m3_g / rh_m3_g) / (rp_m3_g - rh_m3_g)
    hi = 2.0 * x_u + 2.0 / rh_m3_g
    while df(hi) >= 0.0:
        hi *= 2.0
    x0 = brentq(df, x_u, hi, xtol=1e-12, rtol=1e-14)
    x_c = 0.0
    if u(x_u) > v0_max_m_d:  # the clamp is active from below x_u up to x_c on the falling side
        hi = x_u + 1.0 / rh_m3_g
        while u(hi) >= v0_max_m_d:
            hi *= 2.0
        x_c = brentq(lambda x: u(x) - v0_max_m_d, x_u, hi, xtol=1e-12, rtol=1e-14)
    return float(x0), float(x_c)


def flux_peak_tss_g_m3(tss_min_g_m3, v0_max_m_d, v0_m_d, rh_m3_g, rp_m3_g):
    """Concentration ``X_M`` where the gravity flux ``f(X) = vs(X) X`` is largest, g/m3.

    Parameters as :func:`takacs_velocity_m_d` (``tss_min_g_m3`` may be a model variable).

    Notes
    -----
    With ``x = X - Xmin`` and the unclamped velocity ``u(x) = v0 (e^-rh x - e^-rp x)``, the flux
    ``u(x) (x + Xmin)`` is largest where ``g(x) = u'(x) (x + Xmin) + u(x) = 0``; no closed form.
    Its root ``x0`` for ``Xmin = 0`` is found once per parameter set (a bracketed root,
    :func:`_flux_peak_at_no_floor`), then one chord step on ``g`` from ``x0`` with the actual
    ``Xmin`` and the slope ``g'(x0)`` of ``Xmin = 0``: ``x* ~ x0 - u'(x0) Xmin / g'(x0)``, linear in
    ``Xmin`` (its first-order change; a Newton step has ``Xmin`` in its denominator, which turns
    sign for large ``Xmin``, and a second step nests exponentials of ``Xmin`` that every flux
    between layers repeats dozens of times in Pyomo's expression tree). Measured against a
    bracketed root with BSM1's parameters: 0.004, 0.07, 0.44, 1.8 and 17 g/m3 off for ``Xmin`` = 5,
    20, 50, 100 and 300 g/m3 (BSM1: ``fns X_f`` ~ 7; about 0.6 at 50 and 2.4 at 100 for rh 1e-3,
    rp 7e-3). The flux is flat at its maximum, so such an error changes the fluxes by ``|f''|
    err^2 / 2`` (``|f''|`` ~ 0.1 for BSM1: < 0.2 g/(m2 d) against ~3e5 at 1.8 g/m3) and leaves a
    slope of ``f'' err`` (< 0.2 m/d against ~200 m/d) where the cap sets in.
    Where the velocity is clamped at ``v0'`` over the unclamped maximum (``x* < x_c``, the clamp's
    end on the falling side), ``f = v0' X`` still rises up to ``x_c``, so the maximum is at ``x_c``:
    ``X_M = Xmin + max(x*, x_c)``, a smooth maximum of width :data:`PEAK_RELATIVE_WIDTH` ``x_c``.
    """
    x0, x_c = _flux_peak_at_no_floor(float(v0_max_m_d), float(v0_m_d), float(rh_m3_g), float(rp_m3_g))
    if x0 == 0.0:
        return tss_min_g_m3 + 0.0
    rh, rp, v0 = float(rh_m3_g), float(rp_m3_g), float(v0_m_d)
    e_h, e_p = np.exp(-rh * x0), np.exp(-rp * x0)
    du = v0 * (-rh * e_h + rp * e_p)
    d2u = v0 * (rh**2 * e_h - rp**2 * e_p)
    # one chord step from x0: g(x0) = u'(x0) Xmin (g vanishes there for Xmin = 0), g' at Xmin = 0 (< 0)
    x = x0 - du * tss_min_g_m3 / (d2u * x0 + 2.0 * du)
    if x_c > 0.0:
        x = smooth_max(x, x_c, PEAK_RELATIVE_WIDTH * x_c)
    return tss_min_g_m3 + x


def _peak_width_g_m3(v0_max_m_d, v0_m_d, rh_m3_g, rp_m3_g) -> float:
    x0, x_c = _flux_peak_at_no_floor(float(v0_max_m_d), float(v0_m_d), float(rh_m3_g), float(rp_m3_g))
    return PEAK_RELATIVE_WIDTH * max(x0, x_c, 1.0)


def sending_flux_g_m2_d(tss_g_m3, tss_min_g_m3, x_peak_g_m3, v0_max_m_d, v0_m_d, rh_m3_g, rp_m3_g):
    """Largest flux a layer can pass down, g/(m2 d): ``f(min(X, X_M))``, the cap smoothed.

    ``x_peak_g_m3`` is :func:`flux_peak_tss_g_m3`; other parameters as :func:`gravity_flux_g_m2_d`.
    Below ``X_M`` it is the layer's own gravity flux, above it the flux maximum ``f(X_M)``.
    """
    capped = smooth_min(tss_g_m3, x_peak_g_m3, _peak_width_g_m3(v0_max_m_d, v0_m_d, rh_m3_g, rp_m3_g))
    return gravity_flux_g_m2_d(capped, tss_min_g_m3, v0_max_m_d, v0_m_d, rh_m3_g, rp_m3_g)


def receiving_flux_g_m2_d(tss_g_m3, tss_min_g_m3, x_peak_g_m3, v0_max_m_d, v0_m_d, rh_m3_g, rp_m3_g):
    """Largest flux a layer can take from above, g/(m2 d): ``f(max(X, X_M))``, the floor smoothed.

    Parameters as :func:`sending_flux_g_m2_d`. Above ``X_M`` it is the layer's own gravity flux,
    below it the flux maximum ``f(X_M)``.
    """
    floored = smooth_max(tss_g_m3, x_peak_g_m3, _peak_width_g_m3(v0_max_m_d, v0_m_d, rh_m3_g, rp_m3_g))
    return gravity_flux_g_m2_d(floored, tss_min_g_m3, v0_max_m_d, v0_m_d, rh_m3_g, rp_m3_g)


def interface_flux_g_m2_d(sending_above_g_m2_d, receiving_below_g_m2_d, tss_below_g_m3=None, x_threshold_g_m3=None,
                          flux_above_g_m2_d=None):
    """Settling flux from a layer to the one below it, g/(m2 d): the Godunov flux, smoothed.

    Parameters
    ----------
    sending_above_g_m2_d : float, ndarray or Pyomo expression
        :func:`sending_flux_g_m2_d` of the upper layer.
    receiving_below_g_m2_d : float, ndarray or Pyomo expression
        :func:`receiving_flux_g_m2_d` of the lower layer.
    tss_below_g_m3, x_threshold_g_m3, flux_above_g_m2_d : optional
        For an interface above the feed layer (clarification zone): the lower layer's solids, the
        threshold concentration ``X_t``, g/m3, and the upper layer's own gravity flux
        (:func:`gravity_flux_g_m2_d`). Omitted (None) at and below the feed layer.

    Notes
    -----
    With ``a`` the upper layer's sending flux and ``b`` the lower layer's receiving flux, the
    Godunov flux of Bürger, Diehl & Nopens (2011) is ``min(a, b)`` (see the module notes); above
    the feed Takacs et al. (1991) take the upper layer's own flux ``f_up`` while the lower layer is
    under ``X_t``::

        J = min(a, b)                                     at and below the feed
        J = f_up if X_below <= X_t else min(a, b)         above it

    Above the feed, the threshold rule is Takacs' model of clarification (and part of the BSM1
    definition) and stays; where it hands over to thickening (a blanket above the feed, an
    overloaded clarifier) it hands over to the same Godunov flux as below the feed, for the same
    reason: Takacs' ``min(f_up, f_down)`` has a kink wherever the profile zig-zags.

    Here ``min`` is the smooth minimum (the CHKS function, Chen & Mangasarian 1996)::

        smin(a, b) = (a + b - sqrt((a - b)^2 + s^2)) / 2,   s^2 = eps^2 (a^2 + b^2) + s0^2

    with a width ``s`` relative to the fluxes (``eps`` = :data:`FLUX_RELATIVE_WIDTH`, ``s0`` =
    :data:`FLUX_WIDTH_FLOOR_g_m2_d`), and the threshold switch is the smooth step of width
    ``THRESHOLD_RELATIVE_WIDTH * X_t`` (:func:`airtaper.physics.smooth.smooth_step`)::

        J = (1 - step(X_below - X_t)) a + step(X_below - X_t) smin(a, b)

    The smoothing is a numerical regularisation, not physics. With Takacs' minimum of the two
    layers' own fluxes, several layers at one concentration below a flux-limited feed sat
    exactly on the kink of ``min``, and a width far below the fluxes' scale (a fixed 1 g/(m2 d)
    against fluxes of ~1e5) left Newton's and Ipopt's linear model valid only within ~0.003 g/m3
    there. Scaled with the fluxes, the minimum is smooth at the scale the solvers see (eps = 1e-3
    was still too sharp: the model's own time steps on the demo with a layered clarifier did not
    converge where the blanket front crossed a layer; 1e-2 does). It is never more than ``s / 2``
    below the exact minimum (``eps / sqrt(2)``, 0.7 %, where the two fluxes are equal), less than
    ``s^2 / (4 |a - b|)`` away from the kink. With the Godunov flux the kink is left only where
    the upper layer is below ``X_M`` and the lower one above it (across a blanket): on the BSM1
    open-loop steady state the flux from layer 9 into the blanket sits there (f(356) ~ f(6394)) and
    layer 9 is lifted by 0.3 % (357.25 against 356.07 g/m3), while layers 5-8 sit at 356.108
    (Takacs' minimum had lifted all five, alternating, to 357.2-358.4); the reactors and the
    effluent move by far less than the benchmark table's 1e-3 (tests/simulate/test_bsm1.py).
    """
    a, b = sending_above_g_m2_d, receiving_below_g_m2_d
    width_sq = FLUX_RELATIVE_WIDTH**2 * (a**2 + b**2) + FLUX_WIDTH_FLOOR_g_m2_d**2
    lesser = 0.5 * (a + b - sqrt((a - b) ** 2 + width_sq))
    if tss_below_g_m3 is None:
        return lesser
    if flux_above_g_m2_d is None:
        raise ValueError("interface_flux_g_m2_d: above the feed it needs flux_above_g_m2_d")
    switch = smooth_step(tss_below_g_m3 - x_threshold_g_m3, THRESHOLD_RELATIVE_WIDTH * x_threshold_g_m3)
    return (1.0 - switch) * flux_above_g_m2_d + switch * lesser


def layer_interface_fluxes_g_m2_d(tss_g_m3, feed_index, tss_min_g_m3, v0_max_m_d, v0_m_d, rh_m3_g, rp_m3_g,
                                  x_threshold_g_m3):
    """Settling flux across every interface of a layered clarifier, g/(m2 d) (numpy only).

    ``tss_g_m3``: the layers' solids, top first, shape ``(L,)`` or ``(L, n)`` (``n`` states side by
    side, with ``tss_min_g_m3`` scalar or of shape ``(n,)``); ``feed_index``: the feed layer, 0-based.
    Returns shape ``(L - 1, ...)``: row ``k`` is the flux from layer ``k`` into ``k + 1``, by
    :func:`interface_flux_g_m2_d` with the threshold rule above the feed (interfaces ``k < feed_index``).
    The one evaluation of the profile's fluxes that the simulator's right-hand side and the model's
    starting point share (the model's constraints build the same terms one interface at a time).
    """
    params = (tss_min_g_m3, v0_max_m_d, v0_m_d, rh_m3_g, rp_m3_g)
    x_peak = flux_peak_tss_g_m3(*params)
    send = sending_flux_g_m2_d(tss_g_m3[:-1], tss_min_g_m3, x_peak, *params[1:])
    take = receiving_flux_g_m2_d(tss_g_m3[1:], tss_min_g_m3, x_peak, *params[1:])
    f = int(feed_index)
    flux = np.empty(send.shape)
    flux[f:] = interface_flux_g_m2_d(send[f:], take[f:])
    if f > 0:
        own = gravity_flux_g_m2_d(tss_g_m3[:f], *params)
        flux[:f] = interface_flux_g_m2_d(send[:f], take[:f], tss_g_m3[1:f + 1], x_threshold_g_m3, own)
    return flux


def limiting_solids_flux_g_m2_d(underflow_velocity_m_d, tss_min_g_m3, v0_max_m_d, v0_m_d, rh_m3_g, rp_m3_g,
                                x_max_g_m3: float = 30000.0) -> tuple[float, float]:
    """Limiting solids flux of the thickening zone and the concentration where it occurs.

    Solids flux theory (Ekama et al. 1997): below the feed, solids move down with
    the total flux ``G(X) = vs(X) X + v_u X`` (gravity plus the underflow's bulk
    velocity ``v_u = Q_u / A``). Where ``G`` has a local minimum beyond its local
    maximum, that minimum ``G_L`` is the largest flux the thickening zone can pass:
    a clarifier fed more solids per area (``Q_f X_f / A > G_L``) cannot pass them, and
    its blanket rises until solids leave over the weir. When the underflow velocity
    is high enough that ``G`` only grows, there is no such limit (``G_L`` infinite).

    Returns
    -------
    (G_L, X_L) : g/(m2 d), g/m3 (inf, nan without a limit)
    """
    x = np.linspace(max(float(tss_min_g_m3), 0.0), x_max_g_m3, 6001)
    g = (takacs_velocity_m_d(x, tss_min_g_m3, v0_max_m_d, v0_m_d, rh_m3_g, rp_m3_g) + underflow_velocity_m_d) * x
    falling = np.nonzero(np.diff(g) < 0.0)[0]
    if falling.size == 0:
        return float("inf"), float("nan")
    k = falling[0] + int(np.argmin(g[falling[0]:]))
    if k == g.size - 1:  # still falling at the end of the range: no minimum inside it
        return float("inf"), float("nan")
    return float(g[k]), float(x[k])
