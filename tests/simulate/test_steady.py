"""The steady-state root solve on trains it used to cycle on."""

import dataclasses

import numpy as np
import pytest

from airtaper import simulate
from airtaper.layout import load_layout
from airtaper.layout.types import DiffuserGrid


def _split_aerated(layout, n: int):
    """The layout with its aerated volume in ``n`` equal zones, diffusers tapered 1.6 : 0.6 along the train."""
    head, aerated = layout.zones[0], layout.zones[1:]
    vol = sum(z.volume_m3 for z in aerated) / n
    taper = np.linspace(1.6, 0.6, n)
    counts = np.maximum(np.round(sum(z.grid.count for z in aerated) * taper / taper.sum()), 1).astype(int)
    p = aerated[0]
    zones = (head,) + tuple(
        dataclasses.replace(p, id=f"S{i + 1}", volume_m3=vol, area_m2=vol / p.depth_m, valve_capacity_Sm3_h=None,
                            do_max_mg_L=None, grid=DiffuserGrid(p.grid.type_id, int(c), p.grid.submergence_m))
        for i, c in enumerate(counts))
    recycles = (dataclasses.replace(layout.recycles[0], from_zone=zones[-1].id),)
    return dataclasses.replace(layout, zones=zones, recycles=recycles)


@pytest.mark.parametrize("n", [10, 20])
def test_finely_split_train_reaches_a_steady_state_holding_the_setpoint(n):
    # Before the line search the Newton phase cycled here between a last zone clamped at its smallest
    # kLa and an unclamped one (scaled residual stuck at 358 /d for 10 zones, 900 /d for 20).
    layout = _split_aerated(load_layout("layouts/demo.toml"), n)
    r = simulate.steady_state(layout, do_setpoint_mg_L=2.0)
    assert r.residual < 1e-10
    # COD (ThOD) and N closure at steady state (ASM1 stoichiometry, Henze et al. 1987)
    assert abs(r.balance["cod_net"]) / r.balance["cod_in"] < 1e-6
    assert abs(r.balance["n_net"]) / r.balance["n_in"] < 1e-6
    aerated = [z.kind == "aerated" for z in layout.zones]
    np.testing.assert_allclose(r.zones.loc[aerated, "SO"], 2.0, atol=1e-6)
    for z, q in zip(layout.zones, r.zones["airflow_Sm3_h"]):
        if z.kind == "aerated":
            lo, hi = layout.zone_airflow_range_Sm3_h(z)
            assert lo - 1e-6 <= q <= hi + 1e-6
    assert r.srt_d == pytest.approx(layout.wasting.srt_d, rel=1e-9)


def test_finely_split_train_at_fixed_airflow():
    layout = _split_aerated(load_layout("layouts/demo.toml"), 10)
    r = simulate.steady_state(layout, airflow_Sm3_h={z.id: 400.0 for z in layout.zones[1:]})
    assert r.residual < 1e-10
    assert abs(r.balance["cod_net"]) / r.balance["cod_in"] < 1e-6
    assert abs(r.balance["n_net"]) / r.balance["n_in"] < 1e-6
    np.testing.assert_allclose(r.zones["airflow_Sm3_h"].iloc[1:], 400.0)
