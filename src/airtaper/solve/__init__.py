"""airtaper.solve: the solver bridge.

* :mod:`~airtaper.solve.pyomo_to_casadi` - Pyomo expression trees to a flat tape, then CasADi
* :mod:`~airtaper.solve.derivatives` - sparse first and second derivatives (linear/nonlinear split)
* :mod:`~airtaper.solve.nlp` - CasADi functions of a converted model (values, Jacobian, Hessian), cached
* :mod:`~airtaper.solve.ipopt` - Ipopt through cyipopt: status, duals, timings
* :mod:`~airtaper.solve.highs` - LP and MILP through HiGHS

Entry points:

* :func:`solve_nlp` - a Pyomo NLP through CasADi (exact sparse derivatives) and Ipopt
  (cyipopt, MUMPS); returns an :class:`NlpResult` with status, duals and timings.
* :func:`solve_milp` - a Pyomo LP/MILP through HiGHS; returns a :class:`MilpResult`.
* :func:`clear_cache` - forget the derivative functions cached per model structure.
"""

from airtaper.solve.highs import MilpResult, solve_milp
from airtaper.solve.ipopt import (
    BoundDuals,
    IterationInfo,
    NlpResult,
    SolveStatus,
    Timings,
    solve_nlp,
)
from airtaper.solve.nlp import clear_cache

__all__ = [
    "BoundDuals",
    "IterationInfo",
    "MilpResult",
    "NlpResult",
    "SolveStatus",
    "Timings",
    "clear_cache",
    "solve_milp",
    "solve_nlp",
]
