"""Square solves of the train models: structural check, initialisation, then the NLP solver.

The solver is passed in (normally :func:`airtaper.solve.ipopt.solve_nlp`), so the
model layer does not depend on the solve layer.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

from airtaper.errors import ModelError
from airtaper.model.initial_point import InitReport, initialise_cyclic, initialise_steady
from airtaper.model.state_scaling import apply_scaling
from airtaper.model.structure import StructureReport, check_square

#: Ipopt options for square (simulation) solves. Common practice (no source).
SQUARE_OPTIONS = {"tol": 1e-9, "max_iter": 200}


@dataclass
class SquareSolve:
    """What a square solve did: the structure check, the initialisation and the solver result."""

    structure: StructureReport
    init: InitReport | None
    result: object  # the solver's result (NlpResult for solve_nlp)
    seconds: float


def solve_square(m, solve, *, initialise: bool = True, steady=None, options: dict | None = None) -> SquareSolve:
    """Check, initialise and solve a steady or cyclic model with ``solve(model, options)``.

    Parameters
    ----------
    m : steady or cyclic train model
    solve : callable
        ``solve(model, options) -> result`` with a ``result.ok`` flag (e.g.
        :func:`airtaper.solve.ipopt.solve_nlp`).
    initialise : bool
        Run :func:`~airtaper.model.initial_point.initialise_steady` (steady model) or
        :func:`~airtaper.model.initial_point.initialise_cyclic` (cyclic model) first;
        False starts from the model's current values.
    steady : model, optional
        For a cyclic model, a solved steady model at mean load to start from.
    options : dict, optional
        Solver options added to :data:`SQUARE_OPTIONS`.

    Raises
    ------
    ModelError
        The model is not square and structurally nonsingular, or the solver failed.
    """
    t0 = time.perf_counter()
    structure = check_square(m)
    init = None
    if initialise:
        init = initialise_steady(m) if m.steady else initialise_cyclic(m, steady=steady)
    apply_scaling(m)
    result = solve(m, {**SQUARE_OPTIONS, **(options or {})})
    if not result.ok:
        raise ModelError(f"square solve failed: {getattr(result, 'status', '?')} {getattr(result, 'message', '')}")
    return SquareSolve(structure, init, result, time.perf_counter() - t0)
