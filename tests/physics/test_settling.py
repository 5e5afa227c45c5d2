"""Settling velocity (Takacs et al. 1991), the Godunov flux between layers (Bürger et al. 2011) and the limiting
solids flux."""

import math

import numpy as np
import pyomo.environ as pyo
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq

from airtaper.physics.settling import (
    FLUX_RELATIVE_WIDTH, FLUX_WIDTH_FLOOR_g_m2_d, THRESHOLD_RELATIVE_WIDTH, flux_peak_tss_g_m3, gravity_flux_g_m2_d,
    interface_flux_g_m2_d, limiting_solids_flux_g_m2_d, receiving_flux_g_m2_d, sending_flux_g_m2_d,
    takacs_velocity_m_d,
)

# BSM1 settling parameters (Alex et al. 2008): v0' 250 m/d, v0 474 m/d, rh 5.76e-4, rp 2.86e-3 m3/g
BSM1 = dict(v0_max_m_d=250.0, v0_m_d=474.0, rh_m3_g=5.76e-4, rp_m3_g=2.86e-3)


def test_velocity_is_the_double_exponential_clamped():
    # Takacs et al. (1991) eq. 4 written out by hand
    x = np.array([0.0, 5.0, 100.0, 356.0, 3000.0, 10000.0])
    xmin = 7.5
    raw = 474.0 * (np.exp(-5.76e-4 * (x - xmin)) - np.exp(-2.86e-3 * (x - xmin)))
    np.testing.assert_allclose(takacs_velocity_m_d(x, xmin, **BSM1), np.clip(raw, 0.0, 250.0), rtol=1e-14)
    assert takacs_velocity_m_d(0.0, xmin, **BSM1) == 0.0  # below the non-settleable solids


def test_pyomo_and_numpy_give_the_same_velocity():
    m = pyo.ConcreteModel()
    m.x = pyo.Var(initialize=2000.0)
    expr = takacs_velocity_m_d(m.x, 7.5, **BSM1, smoothing_m_d=0.01)
    # away from the clamps the smoothing changes the velocity by far less than 0.01 m/d
    assert pyo.value(expr) == pytest.approx(float(takacs_velocity_m_d(2000.0, 7.5, **BSM1)), abs=1e-6)


def test_limiting_flux_is_the_stationary_point_of_the_total_flux():
    # For a pure exponential velocity vs = v0 exp(-rh X) (rp large, no clamp) the total flux
    # G = v0 X exp(-rh X) + u X has its minimum where dG/dX = v0 exp(-rh X)(1 - rh X) + u = 0
    # (solids flux theory, Ekama et al. 1997); found here with scipy's brentq.
    v0, rh, u = 400.0, 4e-4, 20.0
    kw = dict(v0_max_m_d=1e9, v0_m_d=v0, rh_m3_g=rh, rp_m3_g=50.0)
    # (its local minimum lies beyond rh X = 2, where dG/dX < 0)
    x_star = brentq(lambda x: v0 * np.exp(-rh * x) * (1.0 - rh * x) + u, 2.0 / rh, 20.0 / rh)
    g_star = v0 * x_star * np.exp(-rh * x_star) + u * x_star
    g, x = limiting_solids_flux_g_m2_d(u, 0.0, **kw, x_max_g_m3=60000.0)
    assert g == pytest.approx(g_star, rel=1e-5)
    assert x == pytest.approx(x_star, rel=2e-3)


def test_no_limit_when_the_underflow_velocity_dominates():
    # with u above the steepest fall of vs X the total flux only grows: nothing limits thickening
    g, x = limiting_solids_flux_g_m2_d(500.0, 0.0, v0_max_m_d=1e9, v0_m_d=400.0, rh_m3_g=4e-4, rp_m3_g=50.0)
    assert g == float("inf") and np.isnan(x)


