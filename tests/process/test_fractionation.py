"""Influent fractionation: the split and its inverse."""

import dataclasses

import numpy as np
import pytest

from airtaper.errors import InputError
from airtaper.layout.bsm1 import BSM1_INFLUENT, bsm1_layout
from airtaper.layout.types import ASM1_COMPONENTS
from airtaper.process import asm1
from airtaper.process.fractionation import influent_components, measured_quantities


def test_asm1_values_used_directly():
    lay = bsm1_layout(n_periods=3)
    c = influent_components(lay.influent, asm1.BSM1_15C)
    assert c.shape == (3, 13)
    assert list(c[0]) == [BSM1_INFLUENT[k] for k in ASM1_COMPONENTS]


def test_split_of_measured_quantities_inverts_to_the_components():
    # the BSM1 influent's own measured quantities, split again with its fractions, give it back
    # (Henze et al. 1987 COD/TKN split; the BSM1 influent of Alex et al. 2008)
    lay = bsm1_layout(n_periods=2)
    infl = dataclasses.replace(lay.influent, asm1_mg_L=None)
    c = influent_components(infl, asm1.BSM1_15C)
    ref = np.array([BSM1_INFLUENT[k] for k in ASM1_COMPONENTS])
    np.testing.assert_allclose(c[0], ref, rtol=1e-12, atol=1e-12)
    m = measured_quantities(c, asm1.BSM1_15C)
    assert m["cod_total_mg_L"][0] == pytest.approx(infl.cod_total_mg_L[0])
    assert m["tkn_mg_L"][0] == pytest.approx(infl.tkn_mg_L[0])
    assert m["tss_mg_L"][0] == pytest.approx(0.75 * (51.2 + 202.32 + 28.17))


def test_inconsistent_measurements_are_input_errors():
    lay = bsm1_layout(n_periods=2)
    infl = dataclasses.replace(lay.influent, asm1_mg_L=None, cod_soluble_mg_L=(10.0, 99.5), tkn_mg_L=(54.4, 20.0))
    with pytest.raises(InputError) as err:
        influent_components(infl, asm1.BSM1_15C, "plant.toml")
    keys = [p.key for p in err.value.problems]
    assert "influent.cod_soluble_mg_L, period 1" in keys and "influent.tkn_mg_L, period 2" in keys
