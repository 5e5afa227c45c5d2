"""ASM1 stoichiometry: the Petersen matrix and composition vectors for balance checks.

Rows are the 8 processes of :data:`PROCESSES`, columns the 13 components of
:data:`airtaper.layout.types.ASM1_COMPONENTS`. The rate of change of component
``i`` from reactions is ``sum_j nu[j, i] * rho_j``.

Processes (Henze et al. 1987):

1. aerobic growth of heterotrophs
2. anoxic growth of heterotrophs (denitrification)
3. aerobic growth of autotrophs (nitrification)
4. decay of heterotrophs
5. decay of autotrophs
6. ammonification of soluble organic nitrogen
7. hydrolysis of entrapped organics
8. hydrolysis of entrapped organic nitrogen

Balances. Denitrification turns nitrate-N into N2 gas, which ASM1 does not
carry as a component; :func:`n2_yield` gives the N2-N formed per unit of each
process rate so that the COD and N balances close:

* COD (oxygen-equivalent, ThOD): organics +1, SO -1, SNO ``-cod_per_no3_n``
  (nitrate relative to ammonia), N2 ``-(cod_per_no3_n - cod_per_no3_n_denit)``;
* N: SNO, SNH, SND, XND 1; XBH, XBA ``i_XB``; XP, XI ``i_XP``; N2 1. SI and XS
  carry no nitrogen in ASM1 (organic N of XS is the separate XND).

With these vectors ``nu @ cod == -n2 * cod_n2`` and ``nu @ n == -n2`` hold to
rounding for any parameter values (tested).

References
----------
Henze, M., Grady, C.P.L. Jr, Gujer, W., Marais, G.v.R., Matsuo, T. (1987).
Activated Sludge Model No. 1. IAWPRC Scientific and Technical Report No. 1,
Table 6.1 (the matrix).
"""

from __future__ import annotations

import numpy as np

from airtaper.layout.types import ASM1_COMPONENTS
from airtaper.process.asm1 import ASM1Parameters

PROCESSES: tuple[str, ...] = (
    "aerobic_growth_heterotrophs",
    "anoxic_growth_heterotrophs",
    "aerobic_growth_autotrophs",
    "decay_heterotrophs",
    "decay_autotrophs",
    "ammonification",
    "hydrolysis_organics",
    "hydrolysis_organic_n",
)

#: Column index of each component.
IDX: dict[str, int] = {name: i for i, name in enumerate(ASM1_COMPONENTS)}

#: Components that settle (particulates); the rest are dissolved.
PARTICULATES: tuple[str, ...] = ("XI", "XS", "XBH", "XBA", "XP", "XND")
#: Particulates that make up suspended solids (COD-bearing; XND is N within them).
SOLIDS_COD: tuple[str, ...] = ("XI", "XS", "XBH", "XBA", "XP")

N_COMPONENTS = len(ASM1_COMPONENTS)
N_PROCESSES = len(PROCESSES)

#: Grams of N in one mole of alkalinity change per g N (1/14 mol per g N).
_MOL_PER_G_N = 1.0 / 14.0


