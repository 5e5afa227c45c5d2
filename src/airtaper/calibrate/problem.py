"""The calibration as one nonlinear program on the cyclic train model over the record's horizon.

Unknowns: every state of the train at every time point (as in the optimisation) and
the parameters ``theta``:

* ``alpha_F[z]``: alpha x F of every diffused zone with DO data (the field kLa is
  re-stated with it in place of the layout's alpha and F);
* optionally ``mu_A``, the autotrophs' maximum growth rate at the parameter set's
  reference temperature (the model's per-period value is ``mu_A`` times the set's
  temperature factor), and ``K_OH``, the heterotrophs' oxygen half-saturation.

Airflows, influent and temperature are the record's, fixed. The model equations are
the constraints; the objective is the weighted least squares

    f = 1/2 sum_i ((y_model,i - y_i) / sd_i)^2

over the logged DO (and NH4-N) values after the warm-up, with ``y_model,i`` the model
interpolated linearly in time between its points at the logged time (the record's
"periodic" model wraps around: the point at the end of the horizon is also its start).
Ipopt solves it through the project's bridge with exact first and second derivatives.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
import pyomo.environ as pyo

from airtaper.layout.plantdata import EFFLUENT, PlantRecord
from airtaper.model.asm1_rates import asm1_process_rates
from airtaper.process.stoichiometry import PROCESSES

#: Bounds of the parameters (wide: the fit, not the bounds, should decide). Common practice (no source).
BOUNDS = {"alpha_F": (0.05, 1.5), "mu_A": (0.05, 3.0), "K_OH": (0.005, 5.0)}


@dataclass(frozen=True)
class Observation:
    kind: str  # "do" or "nh4"
    where: str  # zone id or "effluent"
    time_h: float  # logged time (record clock)
    value: float
    sd: float
    points: tuple  # ((model time point, weight), ...)


@dataclass(frozen=True)
class FitSpec:
    """What is fitted and how the residuals are weighted."""

    zones: tuple[str, ...]  # zones whose alpha x F is fitted
    mu_A: bool = False
    K_OH: bool = False
    do_sd_mg_L: float = 0.1
    nh4_sd_mg_L: float = 0.3
    warmup_h: float = 6.0

    def names(self) -> list[str]:
        out = [f"alpha_F.{z}" for z in self.zones]
        if self.mu_A:
            out.append("mu_A")
        if self.K_OH:
            out.append("K_OH")
        return out


def interpolation(m, start_h: float, times_h: np.ndarray) -> list[tuple]:
    """For each logged time, the model points around it and their linear weights (periodic)."""
    pts = sorted(m.STEPS, key=lambda t: m.point_hour[t])
    hours = np.array([0.0] + [m.point_hour[t] for t in pts])
    ids = [pts[-1]] + pts  # the point at the horizon's end is also its start
    horizon = hours[-1]
    out = []
    for tau in np.asarray(times_h, dtype=float) - start_h:
        x = float(np.clip(tau, 0.0, horizon))
        k = int(np.searchsorted(hours, x, side="right") - 1)
        k = min(k, len(hours) - 2)
        w = (x - hours[k]) / (hours[k + 1] - hours[k])
        terms = [(ids[k], 1.0 - w), (ids[k + 1], w)]
        out.append(tuple((t, float(c)) for t, c in terms if c > 1e-12))
    return out


def observations(m, record: PlantRecord, spec: FitSpec) -> list[Observation]:
    """The logged values the fit uses: DO of the zones whose alpha x F is fitted, and NH4-N.

    The DO of a zone held at the layout's alpha x F (its data cannot identify it) is left out:
    it would pull the other parameters toward whatever explains a probe at saturation or at zero.
    """
    t = record.time_h
    keep = (t - record.start_h) >= spec.warmup_h - 1e-9
    weights = interpolation(m, record.start_h, t)
    obs = []
    for kind, series, sd in (("do", record.do_mg_L, spec.do_sd_mg_L), ("nh4", record.nh4_mg_L, spec.nh4_sd_mg_L)):
        for where, values in series.items():
            if kind == "do" and where not in spec.zones:
                continue
            for i in np.flatnonzero(keep & np.isfinite(values)):
                obs.append(Observation(kind, where, float(t[i]), float(values[i]), float(sd), weights[i]))
    return obs


def _model_value(m, ob: Observation):
    if ob.kind == "do":
        return sum(c * m.conc[t, ob.where, "SO"] for t, c in ob.points)
    if ob.where == EFFLUENT:
        return sum(c * m.effluent_nh4_mg_L[t] for t, c in ob.points)
    return sum(c * m.conc[t, ob.where, "SNH"] for t, c in ob.points)


def _kla_with_alpha_f(m, z, p, alpha_f):
    """The plant's kLa rule with alpha x F as the fitted parameter."""
    return m.aeration[z].kla_per_d(m.airflow_Sm3_h[z, p], m.temperature_C[p], m.diffuser_count[z],
                                   alpha_fouling=alpha_f)


