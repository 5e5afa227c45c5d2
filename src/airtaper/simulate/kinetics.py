"""ASM1 process rates in numpy, vectorised over zones (and Jacobian columns).

The simulator's own rate expressions, written independently of the Pyomo model;
only parameter values and the stoichiometric matrix come from
:mod:`airtaper.process`.

Notes
-----
Process rates (Henze et al. 1987, Table 6.1), g/(m3 d):

* rho1 = mu_H S_S/(K_S+S_S) S_O/(K_OH+S_O) X_BH
* rho2 = mu_H S_S/(K_S+S_S) K_OH/(K_OH+S_O) S_NO/(K_NO+S_NO) eta_g X_BH
* rho3 = mu_A S_NH/(K_NH+S_NH) S_O/(K_OA+S_O) X_BA
* rho4 = b_H X_BH, rho5 = b_A X_BA
* rho6 = k_a S_ND X_BH
* rho7 = k_h (X_S/X_BH)/(K_X + X_S/X_BH) [S_O/(K_OH+S_O) + eta_h K_OH/(K_OH+S_O) S_NO/(K_NO+S_NO)] X_BH
* rho8 = rho7 X_ND/X_S

Dissolved substrates, oxygen, nitrate and ammonia enter the switching terms
clipped at zero, so a trial state of a Newton or BDF step with a slightly
negative concentration gives finite, sign-correct rates. The hydrolysis term
is written as ``k_h X_S/(K_X X_BH + X_S) X_BH`` (identical for X_BH > 0, finite at 0).

References
----------
Henze, M., Grady, C.P.L. Jr, Gujer, W., Marais, G.v.R., Matsuo, T. (1987).
Activated Sludge Model No. 1. IAWPRC Scientific and Technical Report No. 1.
"""

from __future__ import annotations

import numpy as np

from airtaper.process.asm1 import ASM1Parameters
from airtaper.process.stoichiometry import IDX

_I = IDX
_TINY = 1e-12
#: The components that enter the rates clipped at zero: SS, SO, SNO, SNH, XS.
_CLIPPED = np.array([_I[k] for k in ("SS", "SO", "SNO", "SNH", "XS")])


def process_rates(c: np.ndarray, p: ASM1Parameters) -> np.ndarray:
    """The 8 ASM1 process rates.

    Parameters
    ----------
    c : ndarray, shape (13, ...)
        Concentrations with the component axis first (g/m3; SALK mol/m3).
    p : ASM1Parameters

    Returns
    -------
    ndarray, shape (8, ...), g/(m3 d) per unit of each process.
    """
    ss, so, sno, snh, xs = np.maximum(c[_CLIPPED], 0.0)  # one clip for the five (fewer small-array calls)
    snd = c[_I["SND"]]
    xbh = c[_I["XBH"]]
    xba = c[_I["XBA"]]
    xnd = c[_I["XND"]]

    # (each product written into its row of ``rho``, shared factors computed once: the same operations in the
    # same order as the formulas above, fewer temporary arrays)
    m_s = ss / (p.K_S + ss)
    k_so = p.K_OH + so
    o_h = so / k_so
    i_h = p.K_OH / k_so
    m_no = sno / (p.K_NO + sno)
    rho = np.empty((8,) + np.shape(ss))
    growth_h = p.mu_H * m_s
    np.multiply(growth_h * o_h, xbh, out=rho[0, ...])
    np.multiply(growth_h * i_h * m_no * p.eta_g, xbh, out=rho[1, ...])
    np.multiply(p.mu_A * snh / (p.K_NH + snh) * so / (p.K_OA + so), xba, out=rho[2, ...])
    np.multiply(p.b_H, xbh, out=rho[3, ...])
    np.multiply(p.b_A, xba, out=rho[4, ...])
    np.multiply(p.k_a * snd, xbh, out=rho[5, ...])
    xbh_pos = np.maximum(xbh, 0.0)
    np.multiply(p.k_h * xs / (p.K_X * xbh_pos + xs + _TINY) * xbh_pos, o_h + p.eta_h * i_h * m_no, out=rho[6, ...])
    np.divide(rho[6] * xnd, xs + _TINY, out=rho[7, ...])
    return rho


