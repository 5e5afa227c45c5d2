"""Every default value of the layout format, with where it comes from.

One place for defaults: the parser fills in these values when a key is left out,
and docs/layout-format.md lists the same values with the same sources. A value
with no published source says "common practice (no source)"; a value recalled
rather than looked up says "from memory".
"""

from __future__ import annotations

from airtaper.layout.bsm1 import BSM1_SETTLING
from airtaper.physics.depth import DEFAULT_EFFECTIVE_DEPTH_FRACTION

# --- horizon ----------------------------------------------------------------
#: Periods per day (hourly periods). Common practice (no source).
N_PERIODS = 24
#: Integration steps per period in the diurnal model. Common practice (no source).
STEPS_PER_PERIOD = 4

# --- plant ------------------------------------------------------------------
#: Salinity of the mixed liquor, g/kg (fresh municipal wastewater). Common practice (no source).
SALINITY_g_kg = 0.0

# --- zones: field oxygen transfer -------------------------------------------
#: alpha, process-water / clean-water kLa ratio for fine-pore diffusers; typical
#: range 0.4-0.7 (from memory).
ALPHA = 0.5
#: beta, process-water / clean-water saturation ratio; typical 0.95-0.99 for
#: municipal wastewater (from memory).
BETA = 0.95
#: F, diffuser fouling factor (transfer of a fouled / new diffuser); typical
#: 0.65-0.9 (from memory).
FOULING = 0.8
#: de, effective-depth fraction in C*inf = C*s (1 + de Df / Pa) for fine-pore
#: grids. Metcalf & Eddy, Wastewater Engineering, 5th ed., effective-depth form;
#: range 0.25-0.45 (from memory).
EFFECTIVE_DEPTH_FRACTION = DEFAULT_EFFECTIVE_DEPTH_FRACTION  # one home: airtaper.physics.depth
#: Mixing minimum airflow of an aerated zone per m2 of floor, Sm3/(m2 h) (from memory).
MIXING_AIRFLOW_MIN_Sm3_h_m2 = 2.2
#: Drop-leg loss coefficient k in dp = k Q^2, kPa/(Sm3/h)^2; 0 = drop-leg loss
#: not modelled separately (it is then part of the minimum valve loss).
#: Common practice (no source).
DROP_LEG_K_kPa_per_Sm3_h2 = 0.0
#: DO minimum applied to every aerated zone that sets none, mg/L.
#: Common practice (no source).
DO_MIN_mg_L = 0.5

# --- diffusers --------------------------------------------------------------
#: Practical upper bound of diffuser density (membrane area / floor area) for a
#: full-floor grid, percent. Above it the discs no longer fit between their
#: holders and pipes. Common practice (no source).
DENSITY_MAX_PERCENT = 25.0

# --- header and blowers -----------------------------------------------------
#: Pressure loss kept across the most open zone valve, kPa, so that every valve
#: keeps control authority. Common practice (no source).
MIN_VALVE_LOSS_kPa = 0.5
#: Wire-to-air efficiency used when a layout has no blowers at all (benchmark
#: plants with fixed kLa). Common practice (no source).
AGGREGATE_EFFICIENCY_NO_BLOWERS = 0.7
#: Blower kinds the format knows.
BLOWER_KINDS = ("centrifugal", "turbo", "positive_displacement", "screw")
#: Minimum run and rest times of a blower once started or stopped, h: none unless the
#: layout gives them (the motor maker's starts-per-hour rule is site data). Common practice (no source).
BLOWER_MIN_UP_h = 0.0
BLOWER_MIN_DOWN_h = 0.0
#: Cost of one blower start, currency: none unless given. Common practice (no source).
BLOWER_START_COST = 0.0

# --- inlet air --------------------------------------------------------------
#: Inlet air temperature when none is given, degC (the temperature of the
#: standard m3). Common practice (no source).
INLET_TEMPERATURE_C = 20.0
#: Inlet filter and silencer loss, kPa; clean filters lose about 0.5-1.5 kPa (from memory).
INLET_FILTER_LOSS_kPa = 0.5

