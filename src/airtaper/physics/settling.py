"""Settling of activated sludge: the double-exponential velocity and the limiting solids flux.

Written once for floats, numpy arrays and (the velocity) Pyomo expressions
(:mod:`airtaper.physics.backend`): the simulator's layered clarifier, the Pyomo
model's and the overload check all use these functions.

References
----------
Takacs, I., Patry, G.G., Nolasco, D. (1991). A dynamic model of the
clarification-thickening process. Water Research 25(10), 1263-1271,
doi:10.1016/0043-1354(91)90066-Y (double-exponential settling velocity, eq. 4).
Ekama, G.A., Barnard, J.L., Guenthert, F.W., Krebs, P., McCorquodale, J.A.,
Parker, D.S., Wahlberg, E.J. (1997). Secondary Settling Tanks: Theory, Modelling,
Design and Operation. IAWQ Scientific and Technical Report No. 6 (solids flux
theory: the limiting flux of the thickening zone; from memory).
"""

from __future__ import annotations

import numpy as np

from airtaper.physics.backend import exp, is_pyomo
from airtaper.physics.smooth import smooth_max


#: Largest exponent the velocity evaluates for numbers (e**40 ~ 2e17: finite, and its square too).
_EXPONENT_FLOOR = 40.0


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
