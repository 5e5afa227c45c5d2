"""The IWA Benchmark Simulation Model no. 1 plant, built in code from its published values.

Five completely mixed reactors in series (two anoxic of 1000 m3, three aerated
of 1333 m3), internal recycle from reactor 5 to reactor 1, return sludge from
the clarifier underflow to reactor 1, a fixed waste flow, the constant influent,
fixed KLa (0, 0, 240, 240, 84 /d) with the oxygen saturation fixed at 8 g/m3,
the 15 degC parameter set with no temperature correction, and a 10-layer
Takacs clarifier fed at its 6th layer from the bottom (or an ideal separator
for comparison).

Values from Alex et al. (2008), sections 2.2-2.4 (plant layout, settler,
constant influent), identical to Copp (2002).

References
----------
Alex, J., Benedetti, L., Copp, J., Gernaey, K.V., Jeppsson, U., Nopens, I.,
Pons, M.-N., Steyer, J.-P., Vanrolleghem, P. (2008). Benchmark Simulation
Model no. 1 (BSM1). IWA Task Group on Benchmarking of Control Strategies.
Copp, J.B. (ed.) (2002). The COST Simulation Benchmark: Description and
Simulator Manual. COST Action 624 & 682.
Takacs, I., Patry, G.G., Nolasco, D. (1991). A dynamic model of the
clarification-thickening process. Water Research 25(10), 1263-1271.
"""

from __future__ import annotations

from airtaper import units
from airtaper.layout.types import (
    ASM1_COMPONENTS,
    Clarifier,
    Fractionation,
    Header,
    Horizon,
    Influent,
    InletAir,
    Kinetics,
    Layout,
    Limits,
    Operation,
    Plant,
    Recycle,
    ReturnSludge,
    Settling,
    StepFeed,
    Wasting,
    Zone,
)

# Alex et al. (2008) section 2.3: reactor volumes (m3) and KLa (1/d) of the open-loop case.
BSM1_VOLUMES_m3 = (1000.0, 1000.0, 1333.0, 1333.0, 1333.0)
BSM1_KLA_per_d = (0.0, 0.0, 240.0, 240.0, 84.0)
BSM1_DO_SAT_mg_L = 8.0
# Flows (m3/d): constant influent, internal recycle (3 x Q0), return sludge (1 x Q0), waste.
BSM1_Q_INFLUENT_m3_d = 18446.0
BSM1_Q_INTERNAL_m3_d = 55338.0
BSM1_Q_RETURN_m3_d = 18446.0
BSM1_Q_WASTE_m3_d = 385.0
BSM1_TEMPERATURE_C = 15.0
# Constant influent (Alex et al. 2008 section 2.4), g/m3 (SALK mol/m3), ASM1 order.
BSM1_INFLUENT = dict(SI=30.0, SS=69.5, XI=51.2, XS=202.32, XBH=28.17, XBA=0.0, XP=0.0,
                     SO=0.0, SNO=0.0, SNH=31.56, SND=6.95, XND=10.59, SALK=7.0)
# Settler (Alex et al. 2008 section 2.3.3): 10 layers of 0.4 m, 1500 m2, double-exponential
# settling velocity (Takacs et al. 1991). The feed enters the 6th layer counted from the
# bottom, i.e. the 5th from the top (airtaper counts from the top). Feeding one layer lower
# (6th from the top) gives an effluent TSS of 10.8 g/m3 at steady state instead of the
# report's 12.497 g/m3, so the open-loop table pins the position.
BSM1_SETTLING = Settling(v0_max_m_d=250.0, v0_m_d=474.0, rh_m3_g=0.000576, rp_m3_g=0.00286,
                         fns=0.00228, x_threshold_g_m3=3000.0)
BSM1_SETTLER_AREA_m2 = 1500.0
BSM1_SETTLER_HEIGHT_m = 4.0
BSM1_SETTLER_LAYERS = 10
BSM1_FEED_LAYER_FROM_TOP = 5
# Reactor depth is not part of the benchmark (fixed KLa makes it irrelevant); 4 m is an
# assumed side-water depth for display only: common practice (no source).
_ASSUMED_DEPTH_m = 4.0


def _zone(i: int) -> Zone:
    volume = BSM1_VOLUMES_m3[i]
    kla = BSM1_KLA_per_d[i]
    aerated = kla > 0.0
    return Zone(
        id=f"R{i + 1}",
        kind="aerated" if aerated else "anoxic",
        volume_m3=volume,
        depth_m=_ASSUMED_DEPTH_m,
        area_m2=volume / _ASSUMED_DEPTH_m,
        do_min_mg_L=0.0 if aerated else None,
        do_max_mg_L=BSM1_DO_SAT_mg_L if aerated else None,
        alpha=1.0,
        fouling=1.0,
        beta=1.0,
        grid=None,
        valve_capacity_Sm3_h=None,
        drop_leg_k_kPa_per_Sm3_h2=0.0,
        mixing_airflow_min_Sm3_h_m2=0.0,
        fixed_kla_per_d=kla if aerated else None,
        fixed_do_sat_mg_L=BSM1_DO_SAT_mg_L if aerated else None,
    )


