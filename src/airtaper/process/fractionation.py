"""Influent fractionation: measured quantities per period -> the 13 ASM1 components.

Equations (per period; concentrations g/m3, alkalinity mol/m3), with the
fractions of :class:`airtaper.layout.types.Fractionation` (``f_*`` of total COD):

* ``SI = f_SI * COD_t``; ``SS = COD_s - SI`` (soluble COD minus soluble inerts);
* ``XI = f_XI * COD_t``, ``XBH = f_XBH * COD_t``, ``XBA = f_XBA * COD_t``,
  ``XP = 0``;
* ``XS = COD_t - SI - SS - XI - XBH - XBA`` (the rest of the COD);
* ``SO = 0``, ``SNO`` as given, ``SNH = NH4-N``;
* organic N: ``N_org,b = TKN - SNH - i_XB (XBH + XBA) - i_XP XI``, the
  Kjeldahl N not in ammonia, biomass or inerts (SI and XS carry no N in ASM1);
  ``SND = f_SND * N_org,b``, ``XND = N_org,b - SND``;
* ``SALK`` = measured alkalinity.

This is the COD/TKN split of the ASM1 report (Henze et al. 1987, influent
characterisation: total COD = SI + SS + XI + XS + XBH (+ XBA); TKN = SNH +
SND + XND + N in biomass and inerts), with the soluble COD measured directly.
When the layout gives ``asm1_mg_L`` (benchmark plants) those values are used
as they are.

References
----------
Henze, M., Grady, C.P.L. Jr, Gujer, W., Marais, G.v.R., Matsuo, T. (1987).
Activated Sludge Model No. 1. IAWPRC Scientific and Technical Report No. 1.
"""

from __future__ import annotations

import numpy as np

from airtaper.errors import InputError, Problem
from airtaper.process.asm1 import ASM1Parameters
from airtaper.process.stoichiometry import IDX, N_COMPONENTS, cod_composition, tkn_composition, tss_composition


def influent_components(influent, params: ASM1Parameters, file: str = "<memory>") -> np.ndarray:
    """The influent's 13 ASM1 components per period, shape (n_periods, 13).

    Parameters
    ----------
    influent : airtaper.layout.types.Influent
    params : ASM1Parameters
        Supplies i_XB and i_XP for the organic-N split.
    file : str
        Layout path for error messages.

    Raises
    ------
    InputError
        When a period's measurements leave a negative component (soluble COD
        below SI, particulate COD below the given particulate fractions,
        TKN below the ammonia and biomass N); every such period is listed.
    """
    if influent.asm1_mg_L is not None:
        return np.array(influent.asm1_mg_L, dtype=float).reshape(-1, N_COMPONENTS)
    fr = influent.fractionation
    cod_t = np.asarray(influent.cod_total_mg_L, dtype=float)
    cod_s = np.asarray(influent.cod_soluble_mg_L, dtype=float)
    tkn = np.asarray(influent.tkn_mg_L, dtype=float)
    nh4 = np.asarray(influent.nh4_mg_L, dtype=float)
    alk = np.asarray(influent.alkalinity_mol_m3, dtype=float)
    n = cod_t.size
    c = np.zeros((n, N_COMPONENTS))
    c[:, IDX["SI"]] = fr.si_of_cod * cod_t
    c[:, IDX["SS"]] = cod_s - c[:, IDX["SI"]]
    c[:, IDX["XI"]] = fr.xi_of_cod * cod_t
    c[:, IDX["XBH"]] = fr.xbh_of_cod * cod_t
    c[:, IDX["XBA"]] = fr.xba_of_cod * cod_t
    c[:, IDX["XS"]] = cod_t - c[:, [IDX[k] for k in ("SI", "SS", "XI", "XBH", "XBA")]].sum(axis=1)
    c[:, IDX["SNO"]] = fr.sno_mg_L
    c[:, IDX["SNH"]] = nh4
    n_org = tkn - nh4 - params.i_XB * (c[:, IDX["XBH"]] + c[:, IDX["XBA"]]) - params.i_XP * c[:, IDX["XI"]]
    c[:, IDX["SND"]] = fr.snd_of_organic_n * n_org
    c[:, IDX["XND"]] = n_org - c[:, IDX["SND"]]
    c[:, IDX["SALK"]] = alk
    problems = []
    checks = (
        ("SS", "soluble COD is below the soluble inert COD (si_of_cod x total COD)", "cod_soluble_mg_L"),
        ("XS", "particulate COD is below the given particulate fractions", "cod_total_mg_L"),
        ("SND", "TKN is below NH4-N plus the N in biomass and inerts", "tkn_mg_L"),
    )
    for comp, text, key in checks:
        bad = np.nonzero(c[:, IDX[comp]] < -1e-9)[0]
        for k in bad:
            problems.append(Problem(file, f"influent.{key}, period {k + 1}", text,
                                    got=round(float(c[k, IDX[comp]]), 6), expected=f"{comp} >= 0"))
    if problems:
        raise InputError(problems)
    return np.maximum(c, 0.0)


def measured_quantities(components: np.ndarray, params: ASM1Parameters, tss_per_cod: float = 0.75) -> dict:
    """Measured quantities implied by ASM1 components (inverse of the split, for display).

    Returns a dict of arrays: ``cod_total_mg_L``, ``cod_soluble_mg_L``,
    ``tkn_mg_L``, ``nh4_mg_L``, ``tss_mg_L``, ``alkalinity_mol_m3``.
    """
    c = np.atleast_2d(np.asarray(components, dtype=float))
    cod = cod_composition(params)
    cod[IDX["SO"]] = 0.0
    cod[IDX["SNO"]] = 0.0
    soluble = np.zeros(N_COMPONENTS)
    soluble[[IDX["SI"], IDX["SS"]]] = 1.0
    return {
        "cod_total_mg_L": c @ cod,
        "cod_soluble_mg_L": c @ soluble,
        "tkn_mg_L": c @ tkn_composition(params),
        "nh4_mg_L": c[:, IDX["SNH"]].copy(),
        "tss_mg_L": c @ tss_composition(tss_per_cod),
        "alkalinity_mol_m3": c[:, IDX["SALK"]].copy(),
    }