# --- clarifier --------------------------------------------------------------
#: Effluent TSS of the ideal separator, mg/L. Common practice (no source).
EFFLUENT_TSS_mg_L = 10.0
#: Layers of the layered (one-dimensional) settler. Alex et al. (2008),
#: Benchmark Simulation Model no. 1 (BSM1), IWA, use 10.
CLARIFIER_LAYERS = 10
#: TSS per particulate COD, g TSS / g COD. BSM1 (Alex et al. 2008) uses 0.75.
TSS_PER_COD = 0.75
#: Takacs et al. (1991) double-exponential settling parameters, the BSM1 values
#: (Alex et al. 2008); their one home is the benchmark factory.
SETTLING_V0_MAX_m_d = BSM1_SETTLING.v0_max_m_d  # 250 m/d
SETTLING_V0_m_d = BSM1_SETTLING.v0_m_d  # 474 m/d
SETTLING_RH_m3_g = BSM1_SETTLING.rh_m3_g  # 0.000576 m3/g
SETTLING_RP_m3_g = BSM1_SETTLING.rp_m3_g  # 0.00286 m3/g
SETTLING_FNS = BSM1_SETTLING.fns  # 0.00228
SETTLING_X_THRESHOLD_g_m3 = BSM1_SETTLING.x_threshold_g_m3  # 3000 g/m3