def _takacs_by_hand(x, x_min, v0_max, v0, rh, rp):
    """Takacs, Patry & Nolasco (1991), Water Research 25(10):1263-1271, doi:10.1016/0043-1354(91)90066-Y,
    eq. 4, written with the math module: vs = max(0, min(v0', v0 (exp(-rh (X - Xmin)) - exp(-rp (X - Xmin)))))."""
    return max(0.0, min(v0_max, v0 * (math.exp(-rh * (x - x_min)) - math.exp(-rp * (x - x_min)))))


def test_velocity_with_the_bsm1_parameters_against_the_published_equation():
    # BSM1 settler (Alex et al. 2008, BSM1 description): v0' 250 m/d, v0 474 m/d, rh 0.000576 m3/g,
    # rp 0.00286 m3/g, fns 0.00228; the feed TSS of 3000 g/m3 is chosen for the test.
    x_min = 0.00228 * 3000.0
    xs = [0.0, x_min, 10.0, 50.0, 200.0, 500.0, 701.6, 1000.0, 3000.0, 6000.0, 12000.0]
    got = takacs_velocity_m_d(np.array(xs), x_min, **BSM1)
    want = [_takacs_by_hand(x, x_min, 250.0, 474.0, 0.000576, 0.00286) for x in xs]
    np.testing.assert_allclose(got, want, rtol=1e-13, atol=1e-12)
    # with these parameters the double exponential peaks above v0' (so the clamp acts): its maximum is at
    # X - Xmin = ln(rp / rh) / (rp - rh) (d vs / dX = 0), where it reaches about 252.7 m/d
    peak = math.log(0.00286 / 0.000576) / (0.00286 - 0.000576)
    raw_peak = 474.0 * (math.exp(-0.000576 * peak) - math.exp(-0.00286 * peak))
    assert raw_peak == pytest.approx(252.7, abs=0.1)
    assert float(takacs_velocity_m_d(x_min + peak, x_min, **BSM1)) == 250.0
    # the clamp holds on a band around the peak whose edges are where the raw curve crosses v0' (brentq)
    raw = lambda d: 474.0 * (math.exp(-0.000576 * d) - math.exp(-0.00286 * d)) - 250.0  # noqa: E731
    lo, hi = brentq(raw, 1.0, peak), brentq(raw, peak, 5000.0)
    assert float(takacs_velocity_m_d(x_min + lo - 1.0, x_min, **BSM1)) < 250.0
    assert float(takacs_velocity_m_d(x_min + 0.5 * (lo + hi), x_min, **BSM1)) == 250.0
    assert float(takacs_velocity_m_d(x_min + hi + 1.0, x_min, **BSM1)) < 250.0


def test_smooth_velocity_stays_within_the_smoothing_of_the_published_equation(pyomo_check):
    x_min, s = 0.00228 * 3000.0, 0.5
    xs = np.array([0.0, 3.0, 100.0, 650.0, 701.6, 2000.0, 9000.0])
    smooth = takacs_velocity_m_d(xs, x_min, **BSM1, smoothing_m_d=s)
    hard = np.array([_takacs_by_hand(x, x_min, 250.0, 474.0, 0.000576, 0.00286) for x in xs])
    assert np.all(np.abs(smooth - hard) <= s + 1e-12)  # two clamps, each at most s / 2 away
    pyomo_check(lambda x: takacs_velocity_m_d(x, x_min, **BSM1, smoothing_m_d=s), xs[:, None], rtol=1e-13)


@pytest.mark.parametrize("smoothing", [0.0, 0.01])
def test_velocity_is_finite_for_any_iterate(smoothing):
    # A root solve's Newton step may overshoot to solids far below 0: the velocity there is the clamp's
    # 0 (Takacs et al. 1991, eq. 4: below the non-settleable solids the double exponential is negative),
    # with no overflow and no NaN on the way (raised as errors here; underflow to 0 is exact enough).
    x = np.array([-1e12, -1e6, -3e5, -1e3, 0.0, 7.5, 1e3, 1e6, 1e12])
    with np.errstate(over="raise", invalid="raise", divide="raise"):
        v = takacs_velocity_m_d(x, 7.5, **BSM1, smoothing_m_d=smoothing)
    assert np.all(np.isfinite(v)) and np.all(v >= -smoothing) and np.all(v <= 250.0 + smoothing)
    np.testing.assert_allclose(v[:4], 0.0, atol=smoothing)


