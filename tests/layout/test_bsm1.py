"""The BSM1 layout factory carries the published plant (Alex et al. 2008)."""

import pytest

from airtaper.layout.bsm1 import bsm1_layout


def test_bsm1_plant_values():
    # Alex et al. (2008) section 2.3: volumes, KLa, fixed saturation, flows; 15 C set, no correction
    lay = bsm1_layout()
    assert [z.volume_m3 for z in lay.zones] == [1000, 1000, 1333, 1333, 1333]
    assert [z.fixed_kla_per_d for z in lay.zones] == [None, None, 240, 240, 84]
    assert all(z.fixed_do_sat_mg_L == 8.0 for z in lay.zones[2:])
    assert lay.influent.flow_m3_d[0] == 18446 and lay.recycles[0].flow_m3_d[0] == 55338
    assert lay.return_sludge.flow_m3_d[0] == 18446 and lay.wasting.flow_m3_d[0] == 385
    assert lay.kinetics.parameter_set == "bsm1_15C" and not lay.kinetics.temperature_correction
    c = lay.clarifier
    assert (c.kind, c.area_m2, c.height_m, c.layers, c.feed_layer) == ("layered", 1500, 4, 10, 5)
    assert c.settling.v0_max_m_d == 250 and c.settling.x_threshold_g_m3 == 3000


def test_bsm1_ideal_and_bad_kind():
    assert bsm1_layout("ideal").clarifier.kind == "ideal"
    with pytest.raises(ValueError):
        bsm1_layout("round")


def test_bsm1_layout_round_trips_through_the_parser(tmp_path):
    """The factory's Layout passes the same boundary checks as a file would."""
    from airtaper.layout import layout_to_data, parse_layout
    from airtaper.layout.bsm1 import bsm1_layout

    for kind in ("layered", "ideal"):
        built = bsm1_layout(clarifier=kind)
        back = parse_layout(layout_to_data(built), path="<bsm1>", base_dir=tmp_path)
        assert back == built
