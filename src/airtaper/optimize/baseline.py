"""The baseline: the same plant under uniform DO-setpoint control, by the independent simulator.

Every aerated zone with diffusers is held at one DO setpoint (the layout's
``operation.baseline_do_setpoint_mg_L``, 2.0 mg/L unless set; a zone's own DO
range clips it) by the simulator's ideal DO control; the simulator returns the
airflow that control needs at every step, and the blower energy and cost follow
from :class:`~airtaper.optimize.airside.AirSide` step by step. Its figures are
compared with the same limits as the optimum (:mod:`airtaper.optimize.compliance`).
A setpoint the control cannot hold (the zone at full air below it) is simulated at
full air and listed with its zone and hours (``setpoint_not_held``).

When the baseline breaks a limit, a saving against it flatters the optimum:
:func:`complying_baseline` finds the lowest uniform setpoint whose simulated day
meets the limits, by bracketing upward from the baseline's setpoint (steps of
:data:`SEARCH_STEPS_mg_L`, up to :data:`SEARCH_MAX_mg_L`) and bisecting the bracket to
:data:`SEARCH_TOL_mg_L`. It assumes compliance does not get lost again at higher
setpoints (true of NH4-N; a TN limit broken by too much DO is not cured upward, and
the search then reports no complying setpoint).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from airtaper.layout.types import Layout
from airtaper.optimize.compliance import violations
from airtaper.optimize.simday import SimDay, simulate_day


#: DO range tolerance of the baseline's compliance, mg/L: the DO over continuous time
#: overshoots a setpoint held at a zone's DO maximum by round-off after load changes
#: (ideal control, 1-minute time constant); the same as the optimum's continuous-time
#: acceptance (:mod:`airtaper.optimize.backoff`). Effluent limits are exact.
DO_TOLERANCE_mg_L = 0.01
#: Steps of the upward bracketing search above the baseline setpoint, mg/L (cumulative).
SEARCH_STEPS_mg_L = (0.25, 0.5, 1.0, 2.0, 4.0)
#: Highest uniform setpoint tried, mg/L; common practice (no source): DO above about
#: 6 mg/L is not an operating point of diffused aeration.
SEARCH_MAX_mg_L = 6.0
#: Width of the final bracket, mg/L.
SEARCH_TOL_mg_L = 0.05


@dataclass
class Baseline:
    setpoints_mg_L: dict  # zone id -> DO setpoint
    day: SimDay
    violations: list
    setpoint_mg_L: float | None = None  # the uniform setpoint asked for (before clipping to the zones' ranges)

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
            "setpoint_mg_L": self.setpoint_mg_L,
            "do_setpoint_mg_L": self.setpoints_mg_L,
            "energy_kWh_per_day": self.energy_kWh_per_day,
            "cost_per_day": self.cost_per_day,
            "effluent": {k: f[k] for k in ("nh4_mean_mg_L", "nh4_max_mg_L", "tn_mean_mg_L")},
            "min_do_margin_mg_L": f["min_do_margin_mg_L"],
            "compliant": not self.violations,
            "violations": self.violations,
            "setpoint_not_held": self.day.setpoint_shortfalls,
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
        head["baseline_power_kW"] = day.period_mean_power_kW()
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


def run_baseline(layout: Layout, setpoint_mg_L: float | None = None, start_state=None) -> Baseline:
    """Simulate the baseline day (see module notes); ``start_state``: the simulator's first day's start."""
    sp = layout.operation.baseline_do_setpoint_mg_L if setpoint_mg_L is None else float(setpoint_mg_L)
    sps = baseline_setpoints(layout, sp)
    kwargs = {} if start_state is None else {"start_state": start_state[0], "start_waste_m3_d": start_state[1]}
    day = simulate_day(layout, do_setpoint_mg_L=sps, **kwargs)
    return Baseline(setpoints_mg_L=sps, day=day, setpoint_mg_L=sp,
                    violations=violations(layout, day.figures, do_tolerance_mg_L=DO_TOLERANCE_mg_L))


def complying_baseline(layout: Layout, base: Baseline) -> Baseline | None:
    """The lowest uniform DO setpoint above ``base``'s whose day meets the limits (module notes); None if none."""
    lo = base.setpoint_mg_L
    start = base.day.start_state()
    found = None
    for step in SEARCH_STEPS_mg_L:
        sp = min(base.setpoint_mg_L + step, SEARCH_MAX_mg_L)
        if sp <= lo:
            break
        trial = _try(layout, sp, start)
        if trial is None:
            break
        if not trial.violations:
            found = trial
            break
        lo, start = sp, trial.day.start_state()
    if found is None:
        return None
    hi = found.setpoint_mg_L
    while hi - lo > SEARCH_TOL_mg_L:
        mid = 0.5 * (lo + hi)
        trial = _try(layout, mid, found.day.start_state())
        if trial is not None and not trial.violations:
            found, hi = trial, mid
        else:
            lo = mid
    return found


def _try(layout: Layout, setpoint_mg_L: float, start) -> Baseline | None:
    try:
        return run_baseline(layout, setpoint_mg_L, start_state=start)
    except (RuntimeError, ArithmeticError, ValueError):  # the simulator failed at this setpoint: stop there
        return None


__all__ = ["Baseline", "baseline_setpoints", "complying_baseline", "run_baseline"]
