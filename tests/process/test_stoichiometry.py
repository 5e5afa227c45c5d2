"""The ASM1 Petersen matrix: entries and exact COD / N conservation."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from airtaper.process import asm1
from airtaper.process.stoichiometry import (
    IDX, cod_composition, cod_of_n2, n2_yield, n_composition, petersen_matrix,
)


def test_matrix_entries_match_henze_table():
    # Henze et al. (1987) Table 6.1
    p = asm1.ASM1_20C
    nu = petersen_matrix(p)
    assert nu.shape == (8, 13)
    assert nu[0, IDX["SO"]] == pytest.approx(-(1 - p.Y_H) / p.Y_H)
    assert nu[1, IDX["SNO"]] == pytest.approx(-(1 - p.Y_H) / (2.86 * p.Y_H))
    assert nu[2, IDX["SO"]] == pytest.approx(-(4.57 - p.Y_A) / p.Y_A)
    assert nu[2, IDX["SALK"]] == pytest.approx(-p.i_XB / 14 - 1 / (7 * p.Y_A))
    assert nu[3, IDX["XND"]] == pytest.approx(p.i_XB - p.f_P * p.i_XP)
    assert nu[5, IDX["SALK"]] == pytest.approx(1 / 14)
    assert nu[6, IDX["SS"]] == 1 and nu[6, IDX["XS"]] == -1


@settings(max_examples=50, deadline=None)
@given(yh=st.floats(0.3, 0.9), ya=st.floats(0.05, 0.5), fp=st.floats(0.0, 0.3),
       ixb=st.floats(0.02, 0.12), ixp=st.floats(0.0, 0.1))
def test_every_process_conserves_cod_and_n(yh, ya, fp, ixb, ixp):
    import dataclasses
    p = dataclasses.replace(asm1.ASM1_20C, Y_H=yh, Y_A=ya, f_P=fp, i_XB=ixb, i_XP=ixp)
    nu = petersen_matrix(p)
    n2 = n2_yield(p)
    np.testing.assert_allclose(nu @ cod_composition(p) + n2 * cod_of_n2(p), 0.0, atol=1e-12)
    np.testing.assert_allclose(nu @ n_composition(p) + n2, 0.0, atol=1e-12)
