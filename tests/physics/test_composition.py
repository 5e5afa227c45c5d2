"""The physics functions composed the way the model layer uses them: one expression per zone,
differentiable by Pyomo, and equal to the numpy evaluation."""

import numpy as np
import pyomo.environ as pyo
import pytest
from pyomo.core.expr.calculus.derivatives import Modes, differentiate

from airtaper.physics import atmosphere, blower, depth, pressure, sote, transfer

N_DIFFUSERS = (420.0, 380.0, 300.0)
VOLUMES_m3 = (1200.0, 1200.0, 1000.0)
SUBMERGENCE_m = 5.2
DENSITY_percent = 10.0


def _curves():
    q = np.array([1.0, 2.0, 3.0, 4.0, 6.0, 8.0])
    sote_curve = sote.fit_sote_curve(q, [35.0, 32.6, 31.4, 30.5, 29.2, 28.4], DENSITY_percent, SUBMERGENCE_m)
    headloss = pressure.fit_headloss_curve(q, [2.3, 2.45, 2.7, 2.95, 3.6, 4.4])
    return sote_curve, headloss


def plant(airflows, do, sote_curve, headloss):
    """Oxygen transfer of each zone and total blower power for zone airflows (Sm3/h)."""
    baro = atmosphere.barometric_pressure_kPa(350.0)
    c_inf = depth.c_inf20_mg_L(SUBMERGENCE_m)
    otr = []
    required = []
    for q, n, v, c in zip(airflows, N_DIFFUSERS, VOLUMES_m3, do, strict=True):
        per_diffuser = q / n
        e = sote_curve.sote_fraction(per_diffuser, DENSITY_percent, SUBMERGENCE_m)
        kla = transfer.field_kla_per_h(q, e, v, 0.55, 0.85, 16.0, c_inf)
        csat = transfer.field_do_sat_mg_L(16.0, c_inf, 0.96, baro)
        otr.append(transfer.oxygen_transfer_rate_g_m3_h(kla, csat, c))
        drop = pressure.pipe_loss_kPa(2e-7, q)
        required.append(pressure.zone_required_pressure_gauge_kPa(SUBMERGENCE_m, headloss.headloss_kPa(per_diffuser),
                                                                  drop))
    header = pressure.header_pressure_gauge_kPa(required, 1.0, smoothing_kPa=0.02)
    total = sum(airflows)
    p2 = pressure.blower_discharge_pressure_kPa(header, baro, pressure.pipe_loss_kPa(1e-8, total))
    power = blower.blower_power_kW(total, 20.0, pressure.blower_inlet_pressure_kPa(baro, 0.3), p2, 0.72)
    return otr, power


def test_model_chain_matches_numpy_and_differentiates():
    sote_curve, headloss = _curves()
    airflows = (1300.0, 1000.0, 700.0)
    do = (1.2, 2.0, 2.4)
    m = pyo.ConcreteModel()
    m.q = pyo.Var(range(3), initialize=dict(enumerate(airflows)))
    m.c = pyo.Var(range(3), initialize=dict(enumerate(do)))
    otr_expr, power_expr = plant([m.q[i] for i in range(3)], [m.c[i] for i in range(3)], sote_curve, headloss)
    otr_num, power_num = plant(airflows, do, sote_curve, headloss)
    for e, x in zip(otr_expr, otr_num, strict=True):
        assert pyo.value(e) == pytest.approx(x, rel=1e-10)
    assert pyo.value(power_expr) == pytest.approx(power_num, rel=1e-10)

    # Reverse-mode derivatives of the power with respect to each airflow against central differences.
    grads = differentiate(power_expr, wrt_list=[m.q[i] for i in range(3)], mode=Modes.reverse_numeric)
    for i in range(3):
        h = 1e-3 * airflows[i]
        up = list(airflows)
        dn = list(airflows)
        up[i] += h
        dn[i] -= h
        fd = (plant(up, do, sote_curve, headloss)[1] - plant(dn, do, sote_curve, headloss)[1]) / (2 * h)
        assert grads[i] == pytest.approx(fd, rel=1e-5)
        assert grads[i] > 0
    # Transfer rises with airflow and falls with DO.
    d_otr = differentiate(otr_expr[0], wrt_list=[m.q[0], m.c[0]], mode=Modes.reverse_numeric)
    assert d_otr[0] > 0 and d_otr[1] < 0
