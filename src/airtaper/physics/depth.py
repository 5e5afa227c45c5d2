"""Clean-water saturation at depth for diffused aeration (effective-depth form)."""

from __future__ import annotations

from airtaper import units
from airtaper.physics.saturation import do_sat_1atm_mg_L

#: Default effective-depth fraction ``de`` for fine-pore diffusers. Metcalf & Eddy
#: (5th ed., ch. 5) give de of about 0.25-0.45, about 0.4 for fine-pore grids
#: (range from memory). Set it per diffuser type when a clean-water test gives it.
DEFAULT_EFFECTIVE_DEPTH_FRACTION = 0.4

#: Temperature of the standard conditions of a clean-water test, degC (ASCE/EWRI 2-06).
STANDARD_TEST_TEMPERATURE_C = 20.0


def atmosphere_water_column_m():
    """One standard atmosphere as conventional water column, m (101.325 / 9.80665 = 10.332 m)."""
    return units.kPa_to_m_water(units.P_STD_kPa)


def depth_factor(submergence_m, effective_depth_fraction=DEFAULT_EFFECTIVE_DEPTH_FRACTION):
    """Ratio of the steady-state saturation at depth to the surface saturation.

    Parameters
    ----------
    submergence_m : float, ndarray or Pyomo expression
        Diffuser submergence Df (water surface to diffuser), m.
    effective_depth_fraction : float, ndarray or Pyomo expression
        ``de``, the fraction of the submergence at which the mean gas-phase
        pressure acts (dimensionless). Default
        :data:`DEFAULT_EFFECTIVE_DEPTH_FRACTION`.

    Notes
    -----
    ``C*inf / C*s = 1 + de Df / Pa`` with ``Pa`` one standard atmosphere as
    water column (10.332 m; textbooks round to 10.33 m).

    References
    ----------
    Metcalf & Eddy, Wastewater Engineering: Treatment and Resource Recovery,
    5th ed. (2014), effective-depth form of C*inf,20.
    """
    return 1.0 + effective_depth_fraction * submergence_m / atmosphere_water_column_m()


def c_inf20_mg_L(submergence_m, effective_depth_fraction=DEFAULT_EFFECTIVE_DEPTH_FRACTION):
    """Steady-state clean-water DO saturation at depth, 20 degC and 1 atm, mg/L.

    Parameters
    ----------
    submergence_m : float, ndarray or Pyomo expression
        Diffuser submergence Df, m.
    effective_depth_fraction : float, default 0.4
        ``de`` (see :func:`depth_factor`).

    Notes
    -----
    ``C*inf20 = C*s,20 (1 + de Df / Pa)`` with ``C*s,20 = 9.092 mg/L`` the
    surface saturation at 20 degC, 1 atm (Benson & Krause 1984). In a
    clean-water test (ASCE/EWRI 2-06) C*inf20 is measured; this form estimates
    it when only the submergence is known.

    References
    ----------
    Metcalf & Eddy (2014), 5th ed.; Benson & Krause (1984), Limnol. Oceanogr. 29:620.
    """
    return do_sat_1atm_mg_L(STANDARD_TEST_TEMPERATURE_C) * depth_factor(submergence_m, effective_depth_fraction)