def bsm1_influent_measured() -> dict[str, float]:
    """Measured quantities of the constant influent, derived from its components (display only).

    Total COD, soluble COD (SI + SS), TKN with i_XB 0.08 and i_XP 0.06 of the
    15 degC set, TSS = 0.75 x particulate COD.
    """
    c = BSM1_INFLUENT
    cod_t = sum(c[k] for k in ("SI", "SS", "XI", "XS", "XBH", "XBA", "XP"))
    tkn = c["SNH"] + c["SND"] + c["XND"] + 0.08 * (c["XBH"] + c["XBA"]) + 0.06 * (c["XP"] + c["XI"])
    return {
        "cod_total_mg_L": cod_t,
        "cod_soluble_mg_L": c["SI"] + c["SS"],
        "tkn_mg_L": tkn,
        "nh4_mg_L": c["SNH"],
        "tss_mg_L": 0.75 * sum(c[k] for k in ("XI", "XS", "XBH", "XBA", "XP")),
        "alkalinity_mol_m3": c["SALK"],
    }


def bsm1_layout(clarifier: str = "layered", n_periods: int = 24) -> Layout:
    """The BSM1 open-loop plant as a :class:`Layout`.

    Parameters
    ----------
    clarifier : "layered" or "ideal"
        The benchmark's 10-layer Takacs settler, or an ideal separator with
        no solids in the effluent (for comparison; not part of the benchmark).
    n_periods : int
        Periods of the day (all with the same constant influent).

    Returns
    -------
    Layout with ``path == "<bsm1>"``.
    """
    if clarifier not in ("layered", "ideal"):
        raise ValueError(f"clarifier must be 'layered' or 'ideal', got {clarifier!r}")
    n = int(n_periods)
    rep = lambda v: tuple(float(v) for _ in range(n))  # noqa: E731
    meas = bsm1_influent_measured()
    cod_t = meas["cod_total_mg_L"]
    c = BSM1_INFLUENT
    n_org = c["SND"] + c["XND"]
    fractionation = Fractionation(
        si_of_cod=c["SI"] / cod_t, xi_of_cod=c["XI"] / cod_t, xbh_of_cod=c["XBH"] / cod_t,
        xba_of_cod=c["XBA"] / cod_t, snd_of_organic_n=c["SND"] / n_org, sno_mg_L=c["SNO"],
    )
    row = tuple(float(c[k]) for k in ASM1_COMPONENTS)
    influent = Influent(
        source="constant",
        flow_m3_d=rep(BSM1_Q_INFLUENT_m3_d),
        cod_total_mg_L=rep(cod_t),
        cod_soluble_mg_L=rep(meas["cod_soluble_mg_L"]),
        tkn_mg_L=rep(meas["tkn_mg_L"]),
        nh4_mg_L=rep(meas["nh4_mg_L"]),
        tss_mg_L=rep(meas["tss_mg_L"]),
        alkalinity_mol_m3=rep(meas["alkalinity_mol_m3"]),
        fractionation=fractionation,
        asm1_mg_L=tuple(row for _ in range(n)),
    )
    layered = clarifier == "layered"
    clar = Clarifier(
        kind=clarifier,
        effluent_tss_mg_L=0.0,
        area_m2=BSM1_SETTLER_AREA_m2 if layered else None,
        height_m=BSM1_SETTLER_HEIGHT_m if layered else None,
        layers=BSM1_SETTLER_LAYERS,
        feed_layer=BSM1_FEED_LAYER_FROM_TOP,
        settling=BSM1_SETTLING if layered else None,
        tss_per_cod=0.75,
    )
    return Layout(
        path="<bsm1>",
        plant=Plant(name="Benchmark Simulation Model no. 1", elevation_m=0.0,
                    temperature_C=rep(BSM1_TEMPERATURE_C), barometric_pressure_kPa=None, salinity_g_kg=0.0),
        zones=tuple(_zone(i) for i in range(5)),
        diffuser_types=(),
        step_feed=(StepFeed(zone="R1", fraction=1.0),),
        recycles=(Recycle(id="internal", from_zone="R5", to_zone="R1",
                          flow_m3_d=rep(BSM1_Q_INTERNAL_m3_d), ratio=3.0),),
        return_sludge=ReturnSludge(to_zone="R1", flow_m3_d=rep(BSM1_Q_RETURN_m3_d), ratio=1.0),
        wasting=Wasting(flow_m3_d=rep(BSM1_Q_WASTE_m3_d), srt_d=None),
        clarifier=clar,
        blowers=(),
        header=Header(loss_k_kPa_per_Sm3_h2=0.0, min_valve_loss_kPa=0.0, aggregate_efficiency=0.7),
        inlet_air=InletAir(temperature_C=rep(20.0), pressure_kPa=None, filter_loss_kPa=0.0),
        influent=influent,
        limits=Limits(nh4_mean_mg_L=None, nh4_max_mg_L=None, tn_mean_mg_L=None),
        tariff=None,
        horizon=Horizon(n_periods=n, period_h=units.HOURS_PER_DAY / n, steps_per_period=4),
        kinetics=Kinetics(parameter_set="bsm1_15C", overrides=(), temperature_correction=False),
        operation=Operation(baseline_do_setpoint_mg_L=2.0, objective="energy", smoothing_weight=0.0),
        notes="IWA Benchmark Simulation Model no. 1, open loop, constant influent (Alex et al. 2008).",
    )
