"""Walk the expression trees of an active Pyomo model into a flat expression tape.

The tape is the hand-over between Pyomo and CasADi (:mod:`airtaper.solve.nlp`). It is a
directed acyclic graph of numbered nodes: leaves (free variables, symbolic parameters,
numeric constants) and operations (linear combinations, products, quotients, powers,
intrinsic functions, comparisons, selections). Every node carries its *level* (longest
path from a leaf), so that :mod:`airtaper.solve.nlp` can build the CasADi graph one level
and one operation kind at a time with vector operations, instead of one scalar CasADi
call per node (a scalar CasADi call from Python costs about 10 us; a vector operation
costs well under 1 us per element).

What becomes what
-----------------
* a ``Var``, fixed or not -> a column of ``x``: whether it is fixed is decided at each
  solve (:mod:`airtaper.solve.nlp` gives Ipopt the free columns only), so fixing and
  unfixing does not change the tape (``fixed_as_parameters=True`` restores the older
  treatment: a fixed ``Var`` becomes a parameter);
* a mutable ``Param`` -> a symbolic parameter (entry of ``p``): a constant for Ipopt,
  but its value is read at every solve, so changing it does not require rebuilding the
  derivative functions;
* an immutable ``Param``, numbers -> numeric constants;
* a named ``Expression`` (and any Pyomo sub-expression object used twice) -> converted
  once and shared (memoised by object identity);
* sums, linear and monomial terms, negation, products and quotients by constants ->
  linear-combination nodes; other products, quotients, powers, ``exp``, ``log``,
  ``log10``, ``sqrt``, trigonometric and hyperbolic functions and their inverses,
  ``abs``, ``ceil``, ``floor``, ``Expr_if``, ``max``/``min`` -> operation nodes.

Anything else (external functions, logical expressions, unknown node types) raises
:class:`airtaper.errors.ModelError` naming the component being converted.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from pyomo.core.base.constraint import Constraint
from pyomo.core.base.objective import Objective, maximize
from pyomo.core.base.expression import NamedExpressionData
from pyomo.core.base.param import ParamData
from pyomo.core.base.var import VarData
from pyomo.core.expr import numeric_expr as ne
from pyomo.core.expr import relational_expr as re_
from pyomo.core.expr.numvalue import NumericConstant, value as pyo_value

from airtaper.errors import ModelError

# --- operation codes -------------------------------------------------------------------
X, P, C, LIN = 0, 1, 2, 3  # leaves (free variable, parameter, constant) and linear comb.
MUL, DIV, POW, POWC, FMAX, FMIN, LE, LT, EQ, AND, IFELSE = range(4, 15)
# unary intrinsic functions (Pyomo's names)
UNARY_NAMES = (
    "exp", "log", "log10", "sqrt", "sin", "cos", "tan", "asin", "acos", "atan",
    "sinh", "cosh", "tanh", "asinh", "acosh", "atanh", "abs", "ceil", "floor",
)
UNARY_BASE = 32
UNARY_CODE = {name: UNARY_BASE + i for i, name in enumerate(UNARY_NAMES)}

_MATH = {
    "exp": math.exp, "log": math.log, "log10": math.log10, "sqrt": math.sqrt,
    "sin": math.sin, "cos": math.cos, "tan": math.tan, "asin": math.asin,
    "acos": math.acos, "atan": math.atan, "sinh": math.sinh, "cosh": math.cosh,
    "tanh": math.tanh, "asinh": math.asinh, "acosh": math.acosh, "atanh": math.atanh,
    "abs": abs, "ceil": math.ceil, "floor": math.floor,
}
_BINARY_MATH = {
    MUL: lambda a, b: a * b,
    DIV: lambda a, b: a / b,
    POW: lambda a, b: a**b,
    FMAX: max,
    FMIN: min,
    LE: lambda a, b: float(a <= b),
    LT: lambda a, b: float(a < b),
    EQ: lambda a, b: float(a == b),
    AND: lambda a, b: float(bool(a) and bool(b)),
}

# numpy scalars turn up in user models (np.float64 coefficients)
_NUMBER_TYPES = {int, float, bool, np.float64, np.float32, np.int64, np.int32, np.bool_}


@dataclass
class Tape:
    """A converted model: nodes, leaves and the roots of the objective and constraints.

    Node ``i`` has operation ``op[i]``, level ``level[i]`` and arguments ``arg1[i]``,
    ``arg2[i]``, ``arg3[i]`` (``-1`` when unused). ``aux[i]`` holds the leaf index for
    ``X`` and ``P`` nodes, the value for ``C`` nodes, the exponent for ``POWC`` and the
    constant term for ``LIN``. The terms of linear combinations are the triplets
    ``(lin_row[k], lin_arg[k], lin_coef[k])``: node ``lin_row[k]`` receives
    ``lin_coef[k] * node lin_arg[k]``.
    """

    op: list = field(default_factory=list)
    level: list = field(default_factory=list)
    arg1: list = field(default_factory=list)
    arg2: list = field(default_factory=list)
    arg3: list = field(default_factory=list)
    aux: list = field(default_factory=list)
    lin_row: list = field(default_factory=list)
    lin_arg: list = field(default_factory=list)
    lin_coef: list = field(default_factory=list)
    variables: list = field(default_factory=list)  # VarData, in column order
    parameters: list = field(default_factory=list)  # ParamData (and fixed VarData, if
    # converted with fixed_as_parameters)
    constraints: list = field(default_factory=list)  # active ConstraintData, row order
    constraint_roots: list = field(default_factory=list)
    objective: object = None  # ObjectiveData or None (feasibility problem)
    objective_root: int = -1
    sense: int = 1  # 1 minimise, -1 maximise
    named: list = field(default_factory=list)  # (named expression data, its expr)
    all_vars: list = field(default_factory=list)  # every VarData met (free and fixed)
    discrete: list = field(default_factory=list)  # columns of integer or binary domain

    @property
    def n_nodes(self) -> int:
        return len(self.op)

    def arrays(self) -> dict:
        """The node lists as numpy arrays (``op``, ``level``, ``arg1``..``arg3``,
        ``aux``, ``lin_row``, ``lin_arg``, ``lin_coef``), converted once and cached:
        call it only when the tape is complete."""
        cached = self.__dict__.get("_arrays")
        if cached is None or len(cached["op"]) != len(self.op):
            ints = ("op", "level", "arg1", "arg2", "arg3", "lin_row", "lin_arg")
            cached = {k: np.asarray(getattr(self, k), dtype=np.int64) for k in ints}
            cached["aux"] = np.asarray(self.aux, dtype=float)
            cached["lin_coef"] = np.asarray(self.lin_coef, dtype=float)
            self.__dict__["_arrays"] = cached
        return cached


class _Walker:
    """Converts Pyomo expression objects into tape nodes (see module docstring)."""

    def __init__(self, tape: Tape, fixed_as_parameters: bool = False):
        self.t = tape
        self.fixed_as_parameters = fixed_as_parameters
        self.memo: dict[int, int] = {}  # id(pyomo object) -> node
        self.keep: list = []  # keeps memoised objects alive so their ids stay unique
        self.consts: dict[float, int] = {}
        # what is being converted, named only when an error is raised (building the
        # names of indexed components costs more than converting them)
        self.what: tuple = ("?", None)  # (kind, component) e.g. ("constraint", con)
        self.via: list = []  # named expressions entered on the way down
        memo = self._memoised
        self.dispatch = {
            ne.SumExpression: memo(self._sum),
            ne.LinearExpression: memo(self._sum),
            ne.NPV_SumExpression: memo(self._sum),
            ne.MonomialTermExpression: memo(self._product),
            ne.ProductExpression: memo(self._product),
            ne.NPV_ProductExpression: memo(self._product),
            ne.DivisionExpression: memo(self._division),
            ne.NPV_DivisionExpression: memo(self._division),
            ne.PowExpression: memo(self._pow),
            ne.NPV_PowExpression: memo(self._pow),
            ne.NegationExpression: memo(self._negation),
            ne.NPV_NegationExpression: memo(self._negation),
            ne.UnaryFunctionExpression: memo(self._unary),
            ne.NPV_UnaryFunctionExpression: memo(self._unary),
            ne.AbsExpression: memo(self._unary),
            ne.NPV_AbsExpression: memo(self._unary),
            ne.Expr_ifExpression: memo(self._expr_if),
            ne.NPV_Expr_ifExpression: memo(self._expr_if),
            ne.MaxExpression: memo(self._maxmin),
            ne.NPV_MaxExpression: memo(self._maxmin),
            ne.MinExpression: memo(self._maxmin),
            ne.NPV_MinExpression: memo(self._maxmin),
            re_.InequalityExpression: self._inequality,
            re_.RangedExpression: self._ranged,
            re_.EqualityExpression: self._equality,
            NumericConstant: self._numeric_constant,
        }
        for num in _NUMBER_TYPES:
            self.dispatch[num] = self._number
        self.unsupported = (ne.ExternalFunctionExpression, ne.NPV_ExternalFunctionExpression)

    @property
    def component(self) -> str:
        """Name of the component being converted, for error messages."""
        kind, obj = self.what
        text = kind if obj is None else f"{kind} {obj.name}"
        for e in self.via:
            text += f" (via expression {e.name})"
        return text

    def _memoised(self, handler):
        """``handler`` converting each Pyomo node object once (shared sub-trees)."""
        memo, keep = self.memo, self.keep

        def convert_once(node):
            key = id(node)
            nid = memo.get(key)
            if nid is None:
                nid = memo[key] = handler(node)
                keep.append(node)  # keeps the id unique while the walk runs
            return nid

        return convert_once

    # --- node creation --------------------------------------------------------------
    def _node(self, op, level, a1=-1, a2=-1, a3=-1, aux=0.0) -> int:
        t = self.t
        t.op.append(op)
        t.level.append(level)
        t.arg1.append(a1)
        t.arg2.append(a2)
        t.arg3.append(a3)
        t.aux.append(aux)
        return len(t.op) - 1

    def const(self, v) -> int:
        v = float(v)
        key = v if v == v else "nan"
        nid = self.consts.get(key)
        if nid is None:
            nid = self.consts[key] = self._node(C, 0, aux=v)
        return nid

    def lin(self, args, coefs, const) -> int:
        """Linear combination ``const + sum(coef * arg)``, folding constant arguments."""
        t = self.t
        op, aux, level = t.op, t.aux, t.level
        if len(args) == 1:  # the most common case (a scaled node)
            a = args[0]
            c = coefs[0]
            if op[a] == C:
                return self.const(const + c * aux[a])
            if c == 0.0:
                return self.const(const)
            if c == 1.0 and const == 0.0:
                return a
            nid = len(op)
            op.append(LIN)
            level.append(level[a] + 1)
            t.arg1.append(-1)
            t.arg2.append(-1)
            t.arg3.append(-1)
            aux.append(float(const))
            t.lin_row.append(nid)
            t.lin_arg.append(a)
            t.lin_coef.append(float(c))
            return nid
        keep_a, keep_c = [], []
        lvl = 0
        for a, c in zip(args, coefs):
            if op[a] == C:
                const += c * aux[a]
            elif c != 0.0:
                keep_a.append(a)
                keep_c.append(c)
                if level[a] > lvl:
                    lvl = level[a]
        if not keep_a:
            return self.const(const)
        if len(keep_a) == 1 and keep_c[0] == 1.0 and const == 0.0:
            return keep_a[0]
        nid = self._node(LIN, lvl + 1, aux=float(const))
        t.lin_row.extend([nid] * len(keep_a))
        t.lin_arg.extend(keep_a)
        t.lin_coef.extend(map(float, keep_c))
        return nid

    def binary(self, op, a, b) -> int:
        t = self.t
        if t.op[a] == C and t.op[b] == C:
            return self.const(self._fold(_BINARY_MATH[op], t.aux[a], t.aux[b]))
        la, lb = t.level[a], t.level[b]
        return self._node(op, (la if la > lb else lb) + 1, a, b)

    def _fold(self, fn, *vals):
        try:
            return fn(*vals)
        except (ValueError, ZeroDivisionError, OverflowError) as exc:
            raise ModelError(
                f"{self.component}: constant sub-expression cannot be evaluated ({exc})"
            ) from None

    # --- entry point ------------------------------------------------------------------
    def conv(self, node) -> int:
        h = self.dispatch.get(node.__class__)
        if h is None:
            return self._resolve(node)
        return h(node)

    def _resolve(self, node):
        cls = node.__class__
        if isinstance(node, self.unsupported):
            raise ModelError(
                f"{self.component}: external functions are not supported by the "
                f"CasADi bridge ({node})"
            )
        h = None
        for base in cls.__mro__[1:]:
            if base in self.dispatch:
                h = self.dispatch[base]
                break
        if h is None:
            if isinstance(node, VarData) or getattr(node, "is_variable_type", _false)():
                h = self._var
            elif isinstance(node, ParamData) or getattr(node, "is_parameter_type", _false)():
                h = self._param
            elif isinstance(node, NamedExpressionData) or getattr(
                node, "is_named_expression_type", _false
            )():
                h = self._named
            elif hasattr(node, "dtype") and getattr(node, "shape", None) == ():
                h = self._number  # other numpy scalar types
            elif not getattr(node, "is_expression_type", _false)() and getattr(
                node, "is_constant", _false
            )():
                h = self._numeric_constant  # units and other constant leaves
            else:
                raise ModelError(
                    f"{self.component}: unsupported expression node "
                    f"{cls.__name__} ({node})"
                )
        self.dispatch[cls] = h
        return h(node)

    # --- leaves -------------------------------------------------------------------------
    def _number(self, node) -> int:
        return self.const(node)

    def _numeric_constant(self, node) -> int:
        return self.const(pyo_value(node))

    def _var(self, node) -> int:
        key = id(node)
        nid = self.memo.get(key)
        if nid is not None:
            return nid
        t = self.t
        t.all_vars.append(node)
        if self.fixed_as_parameters and node.fixed:
            if node.value is None:
                raise ModelError(f"{self.component}: fixed variable {node.name} has no value")
            nid = self._node(P, 0, aux=len(t.parameters))
            t.parameters.append(node)
        else:
            nid = self._node(X, 0, aux=len(t.variables))
            t.variables.append(node)
        self.memo[key] = nid
        self.keep.append(node)
        return nid

    def _param(self, node) -> int:
        if node.is_constant():  # immutable Param: a number for good
            return self.const(pyo_value(node))
        key = id(node)
        nid = self.memo.get(key)
        if nid is not None:
            return nid
        t = self.t
        if node.value is None:
            raise ModelError(f"{self.component}: parameter {node.name} has no value")
        nid = self._node(P, 0, aux=len(t.parameters))
        t.parameters.append(node)
        self.memo[key] = nid
        self.keep.append(node)
        return nid

    def _named(self, node) -> int:
        key = id(node)
        nid = self.memo.get(key)
        if nid is not None:
            return nid
        expr = node.expr
        if expr is None:
            raise ModelError(f"{self.component}: expression {node.name} has no value")
        self.via.append(node)
        nid = self.conv(expr)
        self.via.pop()
        self.t.named.append((node, expr))
        self.memo[key] = nid
        self.keep.append(node)
        return nid

    # --- operations -----------------------------------------------------------------------
    def _sum(self, node) -> int:
        const = 0.0
        args, coefs = [], []
        conv = self.conv
        numbers = _NUMBER_TYPES
        mono, prod = ne.MonomialTermExpression, ne.ProductExpression
        neg, div = ne.NegationExpression, ne.DivisionExpression
        for a in node.args:
            coef = 1.0
            while True:  # peel constant factors off the term: no node for c * (...)
                cls = a.__class__
                if cls is mono or cls is prod:
                    c, v = a._args_
                    if c.__class__ in numbers:
                        coef *= c
                        a = v
                        continue
                elif cls is neg:
                    coef = -coef
                    a = a._args_[0]
                    continue
                elif cls is div:
                    u, d = a._args_
                    if d.__class__ in numbers and d != 0:
                        coef /= d
                        a = u
                        continue
                break
            if a.__class__ in numbers:
                const += coef * a
                continue
            args.append(conv(a))
            coefs.append(coef)
        return self.lin(args, coefs, const)

    def _product(self, node) -> int:
        a, b = node._args_
        if a.__class__ in _NUMBER_TYPES:
            nid = self.lin([self.conv(b)], [a], 0.0)
        else:
            ia, ib = self.conv(a), self.conv(b)
            t = self.t
            if t.op[ia] == C:
                nid = self.lin([ib], [t.aux[ia]], 0.0)
            elif t.op[ib] == C:
                nid = self.lin([ia], [t.aux[ib]], 0.0)
            else:
                nid = self.binary(MUL, ia, ib)
        return nid

    def _division(self, node) -> int:
        a, b = node._args_
        ia, ib = self.conv(a), self.conv(b)
        t = self.t
        if t.op[ib] == C and t.op[ia] != C and t.aux[ib] != 0.0:
            nid = self.lin([ia], [1.0 / t.aux[ib]], 0.0)
        else:
            nid = self.binary(DIV, ia, ib)
        return nid

    def _pow(self, node) -> int:
        a, b = node._args_
        ia, ib = self.conv(a), self.conv(b)
        t = self.t
        if t.op[ib] == C and t.op[ia] != C:
            e = t.aux[ib]
            if e == 1.0:
                nid = ia
            elif e == 0.0:
                nid = self.const(1.0)
            else:
                nid = self._node(POWC, t.level[ia] + 1, ia, aux=e)
        else:
            nid = self.binary(POW, ia, ib)
        return nid

    def _negation(self, node) -> int:
        nid = self.lin([self.conv(node._args_[0])], [-1.0], 0.0)
        return nid

    def _unary(self, node) -> int:
        name = node.getname()
        code = UNARY_CODE.get(name)
        if code is None:
            raise ModelError(
                f"{self.component}: intrinsic function {name!r} is not supported by the "
                f"CasADi bridge"
            )
        ia = self.conv(node._args_[0])
        t = self.t
        if t.op[ia] == C:
            nid = self.const(self._fold(_MATH[name], t.aux[ia]))
        else:
            nid = self._node(code, t.level[ia] + 1, ia)
        return nid

    def _expr_if(self, node) -> int:
        c, a, b = node.args
        ic, ia, ib = self.conv(c), self.conv(a), self.conv(b)
        t = self.t
        if t.op[ic] == C:
            nid = ia if t.aux[ic] else ib
        else:
            lvl = max(t.level[ic], t.level[ia], t.level[ib]) + 1
            nid = self._node(IFELSE, lvl, ic, ia, ib)
        return nid

    def _maxmin(self, node) -> int:
        op = FMAX if isinstance(node, ne.MaxExpression) else FMIN
        ids = [self.conv(a) for a in node.args]
        nid = ids[0]
        for other in ids[1:]:
            nid = self.binary(op, nid, other)
        return nid

    def _inequality(self, node) -> int:
        a, b = node.args
        return self.binary(LT if node.strict else LE, self.conv(a), self.conv(b))

    def _ranged(self, node) -> int:
        a, b, c = node.args
        s1, s2 = node.strict
        ia, ib, ic = self.conv(a), self.conv(b), self.conv(c)
        left = self.binary(LT if s1 else LE, ia, ib)
        right = self.binary(LT if s2 else LE, ib, ic)
        return self.binary(AND, left, right)

    def _equality(self, node) -> int:
        a, b = node.args
        return self.binary(EQ, self.conv(a), self.conv(b))


def _false():
    return False


def active_objective(model):
    """The single active objective of ``model`` (None when there is none)."""
    objs = list(model.component_data_objects(Objective, active=True, descend_into=True))
    if len(objs) > 1:
        names = ", ".join(o.name for o in objs[:5])
        raise ModelError(f"model {model.name}: more than one active objective ({names})")
    return objs[0] if objs else None


def active_constraints(model) -> list:
    """Active constraints of ``model`` in Pyomo's declaration order."""
    return list(model.component_data_objects(Constraint, active=True, descend_into=True))


