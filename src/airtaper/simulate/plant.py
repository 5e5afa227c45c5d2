"""The resolved plant as the simulator's inputs: flow network and inputs per period.

Every zone is a completely mixed reactor of constant volume. Its inflows are
the influent share (step feed; whatever the step feed does not place goes to
the first zone), the forward flow from the zone before it, internal recycles
and the return sludge; it sends the forward flow on (the last zone feeds the
clarifier) and the recycles it is the source of. The forward flows follow from
the water balance of each zone (:class:`airtaper.plant.Hydraulics`, the one home
of the flows; the simulator shares the plant's inputs and pure physics, its
equations and integrator are its own).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from airtaper.layout.types import Layout
from airtaper.plant import ResolvedPlant, resolve_plant
from airtaper.process.asm1 import ASM1Parameters, at_temperature
from airtaper.process.stoichiometry import petersen_matrix
from airtaper.units import HOURS_PER_DAY
from airtaper.simulate.aeration import TransferTable, transfer_table, zone_transfer

#: Aeration modes of a zone in one period.
MODE_NONE, MODE_FIXED, MODE_DO = 0, 1, 2


@dataclass
class Inputs:
    """Everything the right-hand side needs for one constant-input interval.

    Flows in m3/d, concentrations g/m3, kLa 1/d; arrays over zones unless noted.
    """

    params: ASM1Parameters
    nu_T: np.ndarray  # (13, 8)
    temperature_C: float
    q_influent: float
    c_influent: np.ndarray  # (13,)
    q_feed: np.ndarray  # influent share into each zone
    flow_matrix: np.ndarray  # [i, j] flow from zone j into zone i
    q_forward: np.ndarray  # forward flow out of each zone (last = clarifier feed)
    q_in_total: np.ndarray  # total inflow of each zone (= total outflow)
    return_to: int
    q_return: float
    q_waste: float | None  # None: target SRT
    srt_target_d: float | None
    mode: np.ndarray  # MODE_* per zone
    kla_per_d: np.ndarray  # for MODE_FIXED (scheduled or fixed)
    do_sat_mg_L: np.ndarray
    do_setpoint_mg_L: np.ndarray  # for MODE_DO (nan elsewhere)
    kla_min_per_d: np.ndarray  # MODE_DO clamp
    kla_max_per_d: np.ndarray
    airflow_Sm3_h: np.ndarray  # scheduled airflow (MODE_FIXED diffused zones), else 0
    tables: tuple[TransferTable | None, ...] = field(default=())
    #: what the right-hand side derives from these inputs once (:meth:`airtaper.simulate.system.System.rhs`);
    #: not an init field, so ``dataclasses.replace`` starts a new, empty one
    derived: dict = field(default_factory=dict, init=False, repr=False, compare=False)


def _network(plant: ResolvedPlant, k: int | None):
    """Influent, influent share, flow matrix, forward and total flow per zone of period ``k`` (None: the mean day)."""
    h = plant.hydraulics.over(lambda a: a.mean(axis=0, keepdims=True) if k is None else a[k:k + 1])
    q_inf = float(h.influent_m3_d[0])
    nz = plant.n_zones
    q_feed = h.feed_fraction * q_inf
    flow = np.zeros((nz, nz))
    for src, dst, q in h.recycles:
        flow[dst, src] += float(q[0])
    q_fwd = np.array(h.forward_m3_d[0])
    for i in range(nz - 1):
        flow[i + 1, i] += q_fwd[i]
    return q_inf, q_feed, flow, q_fwd, np.array(h.zone_flow_m3_d[0]), float(h.ras_m3_d[0]), \
        None if h.waste_m3_d is None else float(h.waste_m3_d[0])


class PlantData:
    """Plant constants and per-period :class:`Inputs` factories, from the resolved plant."""

    def __init__(self, plant: ResolvedPlant | Layout):
        plant = resolve_plant(plant)
        self.plant = plant
        self.zones = plant.zones
        self.nz = plant.n_zones
        self.volume = np.asarray(plant.volume_m3, dtype=float)
        self.n_periods = plant.n_periods
        self.period_d = plant.period_h / HOURS_PER_DAY
        self.base_params = plant.base_params
        self.params = plant.params
        self.c_influent = plant.influent_conc
        self.q_influent = plant.hydraulics.influent_m3_d
        self.temperature_C = plant.temperature_C
        clar = plant.clarifier
        self.layered = clar.kind == "layered"
        self.n_layers = clar.layers if self.layered else 0
        self.tss_per_cod = clar.tss_per_cod
        self._tables: dict = {}

    # --- per-period inputs -------------------------------------------------
    def _table(self, zone_index: int, temperature_C: float):
        key = (zone_index, round(float(temperature_C), 9))
        if key not in self._tables:
            self._tables[key] = transfer_table(self.plant, zone_index, temperature_C)
        return self._tables[key]

    def inputs(self, k: int | None, airflow_Sm3_h=None, do_setpoint_mg_L=None) -> Inputs:
        """Inputs of period ``k`` (0-based), or of the mean day when ``k`` is None.

        Parameters
        ----------
        airflow_Sm3_h : array (zones,) or None
            Zone airflows of this interval (diffused zones; others ignore it).
        do_setpoint_mg_L : array (zones,) or None
            DO setpoint per zone, nan where the zone is not DO-controlled.
            A controlled zone's airflow entry is ignored.
        """
        plant = self.plant
        h = plant.hydraulics
        if k is None:
            c_in = (self.q_influent[:, None] * self.c_influent).sum(axis=0) / self.q_influent.sum()
            temp = float(self.temperature_C.mean())
            params = at_temperature(self.base_params, temp) if plant.kinetics.temperature_correction \
                else self.base_params
        else:
            c_in = self.c_influent[k]
            temp = float(self.temperature_C[k])
            params = self.params[k]
        q_inf, q_feed, flow, q_fwd, q_tot, q_ret, q_w = _network(plant, k)
        r_to = h.ras_zone
        nz = self.nz
        air = np.zeros(nz) if airflow_Sm3_h is None else np.asarray(airflow_Sm3_h, dtype=float)
        sp = np.full(nz, np.nan) if do_setpoint_mg_L is None else np.asarray(do_setpoint_mg_L, dtype=float)
        mode = np.zeros(nz, dtype=int)
        kla = np.zeros(nz)
        sat = np.zeros(nz)
        kmin = np.zeros(nz)
        kmax = np.zeros(nz)
        air_used = np.zeros(nz)
        tables = []
        for i, z in enumerate(self.zones):
            tab = self._table(i, temp)
            tables.append(tab)
            k_i, s_i = zone_transfer(plant, i, air[i] if z.aerated else 0.0, temp)
            sat[i] = float(s_i)
            if not z.aerated:
                continue
            if np.isfinite(sp[i]):
                mode[i] = MODE_DO
                if tab is not None:
                    kmin[i], kmax[i] = tab.kla_min, tab.kla_max
                else:  # fixed-kLa zone under DO control: kLa free (variable-speed aerator)
                    kmin[i], kmax[i] = 0.0, np.inf
            elif z.fixed_kla_per_d is not None or air[i] > 0.0:
                mode[i] = MODE_FIXED
                kla[i] = float(k_i)
                air_used[i] = air[i] if z.fixed_kla_per_d is None else 0.0
        return Inputs(
            params=params, nu_T=petersen_matrix(params).T.copy(), temperature_C=temp,
            q_influent=q_inf, c_influent=np.array(c_in, dtype=float), q_feed=q_feed, flow_matrix=flow,
            q_forward=q_fwd, q_in_total=q_tot, return_to=r_to, q_return=q_ret, q_waste=q_w,
            srt_target_d=h.srt_d, mode=mode, kla_per_d=kla, do_sat_mg_L=sat,
            do_setpoint_mg_L=sp, kla_min_per_d=kmin, kla_max_per_d=kmax, airflow_Sm3_h=air_used,
            tables=tuple(tables),
        )
