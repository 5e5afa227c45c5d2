"""ASM1 parameter sets, overrides and temperature correction."""

import math

import pytest

from airtaper.errors import InputError
from airtaper.process import asm1


def test_asm1_20c_typical_values():
    # Henze et al. (1987), IAWPRC STR No. 1, typical values at 20 C
    p = asm1.ASM1_20C
    expected = dict(mu_H=6.0, K_S=20.0, K_OH=0.20, K_NO=0.50, b_H=0.62, eta_g=0.8, eta_h=0.4, k_h=3.0,
                    K_X=0.03, mu_A=0.80, K_NH=1.0, K_OA=0.4, k_a=0.08, Y_H=0.67, Y_A=0.24, f_P=0.08,
                    i_XB=0.086, i_XP=0.06)
    for k, v in expected.items():
        assert getattr(p, k) == v, k
    assert p.reference_temperature_C == 20.0


def test_bsm1_15c_values():
    # Alex et al. (2008), BSM1 biological parameter values at 15 C
    p = asm1.BSM1_15C
    expected = dict(mu_H=4.0, K_S=10.0, K_OH=0.2, K_NO=0.5, b_H=0.3, eta_g=0.8, eta_h=0.8, k_h=3.0, K_X=0.1,
                    mu_A=0.5, K_NH=1.0, b_A=0.05, K_OA=0.4, k_a=0.05, Y_H=0.67, Y_A=0.24, f_P=0.08,
                    i_XB=0.08, i_XP=0.06)
    for k, v in expected.items():
        assert getattr(p, k) == v, k


def test_named_sets_by_name_and_unknown_name():
    assert asm1.parameter_set("bsm1_15C") is asm1.BSM1_15C
    assert asm1.parameter_set("asm1_20C") is asm1.ASM1_20C
    with pytest.raises(InputError) as err:
        asm1.parameter_set("asm9", "x.toml")
    assert err.value.problems[0].key == "kinetics.parameter_set"


def test_overrides_apply_and_report_every_problem():
    p = asm1.with_overrides(asm1.ASM1_20C, [("b_A", 0.1), ("mu_A", 0.9)])
    assert p.b_A == 0.1 and p.mu_A == 0.9 and p.mu_H == 6.0
    with pytest.raises(InputError) as err:
        asm1.with_overrides(asm1.ASM1_20C, [("nope", 1.0), ("Y_H", 1.5), ("mu_H", -1.0), ("K_S", "x")])
    assert len(err.value.problems) == 4


def test_temperature_correction_at_reference_is_identity():
    assert asm1.at_temperature(asm1.BSM1_15C, 15.0) is asm1.BSM1_15C


def test_temperature_correction_reproduces_source_pairs():
    # Henze et al. (1987) 10 C values (from memory): mu_H 3.0, b_H 0.20, mu_A 0.30, k_a 0.04
    p10 = asm1.at_temperature(asm1.ASM1_20C, 10.0)
    assert p10.mu_H == pytest.approx(3.0)
    assert p10.b_H == pytest.approx(0.20)
    assert p10.mu_A == pytest.approx(0.30)
    assert p10.k_a == pytest.approx(0.04)
    assert p10.K_S == asm1.ASM1_20C.K_S  # half-saturation of substrate not corrected
    # BSM2 temperature dependence (Gernaey et al. 2014, from memory): mu_H 3.0 and b_A 0.03 at 10 C
    b10 = asm1.at_temperature(asm1.BSM1_15C, 10.0)
    assert b10.mu_H == pytest.approx(3.0)
    assert b10.b_A == pytest.approx(0.03)
    # Arrhenius-type: exponential in temperature
    b20 = asm1.at_temperature(asm1.BSM1_15C, 20.0)
    assert b20.mu_H == pytest.approx(4.0 ** 2 / 3.0)
    assert math.log(b20.mu_A / 0.5) == pytest.approx(math.log(0.5 / 0.3))
