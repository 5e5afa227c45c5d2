"""Small square systems of a Pyomo model as vectorised numpy functions (for initialisation).

:func:`compile_system` walks the active equality constraints of a model once and
writes one Python function that evaluates all their residuals (``body - rhs``)
from a vector of the free variables. Every expression node is computed once even
when the model shares it between constraints (named expressions, the Monod
terms of the rates), and the function accepts a 2-D array (one column per
point), so a whole Jacobian comes from one call by complex-step
differentiation::

    J[:, k] = Im f(x + i h e_k) / h,   h = 1e-30        (exact to rounding)

This serves the initialiser's Newton iterations on steady models (a few hundred
unknowns) without a solver library; the full NLP solves go through
:mod:`airtaper.solve`. Fixed variables and parameters are read when the function
is compiled: compile again after changing them.

References
----------
Squire, W., Trapp, G. (1998). Using complex variables to estimate derivatives of
real functions. SIAM Review 40(1), 110-112 (complex-step derivative).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from pyomo.core.base.constraint import Constraint
from pyomo.core.base.var import VarData
from pyomo.core.expr import numeric_expr as ne
from pyomo.core.expr.numvalue import native_numeric_types, value

from airtaper.errors import ModelError

_COMPLEX_STEP = 1e-30

_UNARY = {"exp": "np.exp", "log": "np.log", "sqrt": "np.sqrt", "log10": "np.log10", "tanh": "np.tanh"}


class _Writer:
    """Emits one assignment per expression node, memoised by object identity."""

    def __init__(self):
        self.index_of_var: dict[int, int] = {}
        self.variables: list = []
        self.memo: dict[int, str] = {}
        self.keep: list = []
        self.lines: list[str] = []

    def _new(self, code: str) -> str:
        name = f"v{len(self.lines)}"
        self.lines.append(f"    {name} = {code}")
        return name

    def term(self, node) -> str:
        if node.__class__ in native_numeric_types:
            return repr(float(node))
        key = id(node)
        hit = self.memo.get(key)
        if hit is not None:
            return hit
        out = self._term(node)
        self.memo[key] = out
        self.keep.append(node)
        return out

    def _term(self, node) -> str:
        if isinstance(node, VarData):
            if node.fixed:
                return repr(float(node.value))
            k = self.index_of_var.setdefault(id(node), len(self.variables))
            if k == len(self.variables):
                self.variables.append(node)
            return f"x[{k}]"
        if not node.is_expression_type():  # params and other constants
            return repr(float(value(node)))
        if node.is_named_expression_type():
            return self.term(node.expr)
        if not node.is_potentially_variable():
            return repr(float(value(node)))
        args = [self.term(a) for a in node.args]
        if isinstance(node, (ne.SumExpression, ne.LinearExpression)):
            return self._new(" + ".join(args))
        if isinstance(node, (ne.ProductExpression, ne.MonomialTermExpression)):
            return self._new(f"{args[0]} * {args[1]}")
        if isinstance(node, ne.DivisionExpression):
            return self._new(f"{args[0]} / {args[1]}")
        if isinstance(node, ne.PowExpression):
            return self._new(f"{args[0]} ** {args[1]}")
        if isinstance(node, ne.NegationExpression):
            return self._new(f"-{args[0]}")
        if isinstance(node, ne.UnaryFunctionExpression) and node.getname() in _UNARY:
            return self._new(f"{_UNARY[node.getname()]}({args[0]})")
        raise ModelError(f"numeric.compile_system: unsupported expression node {type(node).__name__}")


@dataclass
class CompiledSystem:
    """Residuals of equality constraints as a function of the free variables."""

    constraints: list  # ConstraintData, row order
    variables: list  # free VarData, column order
    _fun: object

    @property
    def shape(self) -> tuple[int, int]:
        return len(self.constraints), len(self.variables)

    def residual(self, x: np.ndarray) -> np.ndarray:
        """Residuals at ``x`` (shape (n,) or (n, k) for k points), shape (m,) or (m, k)."""
        x = np.asarray(x)
        out = np.empty((len(self.constraints),) + x.shape[1:], dtype=x.dtype)
        self._fun(x, out)
        return out

    def jacobian(self, x: np.ndarray, columns=None) -> np.ndarray:
        """Dense Jacobian at ``x`` by complex step, shape (m, n), or (m, len(columns)) for the given columns."""
        cols = np.arange(x.size) if columns is None else np.asarray(columns)
        xc = np.repeat(x.astype(complex)[:, None], cols.size, axis=1)
        xc[cols, np.arange(cols.size)] += 1j * _COMPLEX_STEP
        return self.residual(xc).imag / _COMPLEX_STEP

    def values(self) -> np.ndarray:
        """Current values of the variables."""
        return np.array([v.value for v in self.variables], dtype=float)

    def store(self, x: np.ndarray) -> None:
        """Write ``x`` into the variables."""
        for v, val in zip(self.variables, x):
            v.set_value(float(val), skip_validation=True)


def compile_system(model, constraints=None) -> CompiledSystem:
    """Compile the active equality constraints of ``model`` (or the given ones).

    The free variables are those that appear in the constraints, in order of
    first appearance.
    """
    if constraints is None:
        constraints = [c for c in model.component_data_objects(Constraint, active=True, descend_into=True)]
    rows = []
    for c in constraints:
        if not c.equality:
            raise ModelError(f"numeric.compile_system: {c.name} is not an equality")
        rows.append(c)
    w = _Writer()
    outs = []
    for k, c in enumerate(rows):
        body = w.term(c.body)
        rhs = float(value(c.upper))
        outs.append(f"    r[{k}] = {body} - {rhs!r}" if rhs else f"    r[{k}] = {body}")
    src = "def _residuals(x, r):\n" + "\n".join(w.lines + outs) + "\n"
    namespace = {"np": np}
    exec(compile(src, "<airtaper.model.numeric>", "exec"), namespace)
    return CompiledSystem(rows, w.variables, namespace["_residuals"])
