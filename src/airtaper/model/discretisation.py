"""Time discretisation shared by the train and the clarifier models: one balance written at one time point.

:func:`time_balance` turns ``d state / dt = rhs`` into the algebraic equation of the
model's scheme (steady, Radau IIA collocation, backward Euler, BDF2) at one time point;
:func:`switched_balance` is the positive-preserving balance of a zone whose air switches
off; :class:`StepSlice` lets them read an indexed Pyomo component as a sequence over the time
points. Both :mod:`airtaper.model.train` (zone balances) and
:mod:`airtaper.model.clarifier` (settler layer balances) use them, so neither imports
the other for them.
"""

from __future__ import annotations


def time_balance(m, t, state, rhs):
    """The time-discretised balance of one state at time point t (see the module notes).

    ``state[t]`` and ``rhs[t]`` indexable by time point. Steady: ``rhs = 0``. Radau IIA
    collocation, stage k of a step of length h starting at point s:
    ``(x_t - x_s) / h = sum_j A[k, j] rhs_j`` over the points j of the step. Backward
    Euler: ``(x_t - x_t-1) / h = rhs_t``; BDF2: ``(3/2 x_t - 2 x_t-1 + 1/2 x_t-2) / h = rhs_t``.
    Points wrap around the periodic day.
    """
    if m.steady:
        return rhs[t] == 0.0
    if m.scheme == "bdf2":
        prev = m.prev_step[t]
        acc = (1.5 * state[t] - 2.0 * state[prev] + 0.5 * state[m.prev_step[prev]]) / m.dt_d
        return rhs[t] - acc == 0.0
    row = m.collocation_matrix[m.stage_of_point[t]]
    acc = (state[t] - state[m.step_start[t]]) / m.dt_d
    if len(row) == 1:
        return rhs[t] - acc == 0.0
    return sum(w * rhs[j] for w, j in zip(row, m.step_points[t])) - acc == 0.0


def switched_balance(m, t, state, rhs):
    """Backward Euler from time point to time point: the balance of a zone whose air switches off.

    ``(x_t - x_t-1) / (t - t_prev) = rhs_t``, the previous point being the step's start
    for the first stage. Used for the states of a swing zone under a Radau scheme: when
    the air stops, the DO (and then the nitrate) decays with a time constant of minutes,
    far inside one step. The stability function of 2-point Radau IIA,
    ``R(z) = (1 + z/3) / (1 - 2z/3 + z^2/6)``, is negative for ``z < -3``, so the
    collocation solution of so fast a decay passes below zero (by up to about 10 % of the
    starting value), which the non-negative concentrations forbid: the schedule with the
    zone switched off has no solution at all. Backward Euler, ``R(z) = 1 / (1 - z)``, stays
    positive for every step (Hairer, E., Wanner, G. (1996). Solving Ordinary Differential
    Equations II, 2nd ed., section IV.3, stability functions of implicit Runge-Kutta
    methods; section IV.5, Radau IIA). Order 1 for these states only, on sub-steps of a
    third and two thirds of a step; the independent simulator checks the schedule.
    """
    prev = m.prev_step[t]
    return rhs[t] - (state[t] - state[prev]) / m.substep_d[m.stage_of_point[t]] == 0.0


class StepSlice:
    """``obj[t, *rest]`` seen as a sequence indexed by the step only."""

    __slots__ = ("obj", "rest")

    def __init__(self, obj, *rest):
        self.obj, self.rest = obj, rest

    def __getitem__(self, t):
        return self.obj[(t,) + self.rest]
