"""Settling of activated sludge: the double-exponential velocity, the flux between layers, the limiting flux.

Written once for floats, numpy arrays and Pyomo expressions (:mod:`airtaper.physics.backend`):
the simulator's layered clarifier and the Pyomo model's compute their settling fluxes with the
same two functions (:func:`gravity_flux_g_m2_d`, :func:`interface_flux_g_m2_d`), so the
verification simulates the equations the optimiser solved; the overload check uses the
velocity and the limiting flux.

References
----------
Takacs, I., Patry, G.G., Nolasco, D. (1991). A dynamic model of the
clarification-thickening process. Water Research 25(10), 1263-1271,
doi:10.1016/0043-1354(91)90066-Y (double-exponential settling velocity, eq. 4; the layered
flux model: the settling flux between two layers the lesser of their gravity fluxes below the
feed and above it while the lower layer is under the threshold concentration).
Chen, C., Mangasarian, O.L. (1996). A class of smoothing functions for nonlinear and mixed
complementarity problems. Computational Optimization and Applications 5(2), 97-138,
doi:10.1007/BF00249052 (the smooth minimum; from memory).
Ekama, G.A., Barnard, J.L., Guenthert, F.W., Krebs, P., McCorquodale, J.A.,
Parker, D.S., Wahlberg, E.J. (1997). Secondary Settling Tanks: Theory, Modelling,
Design and Operation. IAWQ Scientific and Technical Report No. 6 (solids flux
theory: the limiting flux of the thickening zone; from memory).
"""

from __future__ import annotations

import numpy as np

from airtaper.physics.backend import exp, is_pyomo, sqrt
from airtaper.physics.smooth import smooth_max, smooth_step


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


def interface_flux_g_m2_d(flux_above_g_m2_d, flux_below_g_m2_d, tss_below_g_m3=None, x_threshold_g_m3=None):
    """Settling flux from a layer to the one below it, g/(m2 d) (Takacs et al. 1991), smoothed.

    Parameters
    ----------
    flux_above_g_m2_d, flux_below_g_m2_d : float, ndarray or Pyomo expression
        Gravity fluxes ``vs X`` of the upper and the lower layer (:func:`gravity_flux_g_m2_d`).
    tss_below_g_m3, x_threshold_g_m3 : optional
        For an interface above the feed layer (clarification zone): the lower layer's solids and the
        threshold concentration ``X_t``, g/m3. Omitted (None) at and below the feed layer.

    Notes
    -----
    The layered model takes the lesser of the two gravity fluxes, and above the feed the upper
    layer's own flux while the lower layer is under ``X_t``::

        J = min(a, b)                                     at and below the feed
        J = a if X_below <= X_t else min(a, b)            above it

    Here ``min`` is the smooth minimum (the CHKS function, Chen & Mangasarian 1996)::

        smin(a, b) = (a + b - sqrt((a - b)^2 + s^2)) / 2,   s^2 = eps^2 (a^2 + b^2) + s0^2

    with a width ``s`` relative to the fluxes (``eps`` = :data:`FLUX_RELATIVE_WIDTH`, ``s0`` =
    :data:`FLUX_WIDTH_FLOOR_g_m2_d`), and the threshold switch is the smooth step of width
    ``THRESHOLD_RELATIVE_WIDTH * X_t`` (:func:`airtaper.physics.smooth.smooth_step`)::

        J = (1 - step(X_below - X_t)) a + step(X_below - X_t) smin(a, b)

    The smoothing is a numerical regularisation, not physics: below a flux-limited feed several
    layers sit at one concentration, that is exactly on the kink of ``min``, and a width far
    below the fluxes' scale (a fixed 1 g/(m2 d) against fluxes of ~1e5) left Newton's and Ipopt's
    linear model valid only within ~0.003 g/m3 there. Scaled with the fluxes, the minimum is
    smooth at the scale the solvers see (eps = 1e-3 was still too sharp: the model's own time
    steps on the demo with a layered clarifier did not converge where the blanket front crossed
    a layer; 1e-2 does). It is never more than ``s / 2`` below the exact minimum (``eps /
    sqrt(2)``, 0.7 %, where the two fluxes are equal), less than ``s^2 / (4 |a - b|)`` away from
    the kink: on the BSM1 open-loop steady state it lifts the flat layers below the feed by
    about 0.5 % (357.2 to 358.4 against 356.07 g/m3) and moves the reactors and the effluent by
    less than the benchmark table's 1e-3 (tests/simulate/test_bsm1.py).
    """
    a, b = flux_above_g_m2_d, flux_below_g_m2_d
    width_sq = FLUX_RELATIVE_WIDTH**2 * (a**2 + b**2) + FLUX_WIDTH_FLOOR_g_m2_d**2
    lesser = 0.5 * (a + b - sqrt((a - b) ** 2 + width_sq))
    if tss_below_g_m3 is None:
        return lesser
    switch = smooth_step(tss_below_g_m3 - x_threshold_g_m3, THRESHOLD_RELATIVE_WIDTH * x_threshold_g_m3)
    return (1.0 - switch) * a + switch * lesser


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
