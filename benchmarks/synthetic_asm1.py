"""Synthetic ASM1-like Pyomo model for benchmarking the solver bridge (not a plant model).

A train of ``zones`` completely mixed zones over a cyclic day of ``periods`` periods,
each cut into ``steps_per_period`` backward-Euler steps. Thirteen states per zone and
step, eight Monod-type process rates per zone and step (named Expressions of the form
``mu * S/(K+S) * O/(K+O) * X``), an airflow-like kLa control per zone and period, and a
cyclic condition (the step before the first is the last). Minimises a kLa (energy
proxy) plus effluent-ammonia cost. The numbers only need to be plausible in magnitude
so that the expression trees and the sparsity look like the real model's: kinetic
values are ASM1 defaults at 20 C as recalled from Henze et al. (1987), "Activated
Sludge Model No. 1", IAWPRC Scientific and Technical Report No. 1 (from memory); the
plant is invented.

Size: variables = 13 * zones * periods * steps_per_period + zones * periods,
constraints = 13 * zones * periods * steps_per_period.
"""

from __future__ import annotations

import math

import pyomo.environ as pe

STATES = ("SI", "SS", "XI", "XS", "XBH", "XBA", "XP", "SO", "SNO", "SNH", "SND", "XND",
          "SALK")
PARTICULATE = {"XI", "XS", "XBH", "XBA", "XP", "XND"}
INITIAL = {"SI": 30.0, "SS": 3.0, "XI": 1500.0, "XS": 60.0, "XBH": 2200.0, "XBA": 130.0,
           "XP": 700.0, "SO": 1.5, "SNO": 6.0, "SNH": 2.0, "SND": 0.8, "XND": 4.0,
           "SALK": 5.0}
INFLUENT = {"SI": 30.0, "SS": 70.0, "XI": 50.0, "XS": 200.0, "XBH": 10.0, "XBA": 0.5,
            "XP": 0.0, "SO": 0.0, "SNO": 0.0, "SNH": 30.0, "SND": 7.0, "XND": 10.0,
            "SALK": 7.0}
# kinetic and stoichiometric values (ASM1 defaults at 20 C, from memory, see docstring)
K = dict(YA=0.24, YH=0.67, fP=0.08, iXB=0.08, iXP=0.06, muH=6.0, KS=20.0, KOH=0.2,
         KNO=0.5, bH=0.62, etag=0.8, etah=0.4, kh=3.0, KX=0.03, muA=0.8, KNH=1.0,
         bA=0.1, KOA=0.4, ka=0.08)