def feed_layer(layers: int) -> int:
    """Default feed layer counted from the top: the middle layer, ``layers // 2``.

    For 10 layers this is the 5th from the top, i.e. the 6th from the bottom,
    as in BSM1 (Alex et al. 2008).
    """
    return max(2, layers // 2)


# --- influent fractionation (fractions of total COD unless named otherwise) --
# Typical raw municipal wastewater, Henze et al. (2008), Biological Wastewater
# Treatment: Principles, Modelling and Design, IWA Publishing (values from memory).
SI_OF_COD = 0.05  # soluble inert COD
XI_OF_COD = 0.13  # particulate inert COD
XBH_OF_COD = 0.07  # heterotrophic biomass
XBA_OF_COD = 0.0  # autotrophic biomass (negligible in raw sewage)
SND_OF_ORGANIC_N = 0.4  # soluble share of the biodegradable organic N
SNO_mg_L = 0.0  # influent nitrate-N

#: N content of biomass (i_XB) and of inert particulate products (i_XP), g N / g COD,
#: per parameter set, used only to display TKN for layouts that give ASM1
#: components directly: the values of airtaper.process.asm1 (asm1_20C: Henze et al.
#: 1987 typical values, from memory; bsm1_15C: Alex et al. 2008). Overrides of
#: i_XB / i_XP in [kinetics.overrides] take precedence.
DISPLAY_N_CONTENT = {"asm1_20C": (0.086, 0.06), "bsm1_15C": (0.08, 0.06)}
DISPLAY_I_XB, DISPLAY_I_XP = DISPLAY_N_CONTENT["asm1_20C"]

# --- kinetics and operation -------------------------------------------------
#: ASM1 parameter set (airtaper.process.asm1) and temperature correction.
PARAMETER_SET = "asm1_20C"
PARAMETER_SETS = ("asm1_20C", "bsm1_15C")
TEMPERATURE_CORRECTION = True
#: ASM1 parameter names that [kinetics.overrides] may set (Henze et al. 1987
#: symbols, the names airtaper.process.asm1 uses).
KINETIC_PARAMETER_NAMES = (
    "mu_H", "K_S", "K_OH", "K_NO", "b_H", "eta_g", "eta_h", "k_h", "K_X",
    "mu_A", "K_NH", "b_A", "K_OA", "k_a", "Y_H", "Y_A", "f_P", "i_XB", "i_XP",
)
#: Uniform DO setpoint of the baseline (conventional control), mg/L.
#: Common practice (no source).
BASELINE_DO_SETPOINT_mg_L = 2.0
#: Weight of the penalty on period-to-period airflow change, dimensionless
#: (penalty = weight x sum over zones and periods of (dQ / Q_zone_max)^2, added to
#: the objective normalised by its baseline value). Small so it only breaks ties
#: and damps chatter; the optimisation may retune it. Common practice (no source).
SMOOTHING_WEIGHT = 1e-3
#: Demand-charge billing period, days. Common practice (no source).
DEMAND_PERIOD_DAYS = 30.0

# --- plausibility: values outside these ranges give a warning, not an error --
# All common practice (no source).
WARN_ZONE_VOLUME_m3 = (50.0, 50_000.0)
WARN_DEPTH_m = (2.0, 12.0)
WARN_TRAIN_HRT_h = (2.0, 72.0)
WARN_WATER_TEMPERATURE_C = (5.0, 35.0)
WARN_ELEVATION_m = (-100.0, 3500.0)
WARN_MEAN_FLOW_m3_d = (10.0, 2_000_000.0)
WARN_COD_TOTAL_mg_L = (50.0, 2000.0)
WARN_SRT_d = (3.0, 40.0)
WARN_RECYCLE_RATIO = 6.0
WARN_AREA_MISMATCH = 0.15  # relative difference of area_m2 from volume_m3 / depth_m
WARN_GRID_ABOVE_FLOOR_m = 1.0  # depth - submergence

# --- unit slips: values that are surely or likely typed in the wrong unit ----
# The check names the likely cause in its message. All common practice (no source).
#: Every SOTE test point at or below this, percent: the points were typed as fractions (0.22 for 22 %): error.
SOTE_FRACTION_MAX_percent = 1.0
#: Above this elevation, m, with no barometric pressure given, warn that it may be in feet (2953 ft = 900 m).
WARN_ELEVATION_FEET_m = 2000.0
#: A side-water depth above this, m, was likely typed in mm (5500 for 5.5 m): warning.
WARN_DEPTH_MM_m = 100.0
#: An influent whose total COD stays below this in every row or period, mg/L, was typed in g/L: error
#: (raw municipal wastewater always carries more).
COD_GRAMS_PER_LITRE_MAX_mg_L = 10.0
#: An alkalinity above this, mol/m3, was likely given in mg/L as CaCO3 (250 mg/L = 5 mol/m3): warning.
WARN_ALKALINITY_mol_m3 = 30.0
#: Most zones in one train: each zone adds 13 states per time point to the optimisation, and a train of this
#: many zones already needs hours of solving on a desktop machine.
MAX_ZONES = 60
#: Upper bounds of [kinetics.overrides], wide envelopes around the ranges reported for ASM1 by Henze et al.
#: (1987), Activated Sludge Model No. 1, IAWPRC Scientific and Technical Report No. 1 (from memory); a value
#: beyond one is a typing slip (a growth rate per hour typed as per day is 24 times too small, not too large).
#: Units: mu, b, k_h per d; K_ in g/m3 (K_X g COD/g COD); k_a m3/(g COD d); yields and fractions g/g.
KINETIC_PARAMETER_MAX = {
    "mu_H": 20.0, "K_S": 500.0, "K_OH": 5.0, "K_NO": 5.0, "b_H": 5.0, "eta_g": 1.0, "eta_h": 1.0,
    "k_h": 20.0, "K_X": 5.0, "mu_A": 5.0, "K_NH": 10.0, "b_A": 1.0, "K_OA": 5.0, "k_a": 1.0,
    "Y_H": 0.95, "Y_A": 0.95, "f_P": 0.5, "i_XB": 0.2, "i_XP": 0.2,
}
#: Largest concentration an influent column may hold, mg/L: a tenth of the water's own mass; above it a number
#: is surely mistyped (error).
CONCENTRATION_MAX_mg_L = 100_000.0
#: Largest alkalinity, mol/m3 (error above; usual municipal values are 2-10).
ALKALINITY_MAX_mol_m3 = 1000.0
#: Largest influent flow, m3/d (error above; the largest plants treat a few million m3/d).
FLOW_MAX_m3_d = 1.0e8
#: A CSV cell this many times above or below its column's median over the day: warning (another unit?).
WARN_ROW_OUTLIER_FACTOR = 10.0
#: Usual ratios of the influent's daily means, TKN / COD and TSS / COD: warnings outside.
WARN_TKN_PER_COD = (0.02, 0.3)
WARN_TSS_PER_COD = (0.1, 1.5)
#: Lowest usual wire-to-air blower efficiency: warning below.
WARN_BLOWER_EFFICIENCY_MIN = 0.2
#: Usual NH4-N / TKN of the daily means (warning outside) and lowest usual alkalinity, mol/m3 (warning below).
WARN_NH4_PER_TKN = (0.3, 1.0)
WARN_ALKALINITY_MIN_mol_m3 = 0.5
#: A CSV's last row holding until 24 h this many times longer than the median row: warning (times in minutes?).
WARN_LAST_ROW_FACTOR = 4.0
#: Shallowest usual clean-water test submergence of a diffuser test point, m (warning below).
WARN_TEST_SUBMERGENCE_MIN_m = 0.5

# --- load days ([[load_days]]) ----------------------------------------------
#: Named days a [[load_days]] table may start from (``basis``): (flow factor, load factor) against the annual
#: average day. Peaking factors of municipal plants reported in design handbooks: maximum month about
#: 1.2-1.4 x, peak day about 1.5-2.5 x (loads, ammonia above all, peak more than flow), minimum day about
#: 0.5-0.7 x (from memory; the ranges discussed in Metcalf & Eddy, Wastewater Engineering: Treatment and
#: Resource Recovery, 5th ed., 2014, ch. 3). The values are the low end of those ranges for dry-weather days;
#: a site's own records replace them. "winter" and "summer" keep the average flow and load and need the day's
#: water temperature (common practice (no source)).
LOAD_DAY_BASES = {
    "average_day": (1.0, 1.0),
    "maximum_month": (1.2, 1.3),
    "peak_day": (1.5, 1.8),
    "minimum_day": (0.7, 0.6),
    "winter": (1.0, 1.0),
    "summer": (1.0, 1.0),
}
#: Bases that say nothing without the day's own water temperature.
LOAD_DAY_BASES_NEEDING_TEMPERATURE = ("winter", "summer")
#: Flow or load factor when neither the day nor its basis gives one: the base profile as it is.
LOAD_DAY_FACTOR = 1.0
#: Factor on every zone's alpha for the day; 1 = the zones' own alpha. Common practice (no source).
LOAD_DAY_ALPHA_FACTOR = 1.0
#: Largest flow or load factor; a value above it is a typing slip (120 for 1.2 x).
LOAD_DAY_FACTOR_MAX = 10.0
#: Days in a year: the load days' weights should add up to this (warning when they miss by more than
#: WARN_LOAD_DAYS_YEAR_TOLERANCE days). Common practice (no source).
DAYS_PER_YEAR = 365.0
WARN_LOAD_DAYS_YEAR_TOLERANCE = 1.0

# --- capital costs ([capital]) ----------------------------------------------
#: Interest rate per year for annualising capital (capital recovery factor). Common practice (no source).
INTEREST_RATE = 0.05
#: Economic life of a diffuser grid, years (from memory: membranes are replaced after about 7-10 years,
#: holders and pipework last longer).
GRID_LIFE_YEARS = 15.0
#: Fixed cost of installing a grid in one zone when none is given. Common practice (no source).
COST_PER_ZONE = 0.0
#: An interest rate above this (as a fraction) was typed in percent (5 for 5 %): error.
INTEREST_RATE_MAX = 1.0
#: Whole increment of a grid's diffuser count when none is given (any whole count). Common practice (no source).
GRID_COUNT_STEP = 1
