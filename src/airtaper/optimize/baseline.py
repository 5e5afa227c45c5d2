"""The baseline: the same plant under uniform DO-setpoint control, by the independent simulator.

Every aerated zone with diffusers is held at one DO setpoint (the plant's
``operation.baseline_do_setpoint_mg_L``, 2.0 mg/L unless set; a zone's own DO
range clips it) by the simulator's ideal DO control; the simulator returns the
airflow that control needs at every step, and the blower energy and cost follow
from :class:`~airtaper.plant.AirSide` step by step. Its figures are
compared with the same limits as the optimum (:mod:`airtaper.optimize.compliance`).
A setpoint the control cannot hold (the zone at full air below it) is simulated at
full air and listed with its zone and hours (``setpoint_not_held``).

When the baseline breaks a limit, a saving against it flatters the optimum:
:func:`complying_baseline` finds the lowest uniform setpoint whose simulated day
meets the limits. It brackets both ways from the baseline's setpoint: upward first
when effluent NH4-N is broken (more oxygen nitrifies more), downward first otherwise
(a TN limit or a DO maximum broken by too much oxygen), the other way when the first
finds nothing; steps of :data:`SEARCH_STEPS_mg_L` between :data:`SEARCH_MIN_mg_L` and
:data:`SEARCH_MAX_mg_L` (narrowed by the zones' DO ranges, :func:`search_range`). A
complying setpoint found below the baseline is followed further down until the limits
break again; the bracket (breaking below, complying above) is then narrowed to
:data:`SEARCH_TOL_mg_L` (:func:`_close`: regula falsi on the excess over the limits the
lower end breaks, each trial placed so that the next can close the bracket, the Illinois
rule when one end moves twice, bisection after two trials that do not halve it). Stepping
up from an NH4-N breach, a step can pass over a narrow complying span: NH4-N is met there
but another limit breaks (a zone's DO maximum, overshot by the oxygen carried in from the
zones before it); the span between the two steps is then bisected three ways (NH4-N broken: higher; another limit broken: lower).
On the demo at 13 C and fouling 0.85 the steps 2.5 (NH4-N 1.3 % over) and 3.0 mg/L (Z6
0.019 mg/L above its maximum) used to end in no complying setpoint after 8 trials; it
now finds 2.59 mg/L in 7.
Within one bracket it assumes compliance is one interval of setpoints (true of NH4-N
alone and of TN alone).

Effluent NH4-N falls as the uniform setpoint rises, ever less steeply (the autotrophs' aerobic
growth, process 3 of ASM1, rises with DO through its switching function S_O / (K_OA + S_O):
Henze et al. 1987, IAWPRC Scientific and Technical Report No. 1, Table 6.1). Stepping up from
an NH4-N breach, the secant root of the last two trials is therefore a lower bound of where
NH4-N is met (:func:`_nh4_reach`): a step below it is skipped, and a setpoint just above it is
tried before a step that lies further; NH4-N still broken at the top of the range ends the
search (no setpoint below complies, and the downward search is not run). Only the order of the
trials relies on the bound: the answer is still bisected down to a trial that breaks a limit.
On the demo at 10 C and fouling 0.85 (no setpoint complies) that is 3 trials instead of 8
(15 CPU s instead of 47); at 13 C, 2.59 mg/L in 4 trials instead of 7. When the secant's
root lies within the tolerance above the last trial, the trial goes half the tolerance above
the root (at most just under the tolerance above the last trial), closing the bracket if it
complies: at 13 C, 3 trials (2.25, 2.557, 2.590 mg/L) instead of 4 (2.25, 2.557, 2.615, 2.586);
with alpha 3 % lower, 2.589 mg/L in 3 instead of 2.585 in 4; 3 % higher (no setpoint
complies), 6 instead of 7.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from airtaper.layout.types import Layout
from airtaper.optimize.compliance import violations
from airtaper.optimize.simday import SimDay, simulate_day
from airtaper.plant import ResolvedPlant, resolve_plant


#: DO range tolerance of the baseline's compliance, mg/L: the DO over continuous time
#: overshoots a setpoint held at a zone's DO maximum by round-off after load changes
#: (ideal control, 1-minute time constant); the same as the optimum's continuous-time
#: acceptance (:mod:`airtaper.optimize.backoff`). Effluent limits are exact.
DO_TOLERANCE_mg_L = 0.01
#: Steps of the bracketing search away from the baseline setpoint, mg/L (cumulative).
SEARCH_STEPS_mg_L = (0.25, 0.5, 1.0, 2.0, 4.0)
#: Lowest uniform setpoint tried, mg/L; common practice (no source): diffused aeration is
#: not controlled to a DO setpoint much below about 0.5 mg/L.
SEARCH_MIN_mg_L = 0.5
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
        n = day.plant.n_periods
        air = day.period_mean_airflow()
        do = {z: np.array([v[day.period == k].mean() for k in range(n)]) for z, v in day.do.items()}
        period_h = day.plant.period_h
        k = np.rint(schedule["period_start_h"].to_numpy() / period_h).astype(int)
        zones = schedule["zone"].to_numpy()
        sched = schedule.copy()
        sched["baseline_airflow_Sm3_h"] = [air[z][i] if z in self.setpoints_mg_L else np.nan for z, i in zip(zones, k)]
        sched["baseline_do_mean_mg_L"] = [do[z][i] for z, i in zip(zones, k)]
        head = header.copy()
        head["baseline_power_kW"] = day.period_mean_power_kW()
        return sched, head


def baseline_setpoints(plant: ResolvedPlant | Layout, setpoint_mg_L: float | None = None) -> dict:
    """Zone id -> DO setpoint of the baseline (clipped into the zone's DO range); a layout is resolved first."""
    plant = resolve_plant(plant)
    sp = plant.operation.baseline_do_setpoint_mg_L if setpoint_mg_L is None else float(setpoint_mg_L)
    out = {}
    for z in plant.zones:
        if z.kind != "aerated" or not plant.has_diffusers(z):
            continue
        v = sp
        if z.do_max_mg_L is not None:
            v = min(v, z.do_max_mg_L)
        if z.do_min_mg_L is not None:
            v = max(v, z.do_min_mg_L)
        out[z.id] = v
    return out


def run_baseline(plant: ResolvedPlant | Layout, setpoint_mg_L: float | None = None, start_state=None, *,
                 seek: bool = True) -> Baseline:
    """Simulate the baseline day of a plant (see module notes; a layout is resolved first); ``start_state``: the
    simulator's first day's start; ``seek``: seek the repeating day at loose solver tolerances first
    (:func:`airtaper.simulate.periodic`; the day returned is still one of the requested tolerances). From the
    mean-load steady state the demo's uniform 2 mg/L then costs 1.11-1.25 CPU s instead of 1.59-1.84 (6 days
    instead of 5, the loose ones cheaper); its energy moves by 0.006 % and its effluent NH4-N mean by 0.06 %,
    inside the day-repeat tolerance (load 3-4)."""
    plant = resolve_plant(plant)
    sp = plant.operation.baseline_do_setpoint_mg_L if setpoint_mg_L is None else float(setpoint_mg_L)
    sps = baseline_setpoints(plant, sp)
    kwargs = {} if start_state is None else {"start_state": start_state[0], "start_waste_m3_d": start_state[1]}
    day = simulate_day(plant, do_setpoint_mg_L=sps, seek=seek, **kwargs)
    return Baseline(setpoints_mg_L=sps, day=day, setpoint_mg_L=sp,
                    violations=violations(plant, day.figures, do_tolerance_mg_L=DO_TOLERANCE_mg_L))


def complying_baseline(plant: ResolvedPlant | Layout, base: Baseline) -> Baseline | None:
    """The lowest uniform DO setpoint whose day meets the limits, bracketed both ways (module notes); None if none."""
    plant = resolve_plant(plant)
    f, lim = base.day.figures, plant.limits
    nh4_broken = any(limit is not None and f[key] > limit
                     for key, limit in (("nh4_mean_mg_L", lim.nh4_mean_mg_L), ("nh4_max_mg_L", lim.nh4_max_mg_L)))
    for direction in ((1.0, -1.0) if nh4_broken else (-1.0, 1.0)):
        try:
            found = _bracket(plant, base, direction)
        except _NH4BrokenAtTop:  # NH4-N falls as the setpoint rises: broken at the top, broken at every setpoint
            return None
        if found is not None:
            return found
    return None


class _NH4BrokenAtTop(Exception):
    """Stepping up from an NH4-N breach reached the top of the range with NH4-N still broken."""


def _nh4_reach(plant: ResolvedPlant, before: Baseline | None, last: Baseline) -> float:
    """The setpoint below which NH4-N stays broken, by the secant through two trials that break it (every NH4-N
    limit's own secant root, the highest of them); -inf without two such trials.

    NH4-N falls with the setpoint and ever less steeply (the oxygen switching function saturates), so the curve
    lies above its secant beyond the two trials: the root is a lower bound of where the limit is met, and the
    steps below it can be skipped. Only the order of the trials relies on this: a trial that complies is still
    bisected back down to the last breaking one.
    """
    if before is None or not _nh4_broken(plant, before) or not _nh4_broken(plant, last):
        return -np.inf
    ds = last.setpoint_mg_L - before.setpoint_mg_L
    reach = -np.inf
    for key, limit in (("nh4_mean_mg_L", plant.limits.nh4_mean_mg_L), ("nh4_max_mg_L", plant.limits.nh4_max_mg_L)):
        y0, y1 = before.day.figures[key], last.day.figures[key]
        if limit is None or y1 <= limit or ds <= 0.0:
            continue
        if y1 >= y0:  # not falling here: no bound
            return -np.inf
        reach = max(reach, last.setpoint_mg_L + (y1 - limit) * ds / (y0 - y1))
    return reach


def search_range(plant: ResolvedPlant | Layout) -> tuple[float, float]:
    """Lowest and highest uniform setpoint the search tries, mg/L: :data:`SEARCH_MIN_mg_L` and
    :data:`SEARCH_MAX_mg_L`, narrowed to where the zones' own DO ranges still let the setpoint change
    something (below every zone's DO minimum, or above every zone's DO maximum, the days are the same)."""
    plant = resolve_plant(plant)
    zones = [z for z in plant.zones if z.id in baseline_setpoints(plant, 1.0)]
    lo, hi = SEARCH_MIN_mg_L, SEARCH_MAX_mg_L
    if zones and all(z.do_min_mg_L is not None for z in zones):
        lo = max(lo, min(z.do_min_mg_L for z in zones))
    if zones and all(z.do_max_mg_L is not None for z in zones):
        hi = min(hi, max(z.do_max_mg_L for z in zones))
    return lo, max(hi, lo)


def _steps_from(plant: ResolvedPlant, origin: Baseline, direction: float, last_complies: bool):
    """Trials stepping away from ``origin`` in ``direction`` until compliance changes from ``last_complies``.

    Returns (the last trial like ``origin``, the first trial unlike it or None): the first is
    ``origin`` itself when the first step already changes. Stepping up from an NH4-N breach, the
    lowest setpoint worth a trial is :data:`SEARCH_TOL_mg_L` above :func:`_nh4_reach`: a step below
    it is skipped for it, and once per step it is tried before a step beyond it (the answer, if
    any, is then bisected between it and the last trial); NH4-N still broken at the top of the
    range raises :class:`_NH4BrokenAtTop`.
    """
    same, start, before = origin, origin.day.start_state(), None
    lo, hi = search_range(plant)
    up_from_nh4 = direction > 0 and not last_complies and _nh4_broken(plant, origin)

    def bound() -> float:
        """The lowest setpoint worth a trial, from the trials so far (-inf unless stepping up from NH4-N); when
        the reach lies within the tolerance above the last trial, half the tolerance above the reach (at most
        just under the tolerance above the last trial): it closes the bracket if it complies."""
        if not up_from_nh4:
            return -np.inf
        reach = _nh4_reach(plant, before, same)
        if -np.inf < reach < same.setpoint_mg_L + _CLOSE_FRACTION * SEARCH_TOL_mg_L:
            return min(reach + 0.5 * SEARCH_TOL_mg_L, same.setpoint_mg_L + _CLOSE_FRACTION * SEARCH_TOL_mg_L)
        return reach + SEARCH_TOL_mg_L

    def candidates():
        """The setpoints to try, in order (lazily: the bound moves with each trial). Per step: the bound first
        when it lies between the last trial and the step, then the step, or the bound when the step lies below
        it (up to the top of the range)."""
        for step in SEARCH_STEPS_mg_L:
            sp = float(np.clip(origin.setpoint_mg_L + direction * step, lo, hi))
            if same.setpoint_mg_L < bound() < sp:
                yield float(bound())
            yield float(min(max(sp, bound()), hi))

    for sp in candidates():
        if direction * (sp - same.setpoint_mg_L) <= 0.0:  # at the end of the range, or a step already passed
            continue
        trial = _try(plant, sp, start)
        if trial is None:
            break
        if (not trial.violations) != last_complies:
            return same, trial
        if not last_complies and direction > 0 and _nh4_broken(plant, same) and _nh4_broken(plant, trial) is False:
            return same, trial  # NH4-N met between them but another limit broken: a complying span, if any, is there
        if up_from_nh4 and sp >= hi and _nh4_broken(plant, trial):
            raise _NH4BrokenAtTop()
        before, same, start = same, trial, trial.day.start_state()
    return same, None


def _bracket(plant: ResolvedPlant, base: Baseline, direction: float) -> Baseline | None:
    """Search one direction from the (breaking) baseline; the lowest complying setpoint found, or None."""
    breaking, complying = _steps_from(plant, base, direction, last_complies=False)
    if complying is None:
        return None
    if complying.violations:  # stepped over a narrow span: NH4-N met at ``complying``, another limit broken
        return _between(plant, breaking, complying)
    if direction < 0:  # complying below the baseline: go on down to where the limits break again
        complying, breaking = _steps_from(plant, complying, -1.0, last_complies=True)
        if breaking is None:  # complies down to the end of the range
            return complying
    return _close(plant, breaking, complying)


#: Where a trial that should close the bracket goes, as a fraction of :data:`SEARCH_TOL_mg_L` from the
#: other end: a bracket exactly as wide as the tolerance is not narrowed again by round-off.
_CLOSE_FRACTION = 0.98


def _excess(plant: ResolvedPlant, trial: Baseline) -> dict | None:
    """Limit -> by how much the trial's day breaks it, mg/L (negative: met with that margin); the same limits
    and tolerance as :func:`~airtaper.optimize.compliance.violations`. None when the day has no figures."""
    f, lim = trial.day.figures, plant.limits
    keys = (("nh4_mean_mg_L", lim.nh4_mean_mg_L), ("nh4_max_mg_L", lim.nh4_max_mg_L),
            ("tn_mean_mg_L", lim.tn_mean_mg_L))
    if any(limit is not None and key not in f for key, limit in keys):
        return None
    out = {key: f[key] - limit for key, limit in keys if limit is not None}
    out.update({("do", z): -m - DO_TOLERANCE_mg_L for z, m in f.get("do_margin_mg_L", {}).items()})
    return out


def _close(plant: ResolvedPlant, low: Baseline, high: Baseline) -> Baseline:
    """The bracket between ``low`` (breaks a limit) and ``high`` (complies) narrowed to :data:`SEARCH_TOL_mg_L`;
    the lowest complying trial.

    Same result as bisection (a complying trial with a breaking one at most the tolerance below it), in fewer
    trials: the limits ``low`` breaks are met at ``high``, and their largest excess falls smoothly as the setpoint
    rises, so its straight line between the bracket's ends (regula falsi) places the crossing. A trial goes just
    above that estimate, or at the tolerance from an end the estimate lies within the tolerance of, so that the
    next trial can close the bracket. When the same end moves twice in a row, the other end's excess is halved
    (the Illinois rule: a curved excess no longer pins the estimate to one end); after two trials in a row that
    did not halve the bracket, and without figures to interpolate, the next trial bisects. Each trial starts from
    the day of the nearer end. On 900 invented NH4-N curves (convex, or with an inflection at the limit) the
    bracket the steps left took 1,444 trials to close against bisection's 2,573, at most 2 more on any one.
    """
    def excess(trial: Baseline) -> float | None:
        e = _excess(plant, trial)
        if e is None or not keys or any(k not in e for k in keys):
            return None
        return max(e[k] for k in keys)

    e_low = _excess(plant, low)
    keys = [k for k, v in e_low.items() if v > 0.0] if e_low is not None else []
    a, g_low, g_high = low.setpoint_mg_L, excess(low), excess(high)
    slow = 0  # trials in a row that did not halve the bracket (two: the next one bisects)
    moved = 0  # the end the last trial moved: 1 the complying one, -1 the breaking one
    while high.setpoint_mg_L - a > SEARCH_TOL_mg_L:
        b = high.setpoint_mg_L
        sp = 0.5 * (a + b)
        if slow < 2 and g_low is not None and g_high is not None and g_low > 0.0 >= g_high:
            root = a + (b - a) * g_low / (g_low - g_high)
            if root - a < _CLOSE_FRACTION * SEARCH_TOL_mg_L:
                sp = min(root + 0.5 * SEARCH_TOL_mg_L, a + _CLOSE_FRACTION * SEARCH_TOL_mg_L)
            elif b - root < _CLOSE_FRACTION * SEARCH_TOL_mg_L:
                sp = b - _CLOSE_FRACTION * SEARCH_TOL_mg_L
            else:
                sp = root + 0.5 * SEARCH_TOL_mg_L
        trial = _try(plant, sp, (low if sp - a < b - sp else high).day.start_state())
        complies = trial is not None and not trial.violations
        slow = slow + 1 if (b - sp if complies else sp - a) > 0.5 * (b - a) else 0
        if complies:
            high, g_high = trial, excess(trial)
            if moved == 1 and g_low is not None:  # the same end moved twice: Illinois, the other end's weight halved
                g_low *= 0.5
            moved = 1
            continue
        a = sp  # broken, or the simulator failed there (then bisected on, from below it)
        if trial is None:
            g_low = None
        else:
            low, g_low = trial, excess(trial)
            if g_low is not None and g_low <= 0.0:  # it broke a limit the bracket's low end met: no line to follow
                g_low = None
        if moved == -1 and g_high is not None:
            g_high *= 0.5
        moved = -1
    return high


def _nh4_broken(plant: ResolvedPlant, trial: Baseline) -> bool | None:
    """True when the trial's day breaks an NH4-N limit (more oxygen would help), None when it has no figures."""
    f, lim = trial.day.figures, plant.limits
    if "nh4_mean_mg_L" not in f:
        return None
    return any(limit is not None and f[key] > limit
               for key, limit in (("nh4_mean_mg_L", lim.nh4_mean_mg_L), ("nh4_max_mg_L", lim.nh4_max_mg_L)))


def _between(plant: ResolvedPlant, low: Baseline, high: Baseline) -> Baseline | None:
    """The lowest complying setpoint between ``low`` (NH4-N broken) and ``high`` (NH4-N met, another limit
    such as a DO maximum broken), bisected to :data:`SEARCH_TOL_mg_L`; None when none is found."""
    found = None
    while high.setpoint_mg_L - low.setpoint_mg_L > SEARCH_TOL_mg_L:
        trial = _try(plant, 0.5 * (low.setpoint_mg_L + high.setpoint_mg_L), low.day.start_state())
        if trial is None:
            break
        if not trial.violations:
            found = high = trial
        elif _nh4_broken(plant, trial):
            low = trial
        else:
            high = trial
    return found


def _try(plant: ResolvedPlant, setpoint_mg_L: float, start) -> Baseline | None:
    """A trial of the complying search. Each starts from an earlier trial's day, a few days from its own: those
    days are sought at loose solver tolerances first (the demo at 13 C, fouling 0.85: 4.96 -> 4.72 CPU s, median
    of 5 at load 7-8; lowest complying setpoint 2.590 -> 2.586 mg/L, within :data:`SEARCH_TOL_mg_L`)."""
    try:
        return run_baseline(plant, setpoint_mg_L, start_state=start, seek=True)
    except (RuntimeError, ArithmeticError, ValueError):  # the simulator failed at this setpoint: stop there
        return None


__all__ = ["Baseline", "baseline_setpoints", "complying_baseline", "run_baseline", "search_range"]
