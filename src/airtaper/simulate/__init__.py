"""airtaper.simulate: the independent numpy/scipy simulator of the aeration train.

Shares only parameter values, the stoichiometric matrix and the influent
fractionation (:mod:`airtaper.process`) and the pure functions of :mod:`airtaper.physics`
with the Pyomo model; rate expressions, mass balances, clarifier and solvers are its own.

Entry points: :func:`steady_state` and :func:`periodic`.

* :mod:`~airtaper.simulate.run` - the entry points, their tables and the day's quadrature
* :mod:`~airtaper.simulate.plant` - the layout as numbers: flow network and inputs per period
* :mod:`~airtaper.simulate.aeration` - airflow to field kLa and saturation per zone
* :mod:`~airtaper.simulate.kinetics` - ASM1 process rates in numpy
* :mod:`~airtaper.simulate.system` - state vector, right-hand side, sparse Jacobian, clarifier check
* :mod:`~airtaper.simulate.steady` - the steady state by a root solve that cannot stall
* :mod:`~airtaper.simulate.summary` - daily figures: effluent, DO, airflow, oxygen, blower energy
"""

from airtaper.simulate.run import PeriodicResult, SteadyResult, periodic, resolve_aeration, steady_state

__all__ = ["PeriodicResult", "SteadyResult", "periodic", "resolve_aeration", "steady_state"]
