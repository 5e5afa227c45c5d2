"""The verification's own rules that need no solve: which periods hold a swing zone's DO minimum."""

from __future__ import annotations

import numpy as np
import pytest

from airtaper.optimize.compliance import DO_TOLERANCE_mg_L
from airtaper.optimize.verify import swing_do_margins


def test_swing_zone_do_minimum_is_checked_only_while_aerated_after_an_aerated_period(fenwhistle):
    lo = fenwhistle.zone("Z2").do_min_mg_L  # 0.5 mg/L (layouts/fenwhistle.toml)
    on = np.array([False, True, True, True, False, False])
    lows = {"Z2": np.array([0.0, 0.0, lo + 0.2, lo - 0.1, 0.0, 0.0])}  # switch-on period 2 rises from nothing
    margin, periods = swing_do_margins(fenwhistle, lows, {"Z2": on})["Z2"]
    assert margin == pytest.approx(-0.1) and periods == [4]
    lows["Z2"][3] = lo - 0.5 * DO_TOLERANCE_mg_L  # within the tolerance: listed as a margin, not a breach
    margin, periods = swing_do_margins(fenwhistle, lows, {"Z2": on})["Z2"]
    assert margin == pytest.approx(-0.5 * DO_TOLERANCE_mg_L) and periods == []
    # never aerated after an aerated period, or no swing states at all: nothing to check
    assert swing_do_margins(fenwhistle, lows, {"Z2": np.array([True, False] * 3)}) == {}
    assert swing_do_margins(fenwhistle, lows, None) == {}
