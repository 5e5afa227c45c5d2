"""Dissolved-oxygen saturation of water in contact with water-saturated air (surface values).

Benson & Krause (1984) equations, in the form used by APHA Standard Methods
4500-O and USGS Office of Water Quality Technical Memorandum 2011.03.
"""

from __future__ import annotations

from airtaper import units
from airtaper.physics.backend import exp

# Benson & Krause (1984) eq. 32 coefficients: ln C (mg/L) at 1 atm, in 1/T powers (T in K).
_BK_LN_C = (-139.34411, 1.575701e5, -6.642308e7, 1.243800e10, -8.621949e11)
# Vapour pressure of water, ln Pwv (atm) = a + b/T + c/T^2 (Benson & Krause 1984).
_BK_LN_PWV = (11.8571, -3840.70, -216961.0)
# Second virial coefficient term theta0 = a + b t + c t^2 (t in degC), 1/atm.
_BK_THETA0 = (0.000975, -1.426e-5, 6.436e-8)
# Salinity term: ln C_S = ln C_0 - S (a + b/T + c/T^2), S in g/kg.
_BK_SALINITY = (1.7674e-2, -10.754, 2.1407e3)


def _ln_do_sat_1atm(temperature_C):
    inv_t = 1.0 / units.C_to_K(temperature_C)
    a0, a1, a2, a3, a4 = _BK_LN_C
    return a0 + inv_t * (a1 + inv_t * (a2 + inv_t * (a3 + inv_t * a4)))


def do_sat_1atm_mg_L(temperature_C):
    """DO saturation of fresh water at 1 atm, mg/L.

    Parameters
    ----------
    temperature_C : float, ndarray or Pyomo expression
        Water temperature, degC (the fit covers 0 to 40 degC).

    Returns
    -------
    Saturation concentration, mg/L, in water-saturated air at 101.325 kPa.

    Notes
    -----
    ``ln C = -139.34411 + 1.575701e5/T - 6.642308e7/T**2 + 1.243800e10/T**3
    - 8.621949e11/T**4``, T in K.

    References
    ----------
    Benson, B.B. & Krause, D. (1984), Limnol. Oceanogr. 29:620-632, eq. 32;
    APHA Standard Methods 4500-O; USGS OWQ Technical Memorandum 2011.03.
    """
    return exp(_ln_do_sat_1atm(temperature_C))


def water_vapour_pressure_atm(temperature_C):
    """Saturation vapour pressure of water, atm (Benson & Krause form).

    Notes
    -----
    ``ln Pwv = 11.8571 - 3840.70/T - 216961/T**2``, T in K, Pwv in atm.

    References
    ----------
    Benson & Krause (1984); USGS OWQ Technical Memorandum 2011.03.
    """
    inv_t = 1.0 / units.C_to_K(temperature_C)
    a, b, c = _BK_LN_PWV
    return exp(a + inv_t * (b + inv_t * c))


def theta0_per_atm(temperature_C):
    """Second-virial term theta0 of the oxygen pressure correction, 1/atm.

    Notes
    -----
    ``theta0 = 0.000975 - 1.426e-5 t + 6.436e-8 t**2``, t in degC
    (about 7.2e-4 /atm at 20 degC).

    References
    ----------
    Benson & Krause (1984); USGS OWQ Technical Memorandum 2011.03.
    """
    a, b, c = _BK_THETA0
    return a + temperature_C * (b + temperature_C * c)


def pressure_factor(temperature_C, pressure_kPa):
    """Ratio C*(T, P) / C*(T, 1 atm) for total (barometric) pressure P.

    Parameters
    ----------
    temperature_C : float, ndarray or Pyomo expression
        Water temperature, degC.
    pressure_kPa : float, ndarray or Pyomo expression
        Total pressure of the water-saturated air, kPa absolute.

    Notes
    -----
    ``F_P = P (1 - Pwv/P)(1 - theta0 P) / ((1 - Pwv)(1 - theta0))``
    ``    = (P - Pwv)(1 - theta0 P) / ((1 - Pwv)(1 - theta0))``, P and Pwv in atm.
    Equals 1 at 1 atm.

    References
    ----------
    Benson & Krause (1984); USGS OWQ Technical Memorandum 2011.03.
    """
    p_atm = units.kPa_to_atm(pressure_kPa)
    pwv = water_vapour_pressure_atm(temperature_C)
    th0 = theta0_per_atm(temperature_C)
    return (p_atm - pwv) * (1.0 - th0 * p_atm) / ((1.0 - pwv) * (1.0 - th0))


def salinity_factor(temperature_C, salinity_g_kg):
    """Ratio C*(S) / C*(S = 0) at the same temperature and pressure.

    Notes
    -----
    ``ln C_S = ln C_0 - S (1.7674e-2 - 10.754/T + 2.1407e3/T**2)``, S in g/kg,
    T in K.

    References
    ----------
    Benson & Krause (1984); USGS OWQ Technical Memorandum 2011.03.
    """
    inv_t = 1.0 / units.C_to_K(temperature_C)
    a, b, c = _BK_SALINITY
    return exp(-salinity_g_kg * (a + inv_t * (b + inv_t * c)))


def do_sat_mg_L(temperature_C, pressure_kPa, salinity_g_kg=0.0):
    """DO saturation at a temperature, barometric pressure and salinity, mg/L.

    Parameters
    ----------
    temperature_C : float, ndarray or Pyomo expression
        Water temperature, degC.
    pressure_kPa : float, ndarray or Pyomo expression
        Barometric pressure, kPa absolute (see
        :func:`airtaper.physics.atmosphere.barometric_pressure_kPa`).
    salinity_g_kg : float, ndarray or Pyomo expression, default 0
        Salinity, g/kg (practical salinity). Municipal wastewater is close to 0.

    Notes
    -----
    ``C* = C*_1atm(T) F_P(T, P) F_S(T, S)``: see :func:`do_sat_1atm_mg_L`,
    :func:`pressure_factor` and :func:`salinity_factor`.

    References
    ----------
    Benson & Krause (1984); USGS OWQ Technical Memorandum 2011.03.
    """
    c_1atm = do_sat_1atm_mg_L(temperature_C)
    if isinstance(salinity_g_kg, (int, float)) and salinity_g_kg == 0:
        return c_1atm * pressure_factor(temperature_C, pressure_kPa)
    return c_1atm * salinity_factor(temperature_C, salinity_g_kg) * pressure_factor(temperature_C, pressure_kPa)


__all__ = [
    "do_sat_1atm_mg_L",
    "do_sat_mg_L",
    "pressure_factor",
    "salinity_factor",
    "theta0_per_atm",
    "water_vapour_pressure_atm",
]