def build(zones: int = 6, periods: int = 24, steps_per_period: int = 4,
          seed_shift: float = 0.0) -> pe.ConcreteModel:
    """Build the synthetic model (see module docstring)."""
    p = K
    m = pe.ConcreteModel(name=f"synthetic_asm1_{zones}x{periods}x{steps_per_period}")
    n_steps = periods * steps_per_period
    m.Z = pe.RangeSet(0, zones - 1)
    m.T = pe.RangeSet(0, n_steps - 1)
    m.P = pe.RangeSet(0, periods - 1)
    m.S = pe.Set(initialize=STATES, ordered=True)
    dt_d = 1.0 / n_steps
    volume_m3 = 1200.0
    q_in = {k: 18000.0 * (1.0 + 0.35 * math.sin(2 * math.pi * (k * dt_d - 0.3)))
            for k in range(n_steps)}
    q_rec = 36000.0
    waste = 0.015
    m.inf_load = pe.Param(m.T, mutable=True,
                      initialize={k: 1.0 + 0.3 * math.sin(2 * math.pi * (k * dt_d - 0.25))
                                  + seed_shift for k in range(n_steps)})
    m.so_sat = pe.Param(mutable=True, initialize=8.8)
    m.c = pe.Var(m.Z, m.T, m.S, bounds=(0.0, None),
                 initialize=lambda m, z, k, s: INITIAL[s])
    m.kla = pe.Var(m.Z, m.P, bounds=(0.0, 300.0), initialize=120.0)  # 1/d

    def monod(s, k_half):
        return s / (k_half + s)

    def rates(m, z, k):
        c = {s: m.c[z, k, s] for s in STATES}
        return {
            1: p["muH"] * monod(c["SS"], p["KS"]) * monod(c["SO"], p["KOH"]) * c["XBH"],
            2: p["muH"] * monod(c["SS"], p["KS"]) * p["KOH"] / (p["KOH"] + c["SO"])
            * monod(c["SNO"], p["KNO"]) * p["etag"] * c["XBH"],
            3: p["muA"] * monod(c["SNH"], p["KNH"]) * monod(c["SO"], p["KOA"]) * c["XBA"],
            4: p["bH"] * c["XBH"],
            5: p["bA"] * c["XBA"],
            6: p["ka"] * c["SND"] * c["XBH"],
            7: p["kh"] * (c["XS"] / c["XBH"]) / (p["KX"] + c["XS"] / c["XBH"])
            * (monod(c["SO"], p["KOH"]) + p["etah"] * p["KOH"] / (p["KOH"] + c["SO"])
               * monod(c["SNO"], p["KNO"])) * c["XBH"],
        }

    m.r = pe.Expression(m.Z, m.T, [1, 2, 3, 4, 5, 6, 7, 8], rule=lambda m, z, k, j: 0)
    for z in m.Z:
        for k in m.T:
            r = rates(m, z, k)
            for j, e in r.items():
                m.r[z, k, j].set_value(e)
            m.r[z, k, 8].set_value(m.r[z, k, 7] * m.c[z, k, "XND"] / m.c[z, k, "XS"])

    YH, YA, fP, iXB, iXP = p["YH"], p["YA"], p["fP"], p["iXB"], p["iXP"]
    nu = {  # stoichiometry (state -> {process: coefficient})
        "SS": {1: -1 / YH, 2: -1 / YH, 7: 1.0},
        "XS": {4: 1 - fP, 5: 1 - fP, 7: -1.0},
        "XBH": {1: 1.0, 2: 1.0, 4: -1.0},
        "XBA": {3: 1.0, 5: -1.0},
        "XP": {4: fP, 5: fP},
        "SO": {1: -(1 - YH) / YH, 3: -(4.57 - YA) / YA},
        "SNO": {2: -(1 - YH) / (2.86 * YH), 3: 1 / YA},
        "SNH": {1: -iXB, 2: -iXB, 3: -iXB - 1 / YA, 6: 1.0},
        "SND": {6: -1.0, 8: 1.0},
        "XND": {4: iXB - fP * iXP, 5: iXB - fP * iXP, 8: -1.0},
        "SALK": {1: -iXB / 14, 2: (1 - YH) / (14 * 2.86 * YH) - iXB / 14,
                 3: -iXB / 14 - 1 / (7 * YA), 6: 1 / 14},
        "SI": {}, "XI": {},
    }

    def balance(m, z, k, s):
        prev = (k - 1) % n_steps  # cyclic day
        q = q_in[k] + q_rec
        if z == 0:
            rec = m.c[zones - 1, k, s]
            if s in PARTICULATE:
                rec = rec * (q_in[k] + q_rec) / q_rec * (1 - waste)
            inflow = q_in[k] * INFLUENT[s] * m.inf_load[k] + q_rec * rec
        else:
            inflow = q * m.c[z - 1, k, s]
        reaction = sum(coef * m.r[z, k, j] for j, coef in nu[s].items())
        rhs = inflow - q * m.c[z, k, s] + volume_m3 * reaction
        if s == "SO":
            rhs = rhs + volume_m3 * m.kla[z, k // steps_per_period] * (m.so_sat - m.c[z, k, s])
        return volume_m3 * (m.c[z, k, s] - m.c[z, prev, s]) / dt_d == rhs

    m.balance = pe.Constraint(m.Z, m.T, m.S, rule=balance)
    m.cost = pe.Objective(
        expr=sum(m.kla[z, t] for z in m.Z for t in m.P) / (zones * periods)
        + 20.0 * sum(m.c[zones - 1, k, "SNH"] for k in m.T) / n_steps
        + 1e-3 * sum((m.kla[z, t] - m.kla[z, t - 1]) ** 2 for z in m.Z for t in m.P if t > 0)
    )
    return m
