"""ASM1 process rates as Pyomo expressions (the model's own; the simulator has its own).

The eight process rates of Henze et al. (1987), g/m3/d (COD, or N for the two
nitrogen processes), of the concentrations ``c`` of one completely mixed volume::

    rho1 = muH  SS/(KS+SS) SO/(KOH+SO) XBH                               aerobic growth, heterotrophs
    rho2 = muH  SS/(KS+SS) KOH/(KOH+SO) SNO/(KNO+SNO) etag XBH           anoxic growth, heterotrophs
    rho3 = muA  SNH/(KNH+SNH) SO/(KOA+SO) XBA                            aerobic growth, autotrophs
    rho4 = bH XBH                                                        decay, heterotrophs
    rho5 = bA XBA                                                        decay, autotrophs
    rho6 = ka SND XBH                                                    ammonification
    rho7 = kh (XS/XBH)/(KX + XS/XBH) [SO/(KOH+SO)
              + etah KOH/(KOH+SO) SNO/(KNO+SNO)] XBH                     hydrolysis of organics
    rho8 = rho7 XND/XS                                                   hydrolysis of organic N

The hydrolysis terms are written without dividing by a concentration,
``kh XS XBH / (KX XBH + XS) [..]`` and ``kh XND XBH / (KX XBH + XS) [..]``, which
are the same functions for XBH, XS > 0 and stay finite when either is zero.

The Monod switching functions shared by several rates are built once per volume
and reused, so the expression graph (and the bridge's converted tape) holds each
of them once.

References
----------
Henze, M., Grady, C.P.L. Jr, Gujer, W., Marais, G.v.R., Matsuo, T. (1987).
Activated Sludge Model No. 1. IAWPRC Scientific and Technical Report No. 1, Table 6.1.
"""

from __future__ import annotations

from airtaper.process.asm1 import ASM1Parameters
from airtaper.process.stoichiometry import PROCESSES

#: Process names in the order of the returned rates: the rows of the Petersen matrix.
RATE_ORDER: tuple[str, ...] = PROCESSES


def asm1_process_rates(c, p: ASM1Parameters) -> tuple:
    """The eight ASM1 process rates of one volume, in :data:`RATE_ORDER`, g/m3/d.

    Parameters
    ----------
    c : mapping
        Component name (``"SS"``, ``"SO"``, ...) -> concentration, g/m3 (Pyomo
        variables or expressions, or floats).
    p : ASM1Parameters
        Kinetic parameters at the volume's temperature (rates per day).

    Notes
    -----
    See the module docstring for the equations (Henze et al. 1987, Table 6.1).
    """
    ss, so, sno, snh, snd = c["SS"], c["SO"], c["SNO"], c["SNH"], c["SND"]
    xs, xbh, xba, xnd = c["XS"], c["XBH"], c["XBA"], c["XND"]
    substrate = ss / (p.K_S + ss)
    oxygen_h = so / (p.K_OH + so)
    inhibition_h = p.K_OH / (p.K_OH + so)
    nitrate = sno / (p.K_NO + sno)
    anoxic = inhibition_h * nitrate
    hydrolysis_acceptors = oxygen_h + p.eta_h * anoxic
    hydrolysis_base = p.k_h * xbh / (p.K_X * xbh + xs) * hydrolysis_acceptors
    return (
        p.mu_H * substrate * oxygen_h * xbh,
        p.mu_H * p.eta_g * substrate * anoxic * xbh,
        p.mu_A * snh / (p.K_NH + snh) * so / (p.K_OA + so) * xba,
        p.b_H * xbh,
        p.b_A * xba,
        p.k_a * snd * xbh,
        hydrolysis_base * xs,
        hydrolysis_base * xnd,
    )
