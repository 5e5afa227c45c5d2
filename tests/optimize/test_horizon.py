"""A layout mapped onto another diurnal grid keeps its daily volumes and loads (no solver)."""

from __future__ import annotations

import numpy as np
import pytest

from airtaper.errors import ModelError
from airtaper.optimize.horizon import with_periods


def _daily(lay):
    h = lay.horizon.period_h
    q = np.asarray(lay.influent.flow_m3_d)
    return (q * h).sum(), (q * np.asarray(lay.influent.nh4_mg_L) * h).sum(), np.mean(lay.tariff.price_per_kWh)


@pytest.mark.parametrize("n", [6, 12, 48, 96])
def test_daily_volume_and_load_are_kept(demo, n):
    new = with_periods(demo, n)
    assert new.horizon.n_periods == n and new.horizon.period_h == pytest.approx(24.0 / n)
    assert len(new.plant.temperature_C) == n and len(new.inlet_air.temperature_C) == n
    assert len(new.recycles[0].flow_m3_d) == n and len(new.return_sludge.flow_m3_d) == n
    for a, b in zip(_daily(demo), _daily(new)):
        assert b == pytest.approx(a, rel=1e-12)


@pytest.mark.parametrize("n", [6, 48])
def test_load_days_follow_the_grid(demo, n):
    from airtaper.layout.loaddays import day_layout
    new = with_periods(demo, n)
    assert [d.id for d in new.load_days] == [d.id for d in demo.load_days]
    for day_old, day_new in zip(demo.load_days, new.load_days):
        one = day_layout(new, day_new)  # a day of the mapped layout is the mapped day of the layout
        ref = with_periods(day_layout(demo, day_old), n)
        assert one.plant.temperature_C == pytest.approx(ref.plant.temperature_C)
        assert one.inlet_air.temperature_C == pytest.approx(ref.inlet_air.temperature_C)
        for a, b in zip(_daily(one), _daily(ref)):
            assert a == pytest.approx(b, rel=1e-12)


def test_grids_that_do_not_nest_are_refused(demo):
    with pytest.raises(ModelError):
        with_periods(demo, 7)