# --- the settling flux between two layers (Takacs et al. 1991 layered model), smoothed -----------------
def test_interface_flux_is_the_lesser_flux_within_its_relative_width(rng):
    # Takacs et al. (1991): J = min(a, b) at and below the feed. The smooth minimum lies below the exact
    # one by at most s / 2 with s = sqrt(eps^2 (a^2 + b^2) + s0^2) (CHKS bound), by
    # eps / sqrt(2) of the flux where a == b, and by less than s^2 / (4 |a - b|) away from the kink.
    a = rng.uniform(0.0, 2e5, 2000)
    b = np.concatenate([a[:500], rng.uniform(0.0, 2e5, 1500)])
    j = interface_flux_g_m2_d(a, b)
    s = np.sqrt(FLUX_RELATIVE_WIDTH**2 * (a**2 + b**2) + FLUX_WIDTH_FLOOR_g_m2_d**2)
    gap = np.minimum(a, b) - j
    assert np.all(gap > 0.0) and np.all(gap <= s / 2 * (1 + 1e-12))
    far = np.abs(a - b) > 10 * s
    assert np.all(gap[far] <= s[far] ** 2 / (4 * np.abs(a - b)[far]) * (1 + 1e-9))
    at_kink = 7.6e4 - math.sqrt(2 * (FLUX_RELATIVE_WIDTH * 7.6e4) ** 2 + FLUX_WIDTH_FLOOR_g_m2_d**2) / 2
    assert interface_flux_g_m2_d(7.6e4, 7.6e4) == pytest.approx(at_kink, rel=1e-14)
    assert at_kink == pytest.approx(7.6e4 * (1 - FLUX_RELATIVE_WIDTH / math.sqrt(2)), rel=1e-7)


def test_interface_flux_is_smooth_at_the_scale_of_the_fluxes():
    # The reason for a relative width: across the kink the slope turns from 1 to 0 over a band of
    # flux differences proportional to the fluxes (about eps of them), whatever their size, so a
    # Newton step's linear model holds over that band at any flux level. The fixed width used before
    # (1 g/(m2 d)) turned it over 1e-5 of BSM1's thickening fluxes.
    for flux in (1e4, 7.6e4, 1e6):  # (above the floor s0, which sets the width near zero flux)
        d = np.linspace(-0.05, 0.05, 2001) * flux
        slope = np.gradient(interface_flux_g_m2_d(flux + d, flux), d)  # d J / d a
        band = d[(slope > 0.1) & (slope < 0.9)]
        # slope 0.5 (1 - d / sqrt(d^2 + s^2)) is 0.1 / 0.9 at d = +-4 s / 3, s = sqrt(2) eps flux at a == b
        assert band.max() - band.min() == pytest.approx(8 / 3 * math.sqrt(2) * FLUX_RELATIVE_WIDTH * flux, rel=0.05)


def test_interface_flux_above_the_feed_switches_at_the_threshold():
    # Takacs et al. (1991): above the feed the upper layer's own flux while the layer below is under
    # X_t, the lesser flux once it is over (smooth switch THRESHOLD_RELATIVE_WIDTH x X_t wide)
    # (the thickening flux it hands over to is the Godunov flux of sending a and receiving b)
    xt = 3000.0
    a, b, own = 5e4, 2e4, 4.5e4
    below = interface_flux_g_m2_d(a, b, 0.8 * xt, xt, own)
    over = interface_flux_g_m2_d(a, b, 1.2 * xt, xt, own)
    assert below == pytest.approx(own, rel=1e-5)
    assert over == pytest.approx(interface_flux_g_m2_d(a, b), rel=1e-5)
    assert interface_flux_g_m2_d(a, b, xt, xt, own) == pytest.approx(0.5 * (own + interface_flux_g_m2_d(a, b)),
                                                                     rel=1e-12)
    w = THRESHOLD_RELATIVE_WIDTH * xt
    mid = interface_flux_g_m2_d(a, b, xt + w, xt, own)  # step(w, w) = (1 + 1 / sqrt 2) / 2
    frac = 0.5 * (1 + 1 / math.sqrt(2))
    assert mid == pytest.approx((1 - frac) * own + frac * interface_flux_g_m2_d(a, b), rel=1e-12)
    with pytest.raises(ValueError, match="flux_above"):
        interface_flux_g_m2_d(a, b, xt, xt)