def petersen_matrix(p: ASM1Parameters) -> np.ndarray:
    """The ASM1 stoichiometric matrix, shape (8 processes, 13 components).

    Parameters
    ----------
    p : ASM1Parameters
        Yields, fractions and N contents are taken from here.

    Returns
    -------
    ndarray of float, ``nu[j, i]`` = g of component i per unit of process j
    (SALK in mol per unit).

    Notes
    -----
    Henze et al. (1987) Table 6.1, with 4.57 and 2.86 as
    ``p.cod_per_no3_n`` and ``p.cod_per_no3_n_denit``; alkalinity
    coefficients in mol/m3 as in the same matrix (1/14 mol per g N).
    """
    nu = np.zeros((N_PROCESSES, N_COMPONENTS))
    c = IDX
    yh, ya, ixb, ixp, fp = p.Y_H, p.Y_A, p.i_XB, p.i_XP, p.f_P
    a_no3, a_den = p.cod_per_no3_n, p.cod_per_no3_n_denit
    # 1 aerobic growth of heterotrophs
    nu[0, c["SS"]] = -1.0 / yh
    nu[0, c["XBH"]] = 1.0
    nu[0, c["SO"]] = -(1.0 - yh) / yh
    nu[0, c["SNH"]] = -ixb
    nu[0, c["SALK"]] = -ixb * _MOL_PER_G_N
    # 2 anoxic growth of heterotrophs
    nu[1, c["SS"]] = -1.0 / yh
    nu[1, c["XBH"]] = 1.0
    nu[1, c["SNO"]] = -(1.0 - yh) / (a_den * yh)
    nu[1, c["SNH"]] = -ixb
    nu[1, c["SALK"]] = (1.0 - yh) / (a_den * yh) * _MOL_PER_G_N - ixb * _MOL_PER_G_N
    # 3 aerobic growth of autotrophs
    nu[2, c["XBA"]] = 1.0
    nu[2, c["SO"]] = -(a_no3 - ya) / ya
    nu[2, c["SNO"]] = 1.0 / ya
    nu[2, c["SNH"]] = -ixb - 1.0 / ya
    nu[2, c["SALK"]] = -ixb * _MOL_PER_G_N - 2.0 * _MOL_PER_G_N / ya
    # 4 decay of heterotrophs, 5 decay of autotrophs
    for j, biomass in ((3, "XBH"), (4, "XBA")):
        nu[j, c["XS"]] = 1.0 - fp
        nu[j, c[biomass]] = -1.0
        nu[j, c["XP"]] = fp
        nu[j, c["XND"]] = ixb - fp * ixp
    # 6 ammonification
    nu[5, c["SNH"]] = 1.0
    nu[5, c["SND"]] = -1.0
    nu[5, c["SALK"]] = _MOL_PER_G_N
    # 7 hydrolysis of entrapped organics
    nu[6, c["SS"]] = 1.0
    nu[6, c["XS"]] = -1.0
    # 8 hydrolysis of entrapped organic nitrogen
    nu[7, c["SND"]] = 1.0
    nu[7, c["XND"]] = -1.0
    return nu


def n2_yield(p: ASM1Parameters) -> np.ndarray:
    """N2-N formed per unit of each process rate, shape (8,) (only denitrification)."""
    out = np.zeros(N_PROCESSES)
    out[1] = (1.0 - p.Y_H) / (p.cod_per_no3_n_denit * p.Y_H)
    return out


def cod_composition(p: ASM1Parameters) -> np.ndarray:
    """Oxygen-equivalent COD per unit of each component, shape (13,).

    Organic components 1, SO -1 (oxygen is negative COD), SNO
    ``-p.cod_per_no3_n``; the N components and SALK 0.
    """
    v = np.zeros(N_COMPONENTS)
    for name in ("SI", "SS", "XI", "XS", "XBH", "XBA", "XP"):
        v[IDX[name]] = 1.0
    v[IDX["SO"]] = -1.0
    v[IDX["SNO"]] = -p.cod_per_no3_n
    return v


def cod_of_n2(p: ASM1Parameters) -> float:
    """Oxygen-equivalent COD of one g of N2-N (relative to ammonia)."""
    return -(p.cod_per_no3_n - p.cod_per_no3_n_denit)


def n_composition(p: ASM1Parameters) -> np.ndarray:
    """Nitrogen per unit of each component, shape (13,)."""
    v = np.zeros(N_COMPONENTS)
    for name in ("SNO", "SNH", "SND", "XND"):
        v[IDX[name]] = 1.0
    v[IDX["XBH"]] = p.i_XB
    v[IDX["XBA"]] = p.i_XB
    v[IDX["XP"]] = p.i_XP
    v[IDX["XI"]] = p.i_XP
    return v


def tkn_composition(p: ASM1Parameters) -> np.ndarray:
    """Kjeldahl nitrogen per unit of each component: :func:`n_composition` without SNO."""
    v = n_composition(p)
    v[IDX["SNO"]] = 0.0
    return v


def tss_composition(tss_per_cod: float) -> np.ndarray:
    """Suspended solids per unit of each component: ``tss_per_cod`` on the COD particulates."""
    v = np.zeros(N_COMPONENTS)
    for name in SOLIDS_COD:
        v[IDX[name]] = tss_per_cod
    return v
