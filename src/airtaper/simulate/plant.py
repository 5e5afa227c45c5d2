"""The layout as numbers for the simulator: flow network and inputs per period.

Every zone is a completely mixed reactor of constant volume. Its inflows are
the influent share (step feed; whatever the step feed does not place goes to
the first zone), the forward flow from the zone before it, internal recycles
and the return sludge; it sends the forward flow on (the last zone feeds the
clarifier) and the recycles it is the source of. The forward flows follow from
the water balance of each zone.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from airtaper.errors import InputError, Problem
from airtaper.process.asm1 import ASM1Parameters, at_temperature, layout_parameters, period_parameters
from airtaper.process.fractionation import influent_components
from airtaper.process.stoichiometry import petersen_matrix
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


def _network(layout, q_inf: float, recycle_flows: list[float], q_return: float, k: int | None):
    nz = len(layout.zones)
    q_feed = np.zeros(nz)
    placed = 0.0
    for sf in layout.step_feed:
        q_feed[layout.zone_index(sf.zone)] += sf.fraction * q_inf
        placed += sf.fraction
    q_feed[0] += max(1.0 - placed, 0.0) * q_inf
    flow = np.zeros((nz, nz))
    q_src_out = np.zeros(nz)  # recycles drawn from each zone
    q_ext_in = q_feed.copy()
    r_to = layout.zone_index(layout.return_sludge.to_zone)
    q_ext_in[r_to] += q_return
    for rec, q in zip(layout.recycles, recycle_flows):
        i, j = layout.zone_index(rec.to_zone), layout.zone_index(rec.from_zone)
        flow[i, j] += q
        q_ext_in[i] += q
        q_src_out[j] += q
    q_fwd = np.zeros(nz)
    upstream = 0.0
    for i in range(nz):
        q_fwd[i] = upstream + q_ext_in[i] - q_src_out[i]
        if q_fwd[i] <= 0.0:
            where = "" if k is None else f" in period {k + 1}"
            raise InputError(Problem(layout.path, f"zones.{layout.zones[i].id}",
                                     "the recycles drawn from this zone exceed the flow through it" + where,
                                     got=round(float(q_fwd[i]), 3), expected="a positive forward flow"))
        if i + 1 < nz:
            flow[i + 1, i] += q_fwd[i]
        upstream = q_fwd[i]
    q_in_total = q_ext_in + np.concatenate(([0.0], q_fwd[:-1]))
    return q_feed, flow, q_fwd, q_in_total, r_to


class PlantData:
    """Layout-derived constants and per-period :class:`Inputs` factories."""

    def __init__(self, layout):
        self.layout = layout
        self.zones = layout.zones
        self.nz = len(layout.zones)
        self.volume = np.array([z.volume_m3 for z in layout.zones])
        self.n_periods = layout.horizon.n_periods
        self.period_d = layout.horizon.period_h / 24.0
        self.base_params = layout_parameters(layout)
        self.params = period_parameters(layout)
        self.c_influent = influent_components(layout.influent, self.base_params, layout.path)
        self.q_influent = np.asarray(layout.influent.flow_m3_d, dtype=float)
        self.temperature_C = np.asarray(layout.plant.temperature_C, dtype=float)
        clar = layout.clarifier
        self.layered = clar.kind == "layered"
        self.n_layers = clar.layers if self.layered else 0
        self.tss_per_cod = clar.tss_per_cod
        self._tables: dict = {}

    # --- per-period inputs -------------------------------------------------
    def _table(self, zone_index: int, temperature_C: float):
        key = (zone_index, round(float(temperature_C), 9))
        if key not in self._tables:
            self._tables[key] = transfer_table(self.layout, self.zones[zone_index], temperature_C)
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
        lay = self.layout
        if k is None:
            q_inf = float(self.q_influent.mean())
            c_in = (self.q_influent[:, None] * self.c_influent).sum(axis=0) / self.q_influent.sum()
            temp = float(self.temperature_C.mean())
            params = at_temperature(self.base_params, temp) if lay.kinetics.temperature_correction \
                else self.base_params
            rec = [float(np.mean(r.flow_m3_d)) for r in lay.recycles]
            q_ret = float(np.mean(lay.return_sludge.flow_m3_d))
            q_w = None if lay.wasting.flow_m3_d is None else float(np.mean(lay.wasting.flow_m3_d))
        else:
            q_inf = float(self.q_influent[k])
            c_in = self.c_influent[k]
            temp = float(self.temperature_C[k])
            params = self.params[k]
            rec = [float(r.flow_m3_d[k]) for r in lay.recycles]
            q_ret = float(lay.return_sludge.flow_m3_d[k])
            q_w = None if lay.wasting.flow_m3_d is None else float(lay.wasting.flow_m3_d[k])
        q_feed, flow, q_fwd, q_tot, r_to = _network(lay, q_inf, rec, q_ret, k)
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
            k_i, s_i = zone_transfer(lay, z, air[i] if z.aerated else 0.0, temp)
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
            q_influent=q_inf, c_influent=np.asarray(c_in, dtype=float), q_feed=q_feed, flow_matrix=flow,
            q_forward=q_fwd, q_in_total=q_tot, return_to=r_to, q_return=q_ret, q_waste=q_w,
            srt_target_d=lay.wasting.srt_d, mode=mode, kla_per_d=kla, do_sat_mg_L=sat,
            do_setpoint_mg_L=sp, kla_min_per_d=kmin, kla_max_per_d=kmax, airflow_Sm3_h=air_used,
            tables=tuple(tables),
        )
