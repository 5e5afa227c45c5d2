"""Compliance figures, the verification rule and their wording (no solver)."""

from __future__ import annotations

import numpy as np
import pytest

from airtaper.optimize.compliance import DO_TOLERANCE_mg_L, EFFLUENT_TOLERANCE, day_figures, do_limits, violations


def test_flow_weighted_means_and_period_maxima(three_tank_6):
    lay = three_tank_6
    nh4 = np.array([1.0, 1.0, 3.0, 3.0, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 2.0, 4.0])
    q = np.array([1.0, 1.0, 3.0, 3.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0])
    per = np.repeat(np.arange(6), 2)
    do = {z.id: np.full(12, 0.8) for z in lay.zones}
    do["T2"][5] = 0.45
    f = day_figures(lay, nh4, nh4 * 10.0, q, per, do)
    # hand-computed: sum(q nh4) / sum(q) = (1 + 1 + 9 + 9 + 6 x 0.5 + 2 + 4) / 16
    assert f["nh4_mean_mg_L"] == pytest.approx(29.0 / 16.0)
    assert f["tn_mean_mg_L"] == pytest.approx(290.0 / 16.0)
    assert f["nh4_max_mg_L"] == pytest.approx(3.0)
    assert f["nh4_max_period"] == 1
    assert f["nh4_period_mean_mg_L"][5] == pytest.approx(3.0)
    assert f["do_margin_mg_L"]["T1"] == pytest.approx(0.3)  # default DO minimum 0.5
    assert f["min_do_margin_mg_L"] == pytest.approx(-0.05)


def test_violation_rule_has_the_stated_tolerances(three_tank_6):
    lay = three_tank_6
    limit = lay.limits.nh4_mean_mg_L
    base = {"nh4_mean_mg_L": limit, "nh4_max_mg_L": 0.0, "tn_mean_mg_L": 0.0, "do_margin_mg_L": {"T1": 0.0}}
    assert violations(lay, base, effluent_tolerance=EFFLUENT_TOLERANCE) == []
    just_in = dict(base, nh4_mean_mg_L=limit * (1 + 0.99 * EFFLUENT_TOLERANCE))
    assert violations(lay, just_in, effluent_tolerance=EFFLUENT_TOLERANCE) == []
    out = dict(base, nh4_mean_mg_L=limit * (1 + 1.01 * EFFLUENT_TOLERANCE))
    broken = violations(lay, out, effluent_tolerance=EFFLUENT_TOLERANCE)
    assert len(broken) == 1 and "daily mean" in broken[0] and "2.0 %" in broken[0]
    do_short = dict(base, do_margin_mg_L={"T1": -1.01 * DO_TOLERANCE_mg_L})
    assert "zone T1" in violations(lay, do_short, do_tolerance_mg_L=DO_TOLERANCE_mg_L)[0]
    assert violations(lay, dict(base, do_margin_mg_L={"T1": -0.99 * DO_TOLERANCE_mg_L}),
                      do_tolerance_mg_L=DO_TOLERANCE_mg_L) == []


def test_do_limits_cover_aerated_diffused_zones_only(demo):
    lim = do_limits(demo)
    assert "Z1" not in lim  # anoxic
    assert lim["Z6"] == (1.0, 2.5)
    assert lim["Z2"] == (1.0, None)

