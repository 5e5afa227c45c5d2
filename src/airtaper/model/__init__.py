"""airtaper.model: the Pyomo model of an ASM1 aeration train.

* :mod:`~airtaper.model.data` - numbers resolved from a layout (flows, influent, parameters, aeration)
* :mod:`~airtaper.model.asm1_rates` - the ASM1 process rates as Pyomo expressions
* :mod:`~airtaper.model.clarifier` - ideal separator and layered (Takacs) settler
* :mod:`~airtaper.model.train` - steady and cyclic (backward Euler, periodic) train models
* :mod:`~airtaper.model.discretisation` - one balance at one time point (steady, collocation, Euler, BDF2)
* :mod:`~airtaper.model.initial_point` - sequential pass, pseudo-transient continuation, Newton
* :mod:`~airtaper.model.numeric` - residuals and Jacobians of small square systems in numpy
* :mod:`~airtaper.model.structure` - square and structural-nonsingularity check
* :mod:`~airtaper.model.state_scaling` - solver scaling factors
* :mod:`~airtaper.model.square` - check, initialise, solve
* :mod:`~airtaper.model.results` - tidy pandas tables

Equations, discretisation and accuracy: docs/model.md.
"""

from airtaper.model.initial_point import initialise_cyclic, initialise_steady
from airtaper.model.square import solve_square
from airtaper.model.structure import check_square
from airtaper.model.train import (
    build_cyclic_model, build_steady_model, build_train_model, release_do_setpoints, set_airflow, set_do_setpoints,
)

__all__ = [
    "build_cyclic_model", "build_steady_model", "build_train_model", "check_square", "initialise_cyclic",
    "initialise_steady", "release_do_setpoints", "set_airflow", "set_do_setpoints", "solve_square",
]