def test_layer_fluxes_agree_between_pyomo_and_numpy(pyomo_check):
    # the model and the simulator evaluate these very functions (one formula for both)
    x_min, xt = 0.00228 * 3000.0, 3000.0
    pts = np.array([[356.0, 356.0, 3100.0], [356.0, 6394.0, 2999.0], [12.5, 18.1, 18.1], [800.0, 50.0, 50.0]])
    kw = dict(v0_max_m_d=250.0, v0_m_d=474.0, rh_m3_g=5.76e-4, rp_m3_g=2.86e-3)

    def below(x1, x2, xf):
        lo = 0.00228 * xf
        xm = flux_peak_tss_g_m3(lo, **kw)
        return interface_flux_g_m2_d(sending_flux_g_m2_d(x1, lo, xm, **kw), receiving_flux_g_m2_d(x2, lo, xm, **kw))

    def above(x1, x2, xf):
        lo = 0.00228 * xf
        xm = flux_peak_tss_g_m3(lo, **kw)
        return interface_flux_g_m2_d(sending_flux_g_m2_d(x1, lo, xm, **kw), receiving_flux_g_m2_d(x2, lo, xm, **kw),
                                     x2, xt, gravity_flux_g_m2_d(x1, lo, **kw))

    pyomo_check(below, pts, rtol=1e-12)
    pyomo_check(above, pts, rtol=1e-12)
    pyomo_check(lambda lo: flux_peak_tss_g_m3(lo, **kw), pts[:, 2:] * 0.00228, rtol=1e-13)
    # the gravity flux is the published velocity (Takacs et al. 1991 eq. 4) times the solids, to the
    # velocity smoothing (0.01 m/d) away from its clamps
    x = np.array([12.5, 356.0, 3000.0, 6394.0])
    hard = np.array([_takacs_by_hand(v, x_min, 250.0, 474.0, 0.000576, 0.00286) for v in x]) * x
    np.testing.assert_allclose(gravity_flux_g_m2_d(x, x_min, **kw), hard, rtol=1e-5)


# --- the Godunov flux between layers (Bürger, Diehl & Nopens 2011, Water Research 45(6) 2247-2260) -----------
def _hard_flux(x, x_min, v0_max, v0, rh, rp):
    """vs(X) X with the hard clamp (Takacs et al. 1991, eq. 4)."""
    return takacs_velocity_m_d(x, x_min, v0_max, v0, rh, rp) * x


_SETTLING_PARAMETERS = dict(
    v0_max=st.floats(100.0, 400.0), v0=st.floats(200.0, 1000.0), rh=st.floats(2e-4, 1.2e-3),
    rp_over_rh=st.floats(1.5, 20.0), x_min=st.floats(0.0, 60.0),
)


@settings(max_examples=40, deadline=None)
@given(**_SETTLING_PARAMETERS)
def test_flux_peak_is_where_the_gravity_flux_is_largest(v0_max, v0, rh, rp_over_rh, x_min):
    # X_M maximises f(X) = vs(X) X (definition); checked against a 0.05 g/m3 grid of the hard-clamped
    # flux, for parameters where the clamp at v0' hides the unclamped maximum and where it does not
    rp = rh * rp_over_rh
    x = np.arange(x_min, x_min + 12.0 / rh, 0.05)
    f = _hard_flux(x, x_min, v0_max, v0, rh, rp)
    x_peak = float(flux_peak_tss_g_m3(x_min, v0_max, v0, rh, rp))
    f_peak = float(_hard_flux(x_peak, x_min, v0_max, v0, rh, rp))
    # no grid point carries more, to within what X_M's one chord step in Xmin and the smooth maximum with
    # the clamp's end (width 1e-3 x_c) cost (measured <= 1.2e-6 of the flux over 300 draws of these
    # ranges); an X_M 1 % off a flat maximum costs ~5e-5
    assert f_peak >= f.max() * (1 - 5e-6)
    assert x_peak == pytest.approx(x[np.argmax(f)], rel=2e-3)


