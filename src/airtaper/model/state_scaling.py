"""Scaling factors for the solver, in the model's ``scaling_factor`` Suffix.

Concentrations span about 1e-4 to 3e3 g/m3. Each variable gets ``1 / max(|x|, floor)``
from its current value (call after initialisation), so scaled variables are of
order one; each balance gets ``1 / (D max(|C|, floor))`` with ``D`` the dilution
rate of its volume (1/d), the size of its largest terms, so scaled residuals are
of order one too. ``airtaper.solve.solve_nlp`` passes the Suffix to Ipopt as
user scaling.
"""

from __future__ import annotations

#: Concentration below which scaling stops growing, g/m3. Common practice (no source).
CONC_FLOOR_g_m3 = 1e-2


def _factor(value, floor):
    return 1.0 / max(abs(value if value is not None else 0.0), floor)


def apply_scaling(m) -> None:
    """Fill ``m.scaling_factor`` from the current values (see the module notes)."""
    sf = m.scaling_factor
    data = m.train_data
    index = {z: i for i, z in enumerate(data.zones)}
    for (t, z, c), v in m.conc.items():
        sf[v] = _factor(v.value, CONC_FLOOR_g_m3)
        i = index[z]
        p = m.period_of_step[t] - 1
        dilution = float(data.zone_flow_m3_d[p, i]) / float(data.volume_m3[i])
        sf[m.zone_balance[t, z, c]] = _factor(v.value, CONC_FLOOR_g_m3) / dilution
    if hasattr(m, "settler_conc"):
        height = m.settler_layer_height_m
        for (t, layer, c), v in m.settler_conc.items():
            sf[v] = _factor(v.value, CONC_FLOOR_g_m3)
            p = m.period_of_step[t]
            rate = (m.feed_m3_d[p] / m.settler_area_m2) / height
            sf[m.settler_balance[t, layer, c]] = _factor(v.value, CONC_FLOOR_g_m3) / rate
        for (t, layer), v in m.settler_tss.items():
            sf[v] = _factor(v.value, 1.0)
            sf[m.settler_tss_definition[t, layer]] = _factor(v.value, 1.0)
        for (t, layer), v in m.settler_velocity.items():
            sf[v] = _factor(v.value, 1e-2)
            flux = abs(v.value or 0.0) * (m.settler_tss[t, layer].value or 1.0)
            sf[m.settler_flux_definition[t, layer]] = _factor(flux, 1.0)
    for p, v in m.waste_m3_d.items():
        sf[v] = _factor(v.value, 1.0)
    for key, v in m.airflow_Sm3_h.items():
        sf[v] = _factor(v.value, 1.0)
    if hasattr(m, "srt_target"):
        sf[m.srt_target] = _factor(sum(m.point_weight[t] * (m.solids_inventory_g[t]() or 0.0) for t in m.STEPS), 1.0)
