"""Oxygen transfer: standard (clean water) and field rates, and the equivalent field kLa.

Conventions (see docs/physics.md):

* airflow is in standard m3 (dry air, 20 degC, 101.325 kPa; :mod:`airtaper.units`),
  so the oxygen supplied is ``airflow_Sm3_h * units.O2_kg_per_Sm3`` (0.2786 kg/Sm3);
* SOTE is a fraction (0..1) here; the SOTE curves work in percent and return both;
* the field rate is the textbook AOTR, rewritten exactly as
  ``AOTR = kLa_field (C*_field - C) V`` so a zone's DO balance is linear in C.
"""

from __future__ import annotations

from airtaper import units
from airtaper.physics.depth import STANDARD_TEST_TEMPERATURE_C
from airtaper.physics.saturation import do_sat_1atm_mg_L, pressure_factor

#: Arrhenius-type temperature coefficient of kLa. Mueller, Boyle & Poepel (2002),
#: Aeration: Principles and Practice, Table 3.12; ASCE/EWRI 2-06.
THETA_DEFAULT = 1.024

#: Surface saturation at the 20 degC standard, 1 atm, mg/L (Benson & Krause 1984; 9.092).
_C_S20_mg_L = float(do_sat_1atm_mg_L(STANDARD_TEST_TEMPERATURE_C))

PRESSURE_CORRECTIONS = ("textbook", "full")


def sotr_kg_h(airflow_Sm3_h, sote_fraction):
    """Standard oxygen transfer rate, kg O2/h.

    Parameters
    ----------
    airflow_Sm3_h : float, ndarray or Pyomo expression
        Airflow, Sm3/h (dry air at 20 degC, 101.325 kPa).
    sote_fraction : float, ndarray or Pyomo expression
        Standard oxygen transfer efficiency, fraction (0..1).

    Notes
    -----
    ``SOTR = Q_air * SOTE * rho_O2``, with ``rho_O2 = 0.2786 kg O2/Sm3``
    (:data:`airtaper.units.O2_kg_per_Sm3`). SOTR is the rate into clean water
    at zero DO, 20 degC and 1 atm.

    References
    ----------
    ASCE/EWRI 2-06, Measurement of Oxygen Transfer in Clean Water (definition of
    SOTE as SOTR over the O2 mass flow supplied).
    """
    return units.Sm3_h_to_kg_O2_h(airflow_Sm3_h) * sote_fraction


def temperature_factor(temperature_C, theta=THETA_DEFAULT):
    """Temperature correction of kLa, ``theta ** (T - 20)`` (dimensionless).

    References
    ----------
    ASCE/EWRI 2-06; Mueller, Boyle & Poepel (2002), Table 3.12 (theta = 1.024).
    """
    return theta ** (temperature_C - STANDARD_TEST_TEMPERATURE_C)


def tau(temperature_C):
    """Surface saturation ratio ``tau = C*s,T / C*s,20`` at 1 atm (dimensionless).

    References
    ----------
    Metcalf & Eddy (2014), 5th ed.; saturation values from Benson & Krause (1984).
    """
    return do_sat_1atm_mg_L(temperature_C) / _C_S20_mg_L


def omega(pressure_kPa, temperature_C=None, pressure_correction="textbook"):
    """Site pressure ratio Omega (dimensionless).

    Parameters
    ----------
    pressure_kPa : float, ndarray or Pyomo expression
        Site barometric pressure, kPa absolute.
    temperature_C : float, ndarray or Pyomo expression, optional
        Needed only for ``pressure_correction="full"``.
    pressure_correction : {"textbook", "full"}
        ``"textbook"``: ``Omega = Pb / Pstd`` (Metcalf & Eddy). ``"full"``: the
        Benson & Krause ratio ``C*(T, Pb) / C*(T, 1 atm)`` with the water
        vapour and theta0 terms (about 0.63 % lower at 2000 m, 20 degC).

    References
    ----------
    Metcalf & Eddy (2014), 5th ed.; Benson & Krause (1984); USGS OWQ TM 2011.03.
    """
    if pressure_correction == "textbook":
        return units.kPa_to_atm(pressure_kPa)
    if pressure_correction == "full":
        if temperature_C is None:
            raise ValueError("omega: pressure_correction='full' needs temperature_C")
        return pressure_factor(temperature_C, pressure_kPa)
    raise ValueError(f"omega: pressure_correction must be one of {PRESSURE_CORRECTIONS}, got {pressure_correction!r}")


def field_do_sat_mg_L(temperature_C, c_inf20_mg_L, beta, pressure_kPa, pressure_correction="textbook"):
    """Field steady-state DO saturation used by a zone's DO balance, mg/L.

    Parameters
    ----------
    temperature_C : float, ndarray or Pyomo expression
        Mixed-liquor temperature, degC.
    c_inf20_mg_L : float, ndarray or Pyomo expression
        Clean-water saturation at depth at 20 degC, 1 atm, mg/L
        (:func:`airtaper.physics.depth.c_inf20_mg_L` or a test report).
    beta : float, ndarray or Pyomo expression
        Salinity/solids saturation ratio (mixed liquor over clean water), 0..1.
    pressure_kPa : float, ndarray or Pyomo expression
        Site barometric pressure, kPa absolute.
    pressure_correction : {"textbook", "full"}
        How Omega is computed, see :func:`omega`.

    Notes
    -----
    ``C*_field = tau beta Omega C*inf20``.

    References
    ----------
    Metcalf & Eddy (2014), 5th ed. (AOTR driving force).
    """
    return tau(temperature_C) * beta * omega(pressure_kPa, temperature_C, pressure_correction) * c_inf20_mg_L


