"""Secondary clarifier of the train model: ideal separator or layered (Takacs) settler.

Both are non-reactive and attach to a model built by :mod:`airtaper.model.train`
two expressions the rest of the train uses, ``effluent_conc[t, c]`` and
``underflow_conc[t, c]`` (g/m3, SALK mol/m3). Flows per period: feed ``Qf`` (forward
flow of the last zone), underflow ``Qu = Q_return + Q_waste``, effluent
``Qe = Qf - Qu``.

Ideal separator
---------------
No volume. Dissolved components leave in both streams at the feed concentration.
Particulates leave in the effluent at the fixed effluent TSS (``TSS_e``, 0 for a
perfect separator) with the feed's composition, and the rest goes to the underflow::

    X_e = X_f TSS_e / TSS_f,         X_u = (Qf X_f - Qe X_e) / Qu

Layered settler
---------------
``n`` layers of height ``h / n`` over the area ``A`` (Takacs et al. 1991, as used in
BSM1, Alex et al. 2008). Every component is carried by the bulk flow (up above the
feed layer at ``Qe / A``, down below it at ``Qu / A``); particulates also settle.
The settling flux ``J_l`` from layer ``l`` to ``l+1`` (g TSS/(m2 d)) uses the
double-exponential velocity::

    vs(X) = max(0, min(v0', v0 (exp(-rh (X - Xmin)) - exp(-rp (X - Xmin))))),  Xmin = fns TSS_f
    f(X)  = vs(X) X,  largest at X_M
    J_l   = min(f(min(X_l, X_M)), f(max(X_l+1, X_M)))   at and below the feed layer
    J_l   = f(X_l)  if X_l+1 <= Xt  else  min(...)       above it (clarification)

the Godunov flux of Bürger, Diehl & Nopens (2011), which equals Takacs' ``min(f(X_l),
f(X_l+1))`` where the solids rise downwards (see :mod:`airtaper.physics.settling`).

Each particulate moves with the flux of its layer in proportion to its share of
the layer's solids: ``J_l,i = w_l X_l,i`` with the effective settling velocity
``w_l = J_l / X_l`` (a variable, ``settler_velocity``, defined by
``w_l X_l = J_l``, which avoids dividing by a concentration). TSS is
``tss_per_cod`` times the particulate COD (XI, XS, XBH, XBA, XP). Tracking every
particulate in every layer (instead of assigning the feed's composition to the
outlets) conserves COD and N exactly in dynamic runs; at steady state both give
the same result.

``min``, ``max`` and the threshold switch are replaced by smooth forms so that the
equations are twice differentiable for Ipopt: the fluxes are those of
:func:`airtaper.physics.settling.gravity_flux_g_m2_d` and
:func:`~airtaper.physics.settling.interface_flux_g_m2_d`, the same functions the simulator
evaluates (a smooth minimum whose width scales with the fluxes, so that the layers that sit
at one concentration below the feed are not on a kink at the scale Ipopt sees; the BSM1 test
shows the smoothing changes the benchmark steady state far below its 1e-3 tolerance).

References
----------
Takacs, I., Patry, G.G., Nolasco, D. (1991). A dynamic model of the
clarification-thickening process. Water Research 25(10), 1263-1271.
Bürger, R., Diehl, S., Nopens, I. (2011). A consistent modelling methodology for secondary
settling tanks in wastewater treatment. Water Research 45(6), 2247-2260.
Alex, J. et al. (2008). Benchmark Simulation Model no. 1 (BSM1), IWA Task Group
on Benchmarking of Control Strategies for WWTPs (settler model).
"""

from __future__ import annotations

import pyomo.environ as pyo

from airtaper.model.discretisation import StepSlice, time_balance
from airtaper.physics import settling as settling_physics
from airtaper.process.stoichiometry import PARTICULATES, SOLIDS_COD


# --- shared by both clarifier kinds --------------------------------------------------
def _feed_tss_rule(m, t):
    """Clarifier feed TSS (last zone), g/m3."""
    z = m.ZONES.last()
    return m.tss_per_cod * sum(m.conc[t, z, c] for c in SOLIDS_COD)