@settings(max_examples=60, deadline=None)
@given(a=st.floats(0.0, 12000.0), b=st.floats(0.0, 12000.0), x_min=st.floats(0.0, 30.0))
def test_interface_flux_is_the_godunov_flux_of_the_gravity_flux(a, b, x_min):
    # Godunov's numerical flux of f from the upper layer (a) to the lower (b): the least of f over [a, b] when
    # a <= b, the largest over [b, a] when a > b (Bürger, Diehl & Nopens 2011, eq. for the numerical flux;
    # the general definition, e.g. LeVeque 2002, Finite Volume Methods for Hyperbolic Problems, eq. 12.4, from
    # memory). Checked against f on a fine grid of the interval; the smoothing keeps it within the outer
    # smooth minimum's half width s / 2 (and the velocity smoothing). Takacs' min(f(a), f(b)) fails
    # this wherever a > b straddle the maximum (e.g. a = 2000, b = 300 g/m3: f(300) against f(X_M)).
    kw = dict(v0_max_m_d=250.0, v0_m_d=474.0, rh_m3_g=5.76e-4, rp_m3_g=2.86e-3)  # BSM1, Alex et al. (2008)
    xm = flux_peak_tss_g_m3(x_min, **kw)
    send = sending_flux_g_m2_d(a, x_min, xm, **kw)
    take = receiving_flux_g_m2_d(b, x_min, xm, **kw)
    j = float(interface_flux_g_m2_d(send, take))
    grid = np.linspace(min(a, b), max(a, b), 4001)
    f = gravity_flux_g_m2_d(grid, x_min, **kw)
    exact = f.min() if a <= b else f.max()
    s = math.sqrt(FLUX_RELATIVE_WIDTH**2 * (send**2 + take**2) + FLUX_WIDTH_FLOOR_g_m2_d**2)
    assert exact - s / 2 - 1e-6 * exact <= j <= exact + 1e-6 * exact + 1e-9


def test_interface_flux_has_no_kink_between_layers_below_the_flux_peak():
    # The cause of a zig-zag profile between the feed and the blanket (layers at 271/250/277/250 g/m3): with
    # Takacs' min(f(a), f(b)) the flux's slope in the upper layer's solids jumped from f'(a) to 0 where a
    # passed b. The Godunov flux there is the upper layer's own flux: its slope is f'(a) on both sides
    # and the lower layer's solids do not enter (definition, see above).
    kw = dict(v0_max_m_d=250.0, v0_m_d=474.0, rh_m3_g=5.76e-4, rp_m3_g=2.86e-3)  # BSM1, Alex et al. (2008)
    x_min, b, d = 7.0, 260.0, 1e-3
    xm = flux_peak_tss_g_m3(x_min, **kw)

    def flux(a, b):
        return interface_flux_g_m2_d(sending_flux_g_m2_d(a, x_min, xm, **kw), receiving_flux_g_m2_d(b, x_min, xm, **kw))

    a = np.linspace(0.9 * b, 1.1 * b, 201)
    d_da = (flux(a + d, b) - flux(a - d, b)) / (2 * d)
    d_db = (flux(a, b + d) - flux(a, b - d)) / (2 * d)
    df = (gravity_flux_g_m2_d(a + d, x_min, **kw) - gravity_flux_g_m2_d(a - d, x_min, **kw)) / (2 * d)
    np.testing.assert_allclose(d_da, df, rtol=1e-3)
    assert np.all(np.abs(d_db) < 1e-3 * df)
