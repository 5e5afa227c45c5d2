"""airtaper.simulate: the independent numpy/scipy simulator of the aeration train.

Shares only parameter values, the stoichiometric matrix and the influent
fractionation (:mod:`airtaper.process`) with the Pyomo model; rate
expressions, mass balances, clarifier and solvers are its own.

Entry points: :func:`steady_state` and :func:`periodic`.
"""

from airtaper.simulate.run import PeriodicResult, SteadyResult, periodic, resolve_aeration, steady_state

__all__ = ["PeriodicResult", "SteadyResult", "periodic", "resolve_aeration", "steady_state"]