# --- ideal separator -----------------------------------------------------------------
def _ideal_effluent_rule(m, t, c):
    z = m.ZONES.last()
    if c not in PARTICULATES:
        return m.conc[t, z, c]
    if m.effluent_tss_fixed == 0.0:
        return 0.0
    return m.conc[t, z, c] * (m.effluent_tss_fixed / m.feed_tss_g_m3[t])


def _ideal_underflow_rule(m, t, c):
    z = m.ZONES.last()
    if c not in PARTICULATES:
        return m.conc[t, z, c]
    p = m.period_of_step[t]
    return (m.feed_m3_d[p] * m.conc[t, z, c] - m.effluent_m3_d[p] * m.effluent_conc[t, c]) / m.underflow_m3_d[p]


def _ideal_underflow(m, ts, p, c):
    """Underflow at the state of step ``ts`` with the flows of period ``p``."""
    if p == m.period_of_step[ts] or c not in PARTICULATES:
        return m.underflow_conc[ts, c]
    z = m.ZONES.last()
    return (m.feed_m3_d[p] * m.conc[ts, z, c] - (m.feed_m3_d[p] - m.underflow_m3_d[p]) * m.effluent_conc[ts, c]) \
        / m.underflow_m3_d[p]


def attach_ideal_separator(m, data) -> None:
    """Add the ideal separator's ``effluent_conc`` and ``underflow_conc`` expressions."""
    m.effluent_tss_fixed = float(data.clarifier.effluent_tss_mg_L)
    m.feed_tss_g_m3 = pyo.Expression(m.STEPS, rule=_feed_tss_rule)
    m.effluent_conc = pyo.Expression(m.STEPS, m.COMPONENTS, rule=_ideal_effluent_rule)
    m.underflow_conc = pyo.Expression(m.STEPS, m.COMPONENTS, rule=_ideal_underflow_rule)
    m.underflow_at = lambda ts, p, c: _ideal_underflow(m, ts, p, c)


# --- layered settler -------------------------------------------------------------------
def _layer_tss_definition_rule(m, t, layer):
    """settler_tss = tss_per_cod * particulate COD of the layer."""
    return m.settler_tss[t, layer] == m.tss_per_cod * sum(m.settler_conc[t, layer, c] for c in SOLIDS_COD)


def _layer_gravity_flux_rule(m, t, layer):
    return settling_physics.gravity_flux_g_m2_d(m.settler_tss[t, layer], *_settling_parameters(m, t))


def _settling_parameters(m, t):
    s = m.settler
    return s.fns * m.feed_tss_g_m3[t], s.v0_max_m_d, s.v0_m_d, s.rh_m3_g, s.rp_m3_g


def _flux_peak_rule(m, t):
    return settling_physics.flux_peak_tss_g_m3(*_settling_parameters(m, t))


def _sending_flux_rule(m, t, layer):
    x_min, *rest = _settling_parameters(m, t)
    return settling_physics.sending_flux_g_m2_d(m.settler_tss[t, layer], x_min, m.settler_flux_peak_tss[t], *rest)


def _receiving_flux_rule(m, t, layer):
    x_min, *rest = _settling_parameters(m, t)
    return settling_physics.receiving_flux_g_m2_d(m.settler_tss[t, layer], x_min, m.settler_flux_peak_tss[t], *rest)


def _settling_flux_definition_rule(m, t, layer):
    """w_l X_l = J_l, the Godunov flux from ``layer`` to the one below (smoothed, see module notes)."""
    a, b = m.settler_sending_flux[t, layer], m.settler_receiving_flux[t, layer + 1]
    if layer >= m.settler_feed_layer:
        flux = settling_physics.interface_flux_g_m2_d(a, b)
    else:
        flux = settling_physics.interface_flux_g_m2_d(a, b, m.settler_tss[t, layer + 1], m.settler.x_threshold_g_m3,
                                                      m.settler_gravity_flux[t, layer])
    return m.settler_velocity[t, layer] * m.settler_tss[t, layer] == flux


