"""ASM1 kinetic and stoichiometric parameter values: named sets, overrides, temperature correction.

Values only: the rate expressions live in the model (Pyomo) and in the
independent simulator, each written on its own. Rates are per day, concentrations
in g/m3 (COD, N or O2 as named by the component), alkalinity in mol/m3.

Named sets (module-level objects, also reachable by name through
:data:`PARAMETER_SETS`):

* :data:`ASM1_20C` -- typical values at neutral pH and 20 degC of Henze et al.
  (1987), the original ASM1 report.
* :data:`BSM1_15C` -- the parameter set of the IWA Benchmark Simulation Model
  no. 1 at 15 degC (Alex et al. 2008; Copp 2002).

Temperature correction is Arrhenius-type, ``k(T) = k_ref theta**(T - T_ref)``,
applied to the rate parameters and KX only (:func:`at_temperature`); the theta of
each set is derived from two published values of the same parameter at two
temperatures (see the sets' docstrings).

References
----------
Henze, M., Grady, C.P.L. Jr, Gujer, W., Marais, G.v.R., Matsuo, T. (1987).
Activated Sludge Model No. 1. IAWPRC Scientific and Technical Report No. 1.
Henze, M., Gujer, W., Mino, T., van Loosdrecht, M. (2000). Activated Sludge
Models ASM1, ASM2, ASM2d and ASM3. IWA Scientific and Technical Report No. 9.
Alex, J. et al. (2008). Benchmark Simulation Model no. 1 (BSM1). IWA Task Group
on Benchmarking of Control Strategies for WWTPs.
Copp, J.B. (ed.) (2002). The COST Simulation Benchmark: Description and
Simulator Manual. COST Action 624 & 682.
Gernaey, K.V., Jeppsson, U., Vanrolleghem, P.A., Copp, J.B. (eds.) (2014).
Benchmarking of Control Strategies for Wastewater Treatment Plants. IWA
Scientific and Technical Report No. 23 (BSM2 temperature dependence).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Mapping

from airtaper.errors import InputError, Problem

#: Parameters that the temperature correction changes (rates and KX).
TEMPERATURE_DEPENDENT: tuple[str, ...] = ("mu_H", "b_H", "k_h", "K_X", "mu_A", "b_A", "k_a")


@dataclass(frozen=True)
class ASM1Parameters:
    """One complete ASM1 parameter set.

    Kinetic parameters (rates per day, half-saturation constants in g/m3 of
    the substrate they refer to):

    mu_H, K_S, K_OH, K_NO, b_H, eta_g, eta_h, k_h, K_X (g XS / g XBH),
    mu_A, K_NH, b_A, K_OA, k_a (m3 / (g COD d)).

    Stoichiometric parameters: Y_H, Y_A (g COD / g COD or g N), f_P, i_XB and
    i_XP (g N / g COD).

    Electron-acceptor constants of the ASM1 matrix (Henze et al. 1987):
    ``cod_per_no3_n`` = 4.57 g O2 per g nitrate-N formed from ammonia (64/14
    rounded) and ``cod_per_no3_n_denit`` = 2.86 g COD per g nitrate-N reduced
    to N2 (40/14 rounded). Keeping them as parameters lets the COD balance of
    :mod:`airtaper.process.stoichiometry` close exactly with the rounded values.

    ``reference_temperature_C`` is the temperature the values hold at;
    ``theta`` the Arrhenius-type factor per degC of each temperature-dependent
    parameter (see :func:`at_temperature`).
    """

    name: str
    reference_temperature_C: float
    mu_H: float
    K_S: float
    K_OH: float
    K_NO: float
    b_H: float
    eta_g: float
    eta_h: float
    k_h: float
    K_X: float
    mu_A: float
    K_NH: float
    b_A: float
    K_OA: float
    k_a: float
    Y_H: float
    Y_A: float
    f_P: float
    i_XB: float
    i_XP: float
    cod_per_no3_n: float = 4.57
    cod_per_no3_n_denit: float = 2.86
    theta: Mapping[str, float] = field(default_factory=dict)
    source: str = ""


#: Names that a layout's ``kinetics`` overrides may set.
PARAMETER_NAMES: tuple[str, ...] = tuple(
    f.name for f in dataclasses.fields(ASM1Parameters) if f.name not in ("name", "theta", "source")
)


def _theta(value_hi: float, value_lo: float, delta_C: float) -> float:
    """Arrhenius-type factor from two values delta_C degrees apart."""
    return math.exp(math.log(value_hi / value_lo) / delta_C)


# Henze et al. (1987) list typical values at 20 and at 10 degC; the factor per
# degC follows from the pair (from memory of that table): mu_H 6.0/3.0,
# b_H 0.62/0.20, k_h 3.0/1.0, K_X 0.03/0.01, mu_A 0.80/0.30, k_a 0.08/0.04.
# The table gives no 10 degC value for b_A; airtaper uses the autotrophic
# growth factor for it (an assumption, stated here).
_THETA_HENZE = MappingProxyType({
    "mu_H": _theta(6.0, 3.0, 10.0),
    "b_H": _theta(0.62, 0.20, 10.0),
    "k_h": _theta(3.0, 1.0, 10.0),
    "K_X": _theta(0.03, 0.01, 10.0),
    "mu_A": _theta(0.80, 0.30, 10.0),
    "b_A": _theta(0.80, 0.30, 10.0),
    "k_a": _theta(0.08, 0.04, 10.0),
})

ASM1_20C = ASM1Parameters(
    name="asm1_20C",
    reference_temperature_C=20.0,
    mu_H=6.0, K_S=20.0, K_OH=0.20, K_NO=0.50, b_H=0.62, eta_g=0.8, eta_h=0.4,
    k_h=3.0, K_X=0.03, mu_A=0.80, K_NH=1.0, b_A=0.15, K_OA=0.4, k_a=0.08,
    Y_H=0.67, Y_A=0.24, f_P=0.08, i_XB=0.086, i_XP=0.06,
    theta=_THETA_HENZE,
    source="Henze et al. (1987), IAWPRC STR No. 1, typical values at neutral pH and 20 degC; "
           "b_A = 0.15 /d is from memory (published 20 degC values range 0.10-0.20 /d): "
           "override it in the layout when a measured value is known",
)
"""ASM1 typical values at 20 degC (Henze et al. 1987).

