"""Structural checks of a square model: as many equations as unknowns, and nonsingular.

A square system ``F(x) = 0`` is *structurally nonsingular* when its incidence
(which unknowns appear in which equations) admits a perfect matching, i.e. a
distinct unknown for every equation; otherwise the Jacobian is singular for any
values. The Dulmage-Mendelsohn decomposition names the under- and
over-determined parts when the matching is not perfect.

References
----------
Duff, I.S., Erisman, A.M., Reid, J.K. (1986). Direct Methods for Sparse Matrices,
ch. 6 (maximum transversal, block triangular form). Pothen, A., Fan, C.-J.
(1990). Computing the block triangular form of a sparse matrix. ACM TOMS 16(4).
Pyomo's ``pyomo.contrib.incidence_analysis`` implements both.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from pyomo.contrib.incidence_analysis import IncidenceGraphInterface

from airtaper.errors import ModelError


@dataclass
class StructureReport:
    """Outcome of :func:`check_square`."""

    n_variables: int
    n_constraints: int
    matching_size: int
    unmatched_variables: list[str] = field(default_factory=list)
    unmatched_constraints: list[str] = field(default_factory=list)
    n_diagonal_blocks: int = 0

    @property
    def square(self) -> bool:
        return self.n_variables == self.n_constraints

    @property
    def nonsingular(self) -> bool:
        """Square and a perfect matching exists."""
        return self.square and self.matching_size == self.n_variables


def check_square(model, *, raise_error: bool = True, blocks: bool = False) -> StructureReport:
    """Check that the active equality system of ``model`` is square and structurally nonsingular.

    Parameters
    ----------
    model : Pyomo model or block
        Active equality constraints and the free variables that appear in them.
    raise_error : bool
        Raise :class:`~airtaper.errors.ModelError` naming the first offending
        variables and equations when the check fails.
    blocks : bool
        Also count the diagonal blocks of the block triangular form (the size of
        the largest is the hardest simultaneous sub-problem).
    """
    igraph = IncidenceGraphInterface(model, include_inequality=False)
    n_v, n_c = len(igraph.variables), len(igraph.constraints)
    matching = igraph.maximum_matching()
    report = StructureReport(n_variables=n_v, n_constraints=n_c, matching_size=len(matching))
    if not report.nonsingular:
        dm_var, dm_con = igraph.dulmage_mendelsohn()
        report.unmatched_variables = [v.name for v in dm_var.unmatched]
        report.unmatched_constraints = [c.name for c in dm_con.unmatched]
        if raise_error:
            raise ModelError(
                f"model is not structurally nonsingular: {n_c} equations, {n_v} unknowns, "
                f"matching {len(matching)}; unmatched unknowns {report.unmatched_variables[:5]}, "
                f"unmatched equations {report.unmatched_constraints[:5]}")
    elif blocks:
        var_blocks, _ = igraph.block_triangularize()
        report.n_diagonal_blocks = len(var_blocks)
    return report