def standard_kla20_per_h(airflow_Sm3_h, sote_fraction, volume_m3, c_inf20_mg_L):
    """Clean-water kLa at 20 degC consistent with SOTR, 1/h.

    Notes
    -----
    ``SOTR = kLa20 C*inf20 V`` (ASCE/EWRI 2-06), so
    ``kLa20 = SOTR / (C*inf20 V)``; SOTR in g/h, C in g/m3, V in m3.

    References
    ----------
    ASCE/EWRI 2-06, Measurement of Oxygen Transfer in Clean Water.
    """
    sotr_g_h = units.kg_to_g(sotr_kg_h(airflow_Sm3_h, sote_fraction))
    return sotr_g_h / (units.mg_L_to_g_m3(c_inf20_mg_L) * volume_m3)


def field_kla_per_h(
    airflow_Sm3_h,
    sote_fraction,
    volume_m3,
    alpha,
    fouling,
    temperature_C,
    c_inf20_mg_L,
    theta=THETA_DEFAULT,
):
    """Equivalent field kLa of a zone, 1/h.

    Parameters
    ----------
    airflow_Sm3_h : float, ndarray or Pyomo expression
        Zone airflow, Sm3/h.
    sote_fraction : float, ndarray or Pyomo expression
        Clean-water SOTE at this airflow, fraction.
    volume_m3 : float
        Zone liquid volume, m3.
    alpha : float, ndarray or Pyomo expression
        Process-water to clean-water kLa ratio.
    fouling : float, ndarray or Pyomo expression
        Diffuser fouling factor F (1 for new diffusers).
    temperature_C : float, ndarray or Pyomo expression
        Mixed-liquor temperature, degC.
    c_inf20_mg_L : float, ndarray or Pyomo expression
        Clean-water saturation at depth at 20 degC, 1 atm, mg/L.
    theta : float, default 1.024

    Notes
    -----
    ``kLa_field = SOTR alpha F theta**(T-20) / (C*inf20 V)``. With
    ``C*_field`` from :func:`field_do_sat_mg_L`,
    ``kLa_field (C*_field - C) V = AOTR`` exactly (:func:`aotr_kg_h`): at
    C = 0 the transfer is at its maximum ``kLa_field C*_field``, and a higher
    demand lowers C, which raises the driving force.

    References
    ----------
    Metcalf & Eddy (2014), 5th ed. (AOTR); ASCE/EWRI 2-06 (SOTR = kLa20 C*inf20 V).
    """
    return (
        standard_kla20_per_h(airflow_Sm3_h, sote_fraction, volume_m3, c_inf20_mg_L)
        * alpha
        * fouling
        * temperature_factor(temperature_C, theta)
    )


def aotr_kg_h(
    airflow_Sm3_h,
    sote_fraction,
    alpha,
    fouling,
    temperature_C,
    c_inf20_mg_L,
    beta,
    pressure_kPa,
    do_mg_L,
    theta=THETA_DEFAULT,
    pressure_correction="textbook",
):
    """Actual (field) oxygen transfer rate, kg O2/h.

    Parameters
    ----------
    airflow_Sm3_h, sote_fraction, alpha, fouling, temperature_C, c_inf20_mg_L, theta
        As in :func:`field_kla_per_h`.
    beta : float, ndarray or Pyomo expression
        Saturation ratio, mixed liquor over clean water.
    pressure_kPa : float, ndarray or Pyomo expression
        Site barometric pressure, kPa absolute.
    do_mg_L : float, ndarray or Pyomo expression
        DO concentration in the zone, mg/L.
    pressure_correction : {"textbook", "full"}
        See :func:`omega`.

    Notes
    -----
    ``AOTR = SOTR alpha F theta**(T-20) (tau beta Omega C*inf20 - C) / C*inf20``.

    References
    ----------
    Metcalf & Eddy (2014), 5th ed.; theta from Mueller, Boyle & Poepel (2002).
    """
    driving_force = (
        tau(temperature_C) * beta * omega(pressure_kPa, temperature_C, pressure_correction) * c_inf20_mg_L - do_mg_L
    )
    return (
        sotr_kg_h(airflow_Sm3_h, sote_fraction)
        * alpha
        * fouling
        * temperature_factor(temperature_C, theta)
        * driving_force
        / c_inf20_mg_L
    )


def oxygen_transfer_rate_g_m3_h(kla_per_h, do_sat_mg_L, do_mg_L):
    """Volumetric oxygen transfer rate, g O2/(m3 h): ``kLa (C* - C)``.

    References
    ----------
    Two-film transfer model as used by ASCE/EWRI 2-06.
    """
    return kla_per_h * (units.mg_L_to_g_m3(do_sat_mg_L) - units.mg_L_to_g_m3(do_mg_L))
