"""Unit conversions and the physical constants behind them: the one place they live.

Conventions pinned here (see docs/glossary.md):

* **Standard cubic metre (Sm3)**: dry air at 20 degC and 101.325 kPa. Every
  ``airflow_Sm3_h`` in airtaper is in these units. The "normal" cubic metre
  (Nm3) is dry air at 0 degC and 101.325 kPa; convert with :func:`Nm3_to_Sm3`.
* Concentrations: 1 g/m3 == 1 mg/L.
* Pressures in kPa; water column at 4 degC-equivalent standard gravity
  (1 m H2O = 9.80665 kPa), the conventional definition (ISO 80000-4 annex,
  "conventional metre of water").

Values of the constants: CODATA 2018 (R), the US Standard Atmosphere 1976
(molar mass of dry air 28.9644 g/mol, O2 volume fraction 0.20946, standard
gravity 9.80665 m/s2, and its own defining constants for the troposphere),
IUPAC (O2 molar mass 31.998 g/mol). Ideal-gas properties of air for blower
power: ratio of specific heats k = 1.4 and cp = 1.005 kJ/(kg K), the customary
engineering values (common practice (no source)).

All functions are plain arithmetic, so they accept floats, numpy arrays and
Pyomo expressions alike.
"""

from __future__ import annotations

# --- constants --------------------------------------------------------------
R_J_mol_K = 8.314462618  # molar gas constant, CODATA 2018
G_m_s2 = 9.80665  # standard gravity
P_STD_kPa = 101.325  # standard atmosphere
T_STD_C = 20.0  # temperature of the standard m3
T_NORMAL_C = 0.0  # temperature of the normal m3
KELVIN = 273.15
M_AIR_kg_mol = 0.0289644  # dry air, US Standard Atmosphere 1976
M_O2_kg_mol = 0.031998  # IUPAC
Y_O2_AIR = 0.20946  # O2 volume (mole) fraction of dry air, US Standard Atmosphere 1976
KPA_PER_M_WATER = G_m_s2  # 1 m of conventional water column = 9.80665 kPa
HOURS_PER_DAY = 24.0
M_PER_FT = 0.3048  # international foot (exact by definition)
#: Alkalinity: mg/L as CaCO3 per mol/m3 (mmol/L) of alkalinity counted as HCO3- equivalents, half the molar
#: mass of CaCO3 (100.09 g/mol).
MG_CACO3_PER_MOL_ALK = 50.04
SECONDS_PER_HOUR = 3600.0
G_PER_KG = 1000.0

# Ideal-gas air for compression (blower) calculations.
K_AIR = 1.4  # ratio of specific heats cp/cv, dry air near ambient
CP_AIR_kJ_kg_K = 1.005  # isobaric specific heat of dry air near ambient

# US Standard Atmosphere 1976, defining constants of the lowest layer (0-11 km).
USSA_T0_K = 288.15  # sea-level temperature
USSA_P0_kPa = P_STD_kPa  # sea-level pressure
USSA_LAPSE_K_m = 0.0065  # temperature lapse rate (temperature falls with height)
USSA_R_STAR_J_mol_K = 8.31432  # gas constant as defined by the 1976 standard (not CODATA)
USSA_EARTH_RADIUS_m = 6356766.0  # effective earth radius for geopotential height


def C_to_K(temperature_C):
    """Celsius to kelvin."""
    return temperature_C + KELVIN


def K_to_C(temperature_K):
    """Kelvin to Celsius."""
    return temperature_K - KELVIN


def air_density_kg_m3(pressure_kPa=P_STD_kPa, temperature_C=T_STD_C):
    """Density of dry air as an ideal gas, kg/m3: rho = p M / (R T)."""
    return pressure_kPa * 1e3 * M_AIR_kg_mol / (R_J_mol_K * C_to_K(temperature_C))


#: Density of one standard m3 of dry air, kg/Sm3 (about 1.2041).
AIR_kg_per_Sm3 = air_density_kg_m3(P_STD_kPa, T_STD_C)
#: Oxygen in one standard m3 of dry air, kg O2/Sm3 (about 0.2786).
O2_kg_per_Sm3 = P_STD_kPa * 1e3 * Y_O2_AIR * M_O2_kg_mol / (R_J_mol_K * C_to_K(T_STD_C))
#: Oxygen in one normal m3 of dry air, kg O2/Nm3 (about 0.2990).
O2_kg_per_Nm3 = P_STD_kPa * 1e3 * Y_O2_AIR * M_O2_kg_mol / (R_J_mol_K * C_to_K(T_NORMAL_C))
#: Mass fraction of O2 in dry air (about 0.2314).
O2_MASS_FRACTION_AIR = Y_O2_AIR * M_O2_kg_mol / M_AIR_kg_mol