@dataclass(frozen=True, eq=False)
class Fit:
    """The fit attached to a model: its Pyomo block ``m.fit`` (parameters, residuals, objective)
    and, beside it, what is not a Pyomo component (the spec, the observations, the start)."""

    block: pyo.Block
    spec: FitSpec
    observations: tuple[Observation, ...]  # in the order of ``block.OBS``
    start_values: tuple[float, ...]  # the parameters' start (the layout's values), :meth:`FitSpec.names` order


def attach_fit(m, record: PlantRecord, spec: FitSpec) -> Fit:
    """Add parameters, observations and the least-squares objective in ``m.fit``; returns the :class:`Fit`.

    The parameters start at the layout's values and are *fixed*; :func:`free_parameters`
    frees them for the fit.
    """
    data = m.train_data
    plant = data.plant
    m.fit = b = pyo.Block()
    b.ZONES = pyo.Set(initialize=list(spec.zones), ordered=True)
    start = {z: plant.zone(z).alpha * plant.zone(z).fouling for z in spec.zones}
    b.alpha_F = pyo.Var(b.ZONES, bounds=BOUNDS["alpha_F"], initialize=start)
    for z in spec.zones:
        b.alpha_F[z].fix()
        for p in m.PERIODS:
            m.kla_per_d[z, p].set_value(_kla_with_alpha_f(m, z, p, b.alpha_F[z]))
    base = plant.base_params
    b.mu_A = pyo.Var(bounds=BOUNDS["mu_A"], initialize=base.mu_A)
    b.K_OH = pyo.Var(bounds=BOUNDS["K_OH"], initialize=base.K_OH)
    b.mu_A.fix()
    b.K_OH.fix()
    if spec.mu_A or spec.K_OH:
        for t in m.STEPS:
            p = m.period_of_step[t]
            par = data.params[p - 1]
            changes = {}
            if spec.mu_A:
                changes["mu_A"] = b.mu_A * (par.mu_A / base.mu_A)
            if spec.K_OH:
                changes["K_OH"] = b.K_OH
            par = replace(par, **changes)
            for z in m.ZONES:
                c = {k: m.conc[t, z, k] for k in m.COMPONENTS}
                for name, rho in zip(PROCESSES, asm1_process_rates(c, par)):
                    m.rate[t, z, name].set_value(rho)
    obs = tuple(observations(m, record, spec))
    b.OBS = pyo.RangeSet(len(obs))
    b.residual = pyo.Expression(b.OBS, rule=lambda b, i: (_model_value(m, obs[i - 1]) - obs[i - 1].value)
                                / obs[i - 1].sd)
    b.objective = pyo.Objective(expr=0.5 * sum(b.residual[i] ** 2 for i in b.OBS), sense=pyo.minimize)
    fit = Fit(block=b, spec=spec, observations=obs, start_values=())
    return replace(fit, start_values=tuple(float(v.value) for v in parameters(fit)))


def parameters(fit: Fit) -> list:
    """The parameter variables in :meth:`FitSpec.names` order."""
    b = fit.block
    out = [b.alpha_F[z] for z in b.ZONES]
    if fit.spec.mu_A:
        out.append(b.mu_A)
    if fit.spec.K_OH:
        out.append(b.K_OH)
    return out


def free_parameters(fit: Fit) -> None:
    for v in parameters(fit):
        v.unfix()


def fix_parameters(fit: Fit) -> None:
    for v in parameters(fit):
        v.fix()


def residuals(fit: Fit) -> np.ndarray:
    """Weighted residuals at the current point."""
    b = fit.block
    return np.array([pyo.value(b.residual[i]) for i in b.OBS])


__all__ = ["BOUNDS", "Fit", "FitSpec", "Observation", "attach_fit", "fix_parameters", "free_parameters", "interpolation",
           "observations", "parameters", "residuals"]
