"""The baseline: the same plant under uniform DO-setpoint control, by the independent simulator.

Every aerated zone with diffusers is held at one DO setpoint (the layout's
``operation.baseline_do_setpoint_mg_L``, 2.0 mg/L unless set; a zone's own DO
range clips it) by the simulator's ideal DO control; the simulator returns the
airflow that control needs at every step, and the blower energy and cost follow
from :class:`~airtaper.optimize.airside.AirSide` step by step. Its figures are
compared with the same limits as the optimum (:mod:`airtaper.optimize.figures`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from airtaper.layout.types import Layout
from airtaper.optimize.figures import violations
from airtaper.optimize.simday import SimDay, simulate_day


@dataclass
class Baseline:
    setpoints_mg_L: dict  # zone id -> DO setpoint
    day: SimDay
    violations: list

    @property
    def energy_kWh_per_day(self) -> float:
        return self.day.energy_kWh_per_day

    @property
    def cost_per_day(self) -> float | None:
        return self.day.cost_per_day

    def summary(self) -> dict:
        f = self.day.figures
        return {
            "control": "uniform DO setpoint (ideal control, independent simulator)",
            "do_setpoint_mg_L": self.setpoints_mg_L,
            "energy_kWh_per_day": self.energy_kWh_per_day,
            "cost_per_day": self.cost_per_day,
            "effluent": {k: f[k] for k in ("nh4_mean_mg_L", "nh4_max_mg_L", "tn_mean_mg_L")},
            "min_do_margin_mg_L": f["min_do_margin_mg_L"],
            "compliant": not self.violations,
            "violations": self.violations,
            "simulated_days": self.day.days,
            "periodic": self.day.converged,
        }

    def add_columns(self, schedule: pd.DataFrame, header: pd.DataFrame) -> tuple[pd.DataFrame, pd.DataFrame]:
        """The optimum's tables with the baseline beside them, period by period (copies).

        ``schedule`` gains ``baseline_airflow_Sm3_h`` and ``baseline_do_mean_mg_L`` (means over the
        period's simulator steps) for the zones under DO control; ``header`` (one row per period, in
        order) gains ``baseline_power_kW``.
        """
        day = self.day
        n = self.day.layout.horizon.n_periods
        air = day.period_mean_airflow()
        do = {z: np.array([v[day.period == k].mean() for k in range(n)]) for z, v in day.do.items()}
        period_h = self.day.layout.horizon.period_h
        k = np.rint(schedule["period_start_h"].to_numpy() / period_h).astype(int)
        zones = schedule["zone"].to_numpy()
        sched = schedule.copy()
        sched["baseline_airflow_Sm3_h"] = [air[z][i] if z in self.setpoints_mg_L else np.nan for z, i in zip(zones, k)]
        sched["baseline_do_mean_mg_L"] = [do[z][i] for z, i in zip(zones, k)]
        head = header.copy()
        head["baseline_power_kW"] = [float(day.power_kW[day.period == i].mean()) for i in range(len(head))]
        return sched, head


def baseline_setpoints(layout: Layout, setpoint_mg_L: float | None = None) -> dict:
    """Zone id -> DO setpoint of the baseline (clipped into the zone's DO range)."""
    sp = layout.operation.baseline_do_setpoint_mg_L if setpoint_mg_L is None else float(setpoint_mg_L)
    out = {}
    for z in layout.zones:
        if z.kind != "aerated" or z.grid is None or z.fixed_kla_per_d is not None:
            continue
        v = sp
        if z.do_max_mg_L is not None:
            v = min(v, z.do_max_mg_L)
        if z.do_min_mg_L is not None:
            v = max(v, z.do_min_mg_L)
        out[z.id] = v
    return out


def run_baseline(layout: Layout, setpoint_mg_L: float | None = None) -> Baseline:
    """Simulate the baseline day (see module notes)."""
    sps = baseline_setpoints(layout, setpoint_mg_L)
    day = simulate_day(layout, do_setpoint_mg_L=sps)
    return Baseline(setpoints_mg_L=sps, day=day, violations=violations(layout, day.figures))


__all__ = ["Baseline", "baseline_setpoints", "run_baseline"]