mu_H 6.0 /d, K_S 20, K_OH 0.20, K_NO 0.50, b_H 0.62 /d, eta_g 0.8, eta_h 0.4,
k_h 3.0 /d, K_X 0.03, mu_A 0.80 /d, K_NH 1.0, K_OA 0.4, k_a 0.08 m3/(g d),
Y_H 0.67, Y_A 0.24, f_P 0.08, i_XB 0.086, i_XP 0.06. b_A 0.15 /d is from
memory: the 20 degC values in the literature range 0.10-0.20 /d.
Temperature factors from the 20/10 degC pairs of the same report.
"""

# BSM2 (Gernaey et al. 2014) extends the BSM1 set to other temperatures with
# k(T) = k15 exp(ln(k15/k10)/5 (T - 15)), from these 15 and 10 degC values
# (from memory): mu_H 4.0/3.0, b_H 0.3/0.2, mu_A 0.5/0.3, b_A 0.05/0.03,
# k_a 0.05/0.04, k_h 3.0/2.5, K_X 0.1/0.075.
_THETA_BSM = MappingProxyType({
    "mu_H": _theta(4.0, 3.0, 5.0),
    "b_H": _theta(0.3, 0.2, 5.0),
    "k_h": _theta(3.0, 2.5, 5.0),
    "K_X": _theta(0.1, 0.075, 5.0),
    "mu_A": _theta(0.5, 0.3, 5.0),
    "b_A": _theta(0.05, 0.03, 5.0),
    "k_a": _theta(0.05, 0.04, 5.0),
})

BSM1_15C = ASM1Parameters(
    name="bsm1_15C",
    reference_temperature_C=15.0,
    mu_H=4.0, K_S=10.0, K_OH=0.2, K_NO=0.5, b_H=0.3, eta_g=0.8, eta_h=0.8,
    k_h=3.0, K_X=0.1, mu_A=0.5, K_NH=1.0, b_A=0.05, K_OA=0.4, k_a=0.05,
    Y_H=0.67, Y_A=0.24, f_P=0.08, i_XB=0.08, i_XP=0.06,
    theta=_THETA_BSM,
    source="Alex et al. (2008), BSM1 biological parameter values at 15 degC; Copp (2002); "
           "temperature factors from the BSM2 15/10 degC values (Gernaey et al. 2014)",
)
"""BSM1 parameter set at 15 degC (Alex et al. 2008; Copp 2002).

