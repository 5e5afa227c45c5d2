"""Site barometric pressure from elevation (US Standard Atmosphere 1976, troposphere)."""

from __future__ import annotations

from airtaper import units
from airtaper.physics.backend import power

#: Exponent g0 M0 / (R* L) of the 1976 troposphere (about 5.25588).
_USSA_EXPONENT = units.G_m_s2 * units.M_AIR_kg_mol / (units.USSA_R_STAR_J_mol_K * units.USSA_LAPSE_K_m)


def geopotential_height_m(elevation_m):
    """Geopotential height (m') of a geometric elevation above mean sea level (m).

    Parameters
    ----------
    elevation_m : float, ndarray or Pyomo expression
        Geometric height above mean sea level, m.

    Notes
    -----
    ``H = r0 Z / (r0 + Z)``, ``r0 = 6 356 766 m``. Below 2 km the two heights
    differ by less than 0.7 m.

    References
    ----------
    U.S. Standard Atmosphere, 1976 (NOAA/NASA/USAF), eq. 18.
    """
    r0 = units.USSA_EARTH_RADIUS_m
    return r0 * elevation_m / (r0 + elevation_m)


def barometric_pressure_geopotential_kPa(geopotential_height_m):
    """Standard-atmosphere pressure (kPa) at a geopotential height (m').

    Parameters
    ----------
    geopotential_height_m : float, ndarray or Pyomo expression
        Geopotential height H, m', valid 0 to 11 000 m'.

    Notes
    -----
    ``p = p0 (1 - L H / T0) ** (g0 M0 / (R* L))`` with p0 = 101.325 kPa,
    T0 = 288.15 K, L = 0.0065 K/m, g0 = 9.80665 m/s2, M0 = 28.9644 g/mol,
    R* = 8.31432 J/(mol K): numerically ``p0 (1 - H / 44 330.8 m) ** 5.25588``.
    The ICAO rounding ``(1 - H / 44 329) ** 5.255876`` differs by under 2 Pa
    below 2 km.

    References
    ----------
    U.S. Standard Atmosphere, 1976, eq. 33a (layer b = 0); identical to the
    ICAO Standard Atmosphere below 32 km.
    """
    base = 1.0 - units.USSA_LAPSE_K_m * geopotential_height_m / units.USSA_T0_K
    return units.USSA_P0_kPa * power(base, _USSA_EXPONENT)


def barometric_pressure_kPa(elevation_m):
    """Standard-atmosphere barometric pressure (kPa) at a site elevation (m).

    Parameters
    ----------
    elevation_m : float, ndarray or Pyomo expression
        Geometric elevation of the site above mean sea level, m (the number a
        site survey gives). Converted to geopotential height first.

    Returns
    -------
    Absolute pressure, kPa.

    Notes
    -----
    ``p = p0 (1 - L H(Z) / T0) ** (g0 M0 / (R* L))`` with
    ``H(Z) = r0 Z / (r0 + Z)``; see :func:`barometric_pressure_geopotential_kPa`.
    The mean pressure of the standard atmosphere; daily weather moves the
    actual value by a few percent.

    References
    ----------
    U.S. Standard Atmosphere, 1976, eqs. 18 and 33a.
    """
    return barometric_pressure_geopotential_kPa(geopotential_height_m(elevation_m))