# --- airflow ----------------------------------------------------------------
def Sm3_h_to_kg_s(airflow_Sm3_h):
    """Standard airflow (Sm3/h) to dry-air mass flow (kg/s)."""
    return airflow_Sm3_h * AIR_kg_per_Sm3 / SECONDS_PER_HOUR


def kg_s_to_Sm3_h(mass_flow_kg_s):
    """Dry-air mass flow (kg/s) to standard airflow (Sm3/h)."""
    return mass_flow_kg_s * SECONDS_PER_HOUR / AIR_kg_per_Sm3


def Sm3_h_to_kg_O2_h(airflow_Sm3_h):
    """Standard airflow (Sm3/h) to the oxygen mass flow it carries (kg O2/h)."""
    return airflow_Sm3_h * O2_kg_per_Sm3


def Nm3_to_Sm3(volume_Nm3):
    """Normal m3 (0 degC) to standard m3 (20 degC), same mass of dry air."""
    return volume_Nm3 * C_to_K(T_STD_C) / C_to_K(T_NORMAL_C)


def Sm3_to_Nm3(volume_Sm3):
    """Standard m3 (20 degC) to normal m3 (0 degC), same mass of dry air."""
    return volume_Sm3 * C_to_K(T_NORMAL_C) / C_to_K(T_STD_C)


# --- pressure ---------------------------------------------------------------
def kPa_to_m_water(pressure_kPa):
    """kPa to metres of conventional water column."""
    return pressure_kPa / KPA_PER_M_WATER


def m_water_to_kPa(head_m):
    """Metres of conventional water column to kPa."""
    return head_m * KPA_PER_M_WATER


def kPa_to_Pa(pressure_kPa):
    """kPa to Pa."""
    return pressure_kPa * 1e3


def Pa_to_kPa(pressure_Pa):
    """Pa to kPa."""
    return pressure_Pa * 1e-3


def kPa_to_atm(pressure_kPa):
    """kPa to standard atmospheres."""
    return pressure_kPa / P_STD_kPa


def atm_to_kPa(pressure_atm):
    """Standard atmospheres to kPa."""
    return pressure_atm * P_STD_kPa


# --- concentration and rates ------------------------------------------------
def g_m3_to_mg_L(concentration_g_m3):
    """g/m3 to mg/L (identical numbers; kept so the unit change is visible)."""
    return concentration_g_m3


def mg_L_to_g_m3(concentration_mg_L):
    """mg/L to g/m3 (identical numbers)."""
    return concentration_mg_L


def g_to_kg(mass_g):
    """g to kg (e.g. g O2/h to kg O2/h)."""
    return mass_g / G_PER_KG


def kg_to_g(mass_kg):
    """kg to g."""
    return mass_kg * G_PER_KG


def per_day_to_per_hour(rate_per_d):
    """A rate per day to the same rate per hour."""
    return rate_per_d / HOURS_PER_DAY


def per_hour_to_per_day(rate_per_h):
    """A rate per hour to the same rate per day."""
    return rate_per_h * HOURS_PER_DAY


def m3_d_to_m3_h(flow_m3_d):
    """m3/d to m3/h."""
    return flow_m3_d / HOURS_PER_DAY


def m3_h_to_m3_d(flow_m3_h):
    """m3/h to m3/d."""
    return flow_m3_h * HOURS_PER_DAY


def kg_d_to_kg_h(mass_flow_kg_d):
    """kg/d to kg/h."""
    return mass_flow_kg_d / HOURS_PER_DAY


def kg_h_to_kg_d(mass_flow_kg_h):
    """kg/h to kg/d."""
    return mass_flow_kg_h * HOURS_PER_DAY


def kW_h_to_kWh(power_kW, duration_h):
    """Energy (kWh) of a power (kW) held for a duration (h)."""
    return power_kW * duration_h


def kJ_s_to_kW(power_kJ_s):
    """kJ/s to kW (identical numbers; kept so the unit change is visible)."""
    return power_kJ_s


def ft_to_m(length_ft):
    """Feet to metres (the international foot, 0.3048 m exactly)."""
    return length_ft * M_PER_FT


# --- time of day ------------------------------------------------------------
def clock(hours: float) -> str:
    """Hours from midnight as a clock time HH:MM, to the nearest minute (the day's end is 24:00)."""
    total = int(round(hours * 60.0))
    return f"{total // 60:02d}:{total % 60:02d}"