mu_H 4.0 /d, K_S 10, K_OH 0.2, K_NO 0.5, b_H 0.3 /d, eta_g 0.8, eta_h 0.8,
k_h 3.0 /d, K_X 0.1, mu_A 0.5 /d, K_NH 1.0, b_A 0.05 /d, K_OA 0.4,
k_a 0.05 m3/(g d), Y_H 0.67, Y_A 0.24, f_P 0.08, i_XB 0.08, i_XP 0.06.
Temperature factors from the BSM2 15/10 degC values (Gernaey et al. 2014).
"""

#: Named sets by the name a layout's ``kinetics.parameter_set`` uses.
PARAMETER_SETS: Mapping[str, ASM1Parameters] = MappingProxyType({
    ASM1_20C.name: ASM1_20C,
    BSM1_15C.name: BSM1_15C,
})


def parameter_set(name: str, file: str = "<memory>") -> ASM1Parameters:
    """The named set; :class:`InputError` for an unknown name."""
    try:
        return PARAMETER_SETS[name]
    except KeyError:
        raise InputError(Problem(file, "kinetics.parameter_set", "unknown ASM1 parameter set",
                                 got=name, expected=" or ".join(PARAMETER_SETS))) from None


def with_overrides(params: ASM1Parameters, overrides, file: str = "<memory>") -> ASM1Parameters:
    """A copy of ``params`` with ``(name, value)`` overrides applied.

    Every bad override is reported (unknown name, non-positive or non-finite
    value, a yield or fraction outside (0, 1)) in one :class:`InputError`.
    """
    problems: list[Problem] = []
    changes: dict[str, float] = {}
    for name, value in overrides:
        key = f"kinetics.overrides.{name}"
        if name not in PARAMETER_NAMES:
            problems.append(Problem(file, key, "unknown ASM1 parameter", got=name,
                                    expected="one of " + ", ".join(PARAMETER_NAMES)))
            continue
        try:
            v = float(value)
        except (TypeError, ValueError):
            problems.append(Problem(file, key, "not a number", got=value))
            continue
        if not math.isfinite(v) or v < 0.0 or (v == 0.0 and name not in ("b_A", "b_H", "f_P", "i_XP")):
            problems.append(Problem(file, key, "must be a positive finite number", got=value))
            continue
        if name in ("Y_H", "Y_A", "f_P", "eta_g", "eta_h") and v >= 1.0:
            problems.append(Problem(file, key, "must be below 1", got=value, expected="0 < value < 1"))
            continue
        changes[name] = v
    if problems:
        raise InputError(problems)
    return dataclasses.replace(params, **changes) if changes else params


def at_temperature(params: ASM1Parameters, temperature_C: float) -> ASM1Parameters:
    """The set corrected from its reference temperature to ``temperature_C``.

    Notes
    -----
    ``k(T) = k_ref * theta_k ** (T - T_ref)`` for ``k`` in
    :data:`TEMPERATURE_DEPENDENT`; other parameters are unchanged. The thetas
    are those of the set (see the module notes for their sources).
    """
    dt = float(temperature_C) - params.reference_temperature_C
    if dt == 0.0:
        return params
    changes = {k: getattr(params, k) * params.theta[k] ** dt for k in TEMPERATURE_DEPENDENT if k in params.theta}
    return dataclasses.replace(params, reference_temperature_C=float(temperature_C), **changes)