def settler_rhs(m, ts, p, layer, c):
    """dX/dt of component ``c`` in one settler layer, g/m3/d: state of step ``ts``, flows of period ``p``."""
    n, f = m.settler_layers, m.settler_feed_layer
    x = m.settler_conc
    up = m.effluent_m3_d[p] / m.settler_area_m2  # m/d
    down = m.underflow_m3_d[p] / m.settler_area_m2
    if layer < f:
        bulk = up * (x[ts, layer + 1, c] - x[ts, layer, c])
    elif layer == f:
        feed = m.feed_m3_d[p] / m.settler_area_m2 * m.conc[ts, m.ZONES.last(), c]
        bulk = feed - (up + down) * x[ts, layer, c]
    else:
        bulk = down * (x[ts, layer - 1, c] - x[ts, layer, c])
    settle = 0.0
    if c in PARTICULATES:
        if layer > 1:
            settle = settle + m.settler_velocity[ts, layer - 1] * x[ts, layer - 1, c]
        if layer < n:
            settle = settle - m.settler_velocity[ts, layer] * x[ts, layer, c]
    return (bulk + settle) / m.settler_layer_height_m


def _settler_rhs_rule(m, t, layer, c):
    return settler_rhs(m, t, m.period_of_step[t], layer, c)


def _settler_layer_balance_rule(m, t, layer, c):
    """Mass balance of component ``c`` in one settler layer (bulk flow + settling = accumulation)."""
    return time_balance(m, t, StepSlice(m.settler_conc, layer, c), StepSlice(m.settler_rhs, layer, c))


def _layered_effluent_rule(m, t, c):
    return m.settler_conc[t, 1, c]


def _layered_underflow_rule(m, t, c):
    return m.settler_conc[t, m.settler_layers, c]


def attach_layered_settler(m, data) -> None:
    """Add the layered settler's variables, balances and outlet expressions."""
    clar = data.clarifier
    m.settler = clar.settling
    m.settler_layers = int(clar.layers)
    m.settler_feed_layer = int(clar.feed_layer)
    m.settler_area_m2 = float(clar.area_m2)
    m.settler_layer_height_m = float(clar.height_m) / clar.layers
    m.LAYERS = pyo.RangeSet(m.settler_layers)
    m.INTERFACES = pyo.RangeSet(m.settler_layers - 1)
    m.feed_tss_g_m3 = pyo.Expression(m.STEPS, rule=_feed_tss_rule)
    m.settler_conc = pyo.Var(m.STEPS, m.LAYERS, m.COMPONENTS, bounds=(0.0, None), initialize=1.0,
                             doc="concentration in each settler layer (top = 1), g/m3 (SALK mol/m3)")
    m.settler_tss = pyo.Var(m.STEPS, m.LAYERS, bounds=(1e-6, None), initialize=100.0,
                            doc="suspended solids of each layer, g/m3")
    m.settler_velocity = pyo.Var(m.STEPS, m.INTERFACES, bounds=(0.0, None), initialize=10.0,
                                 doc="effective settling velocity out of a layer, J_l / X_l, m/d")
    m.settler_gravity_flux = pyo.Expression(m.STEPS, m.LAYERS, rule=_layer_gravity_flux_rule,
                                            doc="gravity flux vs X of each layer, g/(m2 d)")
    m.settler_flux_peak_tss = pyo.Expression(m.STEPS, rule=_flux_peak_rule,
                                             doc="concentration where the gravity flux is largest, g/m3")
    m.settler_sending_flux = pyo.Expression(m.STEPS, m.LAYERS, rule=_sending_flux_rule,
                                            doc="gravity flux with the solids capped at the flux maximum, g/(m2 d)")
    m.settler_receiving_flux = pyo.Expression(m.STEPS, m.LAYERS, rule=_receiving_flux_rule,
                                              doc="gravity flux with the solids floored at the flux maximum, g/(m2 d)")
    m.settler_tss_definition = pyo.Constraint(m.STEPS, m.LAYERS, rule=_layer_tss_definition_rule)
    m.settler_flux_definition = pyo.Constraint(m.STEPS, m.INTERFACES, rule=_settling_flux_definition_rule)
    m.settler_rhs = pyo.Expression(m.STEPS, m.LAYERS, m.COMPONENTS, rule=_settler_rhs_rule)
    m.settler_balance = pyo.Constraint(m.STEPS, m.LAYERS, m.COMPONENTS, rule=_settler_layer_balance_rule)
    m.effluent_conc = pyo.Expression(m.STEPS, m.COMPONENTS, rule=_layered_effluent_rule)
    m.underflow_conc = pyo.Expression(m.STEPS, m.COMPONENTS, rule=_layered_underflow_rule)
    m.underflow_at = lambda ts, p, c: m.underflow_conc[ts, c]