def convert(model, constraints=None, objective=None, *,
            fixed_as_parameters: bool = False) -> Tape:
    """Convert the active part of a Pyomo model into a :class:`Tape`.

    Parameters
    ----------
    model : pyomo Block
        The model (a ``ConcreteModel`` or any block).
    constraints, objective : optional
        Already collected active constraints and objective (saves a second traversal).
    fixed_as_parameters : bool
        False (default): every variable met is a column of ``x``, fixed or not (the
        caller decides per solve which columns are free). True: fixed variables become
        parameters, as constants of the tape.

    Raises
    ------
    ModelError
        For an unsupported expression, more than one active objective, a constraint
        without bounds, a fixed variable or mutable parameter without a value, or an
        unfixed integer variable; the message names the component.
    """
    tape = Tape()
    w = _Walker(tape, fixed_as_parameters)
    if constraints is None:
        constraints = active_constraints(model)
    if objective is None:
        objective = active_objective(model)
    if objective is not None:
        w.what = ("objective", objective)
        tape.objective = objective
        tape.sense = -1 if objective.sense == maximize else 1
        tape.objective_root = w.conv(objective.expr)
    for con in constraints:
        w.what = ("constraint", con)
        try:
            body = con.body
            has_bound = con.has_lb() or con.has_ub()
        except Exception as exc:  # Pyomo raises ValueError/PyomoException types here
            raise ModelError(f"constraint {con.name}: cannot be converted ({exc})") from None
        if not has_bound:
            raise ModelError(f"constraint {con.name}: has neither a lower nor an upper bound")
        tape.constraints.append(con)
        tape.constraint_roots.append(w.conv(body))
    tape.discrete = [v for v in tape.variables if not v.is_continuous()]
    check_discrete(tape.discrete)
    return tape


def check_discrete(variables) -> None:
    """Raise :class:`ModelError` for the first unfixed integer or binary variable."""
    for v in variables:
        if not v.fixed:
            raise ModelError(
                f"variable {v.name} is integer or binary; the NLP bridge solves continuous "
                "problems only (fix it or relax its domain)"
            )
