"""Tidy pandas tables of a solved (or initialised) train model.

Values are read in bulk from the indexed components (one pass over each, no
per-value Pyomo calls in inner loops beyond reading ``.value``). Time is given
both as the time-point index (``step``) and as the hour of the point, ``time_h``
(0 for a steady model); ``period`` is the model's period index (1 = the period
starting at midnight); daily means use the points' quadrature weights.

Column names are the output files' (docs/outputs.md): the ASM1 components by
their symbols, every other figure with its unit (``nh4_n_mg_L``, ``tn_mg_L``,
``tss_mg_L``, ``q_effluent_m3_d``, ``kla_per_h`` as the simulator writes them).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyomo.environ as pyo

from airtaper import units
from airtaper.layout.types import ASM1_COMPONENTS


def _hours(m) -> np.ndarray:
    return np.array([m.point_hour[t] for t in m.STEPS], dtype=float)


def zone_concentrations(m) -> pd.DataFrame:
    """Concentration of every component in every zone at every step (g/m3, SALK mol/m3).

    Index: (step, zone); columns: the 13 ASM1 components, plus ``time_h`` and ``period``.
    """
    nz, nc = len(m.ZONES), len(ASM1_COMPONENTS)
    vals = np.fromiter((v.value for v in m.conc.values()), dtype=float, count=len(m.conc))
    vals = vals.reshape(len(m.STEPS), nz, nc)
    index = pd.MultiIndex.from_product([list(m.STEPS), list(m.ZONES)], names=["step", "zone"])
    df = pd.DataFrame(vals.reshape(-1, nc), index=index, columns=list(ASM1_COMPONENTS))
    df.insert(0, "period", np.repeat([m.period_of_step[t] for t in m.STEPS], nz))
    df.insert(0, "time_h", np.repeat(_hours(m), nz))
    return df


def _expression_values(component) -> np.ndarray:
    return np.array([pyo.value(e) for e in component.values()], dtype=float)


def effluent(m) -> pd.DataFrame:
    """Effluent per step: 13 components, ``nh4_n_mg_L``, ``tn_mg_L``, ``tss_mg_L`` and ``q_effluent_m3_d``."""
    nc = len(ASM1_COMPONENTS)
    conc = _expression_values(m.effluent_conc).reshape(len(m.STEPS), nc)
    df = pd.DataFrame(conc, index=pd.Index(list(m.STEPS), name="step"), columns=list(ASM1_COMPONENTS))
    df["nh4_n_mg_L"] = _expression_values(m.effluent_nh4_mg_L)
    df["tn_mg_L"] = _expression_values(m.effluent_tn_mg_L)
    df["tss_mg_L"] = _expression_values(m.effluent_tss_mg_L)
    flow = {p: pyo.value(m.effluent_m3_d[p]) for p in m.PERIODS}
    df["q_effluent_m3_d"] = [flow[m.period_of_step[t]] for t in m.STEPS]
    df.insert(0, "period", [m.period_of_step[t] for t in m.STEPS])
    df.insert(0, "time_h", _hours(m))
    return df


def aeration(m) -> pd.DataFrame:
    """Per aerated zone and step: airflow (Sm3/h; NaN for fixed-kLa zones), field kLa (1/h, as the
    simulator reports it; the balances use 1/d), saturation and DO (mg/L), oxygen transfer (kg O2/h)."""
    rows = []
    otr = {k: pyo.value(e) for k, e in m.otr_kg_h.items()}
    kla = {k: units.per_day_to_per_hour(pyo.value(e)) for k, e in m.kla_per_d.items()}
    for t in m.STEPS:
        p = m.period_of_step[t]
        for z in m.AERATED_ZONES:
            air = m.airflow_Sm3_h[z, p].value if z in m.GRID_ZONES else np.nan
            rows.append((t, z, p, air, kla[z, p], pyo.value(m.do_sat_mg_L[z, p]), m.conc[t, z, "SO"].value,
                         otr[t, z]))
    df = pd.DataFrame(rows, columns=["step", "zone", "period", "airflow_Sm3_h", "kla_per_h", "do_sat_mg_L",
                                     "do_mg_L", "otr_kg_h"]).set_index(["step", "zone"])
    return df


def settler_layers(m) -> pd.DataFrame:
    """Layered settler: concentration per step and layer (top = 1) and the layer TSS (``tss_mg_L``)."""
    if not hasattr(m, "settler_conc"):
        return pd.DataFrame()
    nc = len(ASM1_COMPONENTS)
    vals = np.fromiter((v.value for v in m.settler_conc.values()), dtype=float, count=len(m.settler_conc))
    index = pd.MultiIndex.from_product([list(m.STEPS), list(m.LAYERS)], names=["step", "layer"])
    df = pd.DataFrame(vals.reshape(-1, nc), index=index, columns=list(ASM1_COMPONENTS))
    df["tss_mg_L"] = np.fromiter((v.value for v in m.settler_tss.values()), dtype=float, count=len(m.settler_tss))
    return df


def summary(m) -> dict:
    """Scalar results: SRT (d), waste flow (m3/d, daily mean), effluent flow-weighted daily means
    of NH4-N, TN and TSS (mg/L), total oxygen transferred (kg O2/d, ``oxygen_kg_per_day`` as the
    simulator's summary names it)."""
    eff = effluent(m)
    weight = np.array([m.point_weight[t] for t in m.STEPS])
    w = eff["q_effluent_m3_d"].to_numpy() * weight
    mean = lambda col: float((eff[col].to_numpy() * w).sum() / w.sum())  # noqa: E731
    otr = aeration(m)["otr_kg_h"].groupby(level="step").sum().to_numpy()
    return {
        "srt_d": float(pyo.value(m.srt_d)),
        "waste_m3_d": float(np.mean([m.waste_m3_d[p].value for p in m.PERIODS])),
        "effluent_nh4_mean_mg_L": mean("nh4_n_mg_L"),
        "effluent_tn_mean_mg_L": mean("tn_mg_L"),
        "effluent_tss_mean_mg_L": mean("tss_mg_L"),
        "oxygen_kg_per_day": float((otr * weight).sum() * units.HOURS_PER_DAY),
    }
