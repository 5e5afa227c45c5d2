"""CasADi functions of a converted model: values, sparse Jacobian, Lagrangian Hessian.

:func:`build_sx` turns a :class:`~airtaper.solve.pyomo_to_casadi.Tape` into CasADi SX
expressions with vector operations (one CasADi call per level and operation kind).
:func:`build_functions` then builds, once per model structure,

* ``f(x, p)`` objective (already multiplied by the sense, so always minimised),
* ``grad_f(x, p)`` dense gradient,
* ``g(x, p)`` constraint bodies,
* ``jac_g(x, p)`` Jacobian nonzeros (sparsity computed once),
* ``hess_l(x, p, lam, sigma)`` lower triangle of the Hessian of
  ``sigma * f + lam' g`` (sparsity computed once),

and :class:`Evaluator` calls them through CasADi function buffers writing straight into
preallocated numpy arrays, so no Python loop over constraints runs inside the Ipopt
callbacks. :func:`get_structure` caches everything per model object and structure.
"""

from __future__ import annotations

import time
import weakref
from dataclasses import dataclass, field

import casadi as ca
import numpy as np
import scipy.sparse as sp
from pyomo.common.gc_manager import PauseGC

from airtaper.errors import ModelError
from airtaper.solve import derivatives as _derivatives
from airtaper.solve import pyomo_to_casadi as p2c

_UNARY_CA = {
    "exp": ca.exp, "log": ca.log, "log10": ca.log10, "sqrt": ca.sqrt, "sin": ca.sin,
    "cos": ca.cos, "tan": ca.tan, "asin": ca.asin, "acos": ca.acos, "atan": ca.atan,
    "sinh": ca.sinh, "cosh": ca.cosh, "tanh": ca.tanh, "asinh": ca.asinh,
    "acosh": ca.acosh, "atanh": ca.atanh, "abs": ca.fabs, "ceil": ca.ceil,
    "floor": ca.floor,
}
_UNARY_BY_CODE = {p2c.UNARY_CODE[name]: fn for name, fn in _UNARY_CA.items()}
_BINARY_CA = {
    p2c.MUL: lambda a, b: a * b,
    p2c.DIV: lambda a, b: a / b,
    p2c.POW: lambda a, b: a**b,
    p2c.FMAX: ca.fmax,
    p2c.FMIN: ca.fmin,
    p2c.LE: lambda a, b: a <= b,
    p2c.LT: lambda a, b: a < b,
    p2c.EQ: lambda a, b: a == b,
    p2c.AND: ca.logic_and,
}


class _Blocks:
    """SX column vectors produced so far and where each tape node lives in them."""

    def __init__(self, n_nodes: int):
        self.vectors: list = []
        self.block = np.full(n_nodes, -1, dtype=np.int64)
        self.local = np.full(n_nodes, -1, dtype=np.int64)

    def add(self, ids: np.ndarray, vec) -> None:
        self.block[ids] = len(self.vectors)
        self.local[ids] = np.arange(len(ids))
        self.vectors.append(vec)

    def gather(self, ids: np.ndarray):
        """SX column of the nodes ``ids`` (in that order)."""
        b = self.block[ids]
        loc = self.local[ids]
        first = b[0]
        if (b == first).all():
            vec = self.vectors[first]
            if len(ids) == vec.shape[0] and (loc == np.arange(len(ids))).all():
                return vec
            return _take(vec, loc)
        order = np.argsort(b, kind="stable")
        sb = b[order]
        cuts = np.flatnonzero(np.diff(sb)) + 1
        parts = [
            _take(self.vectors[sb[seg_start]], loc[order[seg_start:seg_end]])
            for seg_start, seg_end in zip(
                np.concatenate(([0], cuts)), np.concatenate((cuts, [len(order)]))
            )
        ]
        cat = ca.vertcat(*parts)
        inverse = np.empty_like(order)
        inverse[order] = np.arange(len(order))
        return _take(cat, inverse)


def _take(vec, loc: np.ndarray):
    """Entries ``loc`` of the SX column ``vec`` as a column (also for 1x1 ``vec``)."""
    r = vec[loc.tolist()]
    return r if r.shape[1] == 1 else r.T


@dataclass
class SXModel:
    x: object  # SX symbols of the free variables
    p: object  # SX symbols of the parameters
    f: object  # objective times sense (scalar SX)
    g: object  # constraint bodies (SX column)


def build_sx(tape: p2c.Tape) -> SXModel:
    """Build CasADi SX expressions for the objective and constraints of ``tape``."""
    n, npar = len(tape.variables), len(tape.parameters)
    op = np.asarray(tape.op, dtype=np.int64)
    level = np.asarray(tape.level, dtype=np.int64)
    arg1 = np.asarray(tape.arg1, dtype=np.int64)
    arg2 = np.asarray(tape.arg2, dtype=np.int64)
    arg3 = np.asarray(tape.arg3, dtype=np.int64)
    aux = np.asarray(tape.aux, dtype=float)
    N = len(op)
    x = ca.SX.sym("x", n)
    p = ca.SX.sym("p", npar)
    blocks = _Blocks(N)

    # level 0: leaves, laid out as [x | p | constants]
    xs = np.flatnonzero(op == p2c.X)
    ps = np.flatnonzero(op == p2c.P)
    cs = np.flatnonzero(op == p2c.C)
    leaf_ids = np.concatenate(
        (xs[np.argsort(aux[xs])], ps[np.argsort(aux[ps])], cs)
    ).astype(np.int64)
    leaves = ca.vertcat(x, p, ca.DM(aux[cs]))
    blocks.add(leaf_ids, leaves)

    # linear-combination terms sorted by the level of the node they feed
    lin_row = np.asarray(tape.lin_row, dtype=np.int64)
    lin_arg = np.asarray(tape.lin_arg, dtype=np.int64)
    lin_coef = np.asarray(tape.lin_coef, dtype=float)
    if len(lin_row):
        t_order = np.argsort(level[lin_row], kind="stable")
        lin_row, lin_arg, lin_coef = lin_row[t_order], lin_arg[t_order], lin_coef[t_order]
        t_levels = level[lin_row]
    else:
        t_levels = np.zeros(0, dtype=np.int64)

    inner = np.flatnonzero(level > 0)
    inner = inner[np.argsort(level[inner], kind="stable")]
    lv = level[inner]
    cuts = np.flatnonzero(np.diff(lv)) + 1
    rowpos = np.zeros(N, dtype=np.int64)
    for chunk in np.split(inner, cuts) if len(inner) else []:
        L = level[chunk[0]]
        ops_here = op[chunk]
        for code in np.unique(ops_here):
            ids = chunk[ops_here == code]
            blocks.add(ids, _group(code, ids, L, blocks, arg1, arg2, arg3, aux,
                                   lin_row, lin_arg, lin_coef, t_levels, rowpos))

    if tape.constraint_roots:
        g = blocks.gather(np.asarray(tape.constraint_roots, dtype=np.int64))
    else:
        g = ca.SX(0, 1)
    if tape.objective_root >= 0:
        f = tape.sense * blocks.gather(np.asarray([tape.objective_root]))
    else:
        f = ca.SX(0.0)
    return SXModel(x=x, p=p, f=f, g=ca.densify(g))


def _group(code, ids, L, blocks, arg1, arg2, arg3, aux, lin_row, lin_arg, lin_coef,
           t_levels, rowpos):
    k = len(ids)
    if code == p2c.LIN:
        lo, hi = np.searchsorted(t_levels, [L, L + 1])
        rows, args, coefs = lin_row[lo:hi], lin_arg[lo:hi], lin_coef[lo:hi]
        rowpos[ids] = np.arange(k)
        uniq, inv = np.unique(args, return_inverse=True)
        A = sp.csc_matrix((coefs, (rowpos[rows], inv)), shape=(k, len(uniq)))
        A.sum_duplicates()
        spa = ca.Sparsity(k, len(uniq), A.indptr.tolist(), A.indices.tolist())
        res = ca.mtimes(ca.DM(spa, A.data.tolist()), blocks.gather(uniq))
        consts = aux[ids]
        if np.any(consts != 0.0):
            res = res + ca.DM(consts)
        return ca.densify(res)
    if code == p2c.POWC:
        return blocks.gather(arg1[ids]) ** ca.DM(aux[ids])
    if code in _BINARY_CA:
        return _BINARY_CA[code](blocks.gather(arg1[ids]), blocks.gather(arg2[ids]))
    if code == p2c.IFELSE:
        return ca.if_else(
            blocks.gather(arg1[ids]), blocks.gather(arg2[ids]), blocks.gather(arg3[ids])
        )
    fn = _UNARY_BY_CODE.get(int(code))
    if fn is None:  # pragma: no cover - the walker emits only known codes
        raise ModelError(f"internal: unknown tape operation {code}")
    return fn(blocks.gather(arg1[ids]))


@dataclass
class NlpFunctions:
    """Compiled CasADi functions and the fixed sparsity of one model structure."""

    n: int
    m: int
    n_par: int
    f: object
    grad_f: object
    g: object
    jac_g: object
    hess_l: object
    jac_rows: np.ndarray
    jac_cols: np.ndarray
    hess_rows: np.ndarray
    hess_cols: np.ndarray


def build_functions(sxm, tape: p2c.Tape | None = None, *,
                    method: str = "split") -> NlpFunctions:
    """Derivatives (sparse Jacobian, exact Hessian of the Lagrangian) and functions.

    ``method="split"`` (default; ``sxm`` from
    :func:`airtaper.solve.derivatives.build_split_sx` and its ``tape``) differentiates
    the nonlinear operations only and handles the linear part of the model as constant
    sparse matrices (:mod:`airtaper.solve.derivatives`). ``method="casadi"`` (any
    ``sxm``, e.g. from :func:`build_sx`) uses CasADi's ``jacobian`` and ``hessian`` of
    the whole graph: the reference path, with the same values, but several times slower
    on large, mostly linear models (its graph colouring needs one AD sweep of the whole
    graph per colour, and a dense row such as a daily mean forces many colours).
    """
    x, p, f, g = sxm.x, sxm.p, sxm.f, sxm.g
    n, m, npar = x.shape[0], g.shape[0], p.shape[0]
    lam = ca.SX.sym("lam", m)
    sigma = ca.SX.sym("sigma")
    grad = ca.densify(ca.gradient(f, x))
    if method == "split":
        if tape is None or not isinstance(sxm, _derivatives.SplitSX):
            raise ValueError("method='split' needs the split form and its tape")
        jac, hess = _derivatives.derivatives(tape, sxm, lam, sigma)
    elif method == "casadi":
        jac = ca.jacobian(g, x)
        lag = sigma * f + ca.dot(lam, g)
        hess = ca.tril(ca.hessian(lag, x)[0])
    else:
        raise ValueError(f"unknown derivative method {method!r}")
    jr, jc = jac.sparsity().get_triplet()
    hr, hc = hess.sparsity().get_triplet()
    opts = {"cse": False}
    return NlpFunctions(
        n=n, m=m, n_par=npar,
        f=ca.Function("nlp_f", [x, p], [f], opts),
        grad_f=ca.Function("nlp_grad_f", [x, p], [grad], opts),
        g=ca.Function("nlp_g", [x, p], [g], opts),
        jac_g=ca.Function("nlp_jac_g", [x, p], [jac], opts),
        hess_l=ca.Function("nlp_hess_l", [x, p, lam, sigma], [hess], opts),
        jac_rows=np.asarray(jr, dtype=np.int64),
        jac_cols=np.asarray(jc, dtype=np.int64),
        hess_rows=np.asarray(hr, dtype=np.int64),
        hess_cols=np.asarray(hc, dtype=np.int64),
    )


class _Call:
    """A CasADi function evaluated through a buffer into a fixed numpy array."""

    def __init__(self, fn, inputs, out_size):
        self.buf, self.run = fn.buffer()
        self.inputs = inputs  # keep the arrays alive
        for i, arr in enumerate(inputs):
            self.buf.set_arg(i, memoryview(arr))
        self.out = np.zeros(out_size)
        self.buf.set_res(0, memoryview(self.out))


class Evaluator:
    """Evaluates the NLP functions at numpy points with reusable buffers.

    Arrays returned by the methods are internal buffers: they are overwritten by the
    next call of the same method (copy them to keep them).
    """

    def __init__(self, fns: NlpFunctions):
        self.fns = fns
        self.x = np.zeros(fns.n)
        self.p = np.zeros(fns.n_par)
        self.lam = np.zeros(fns.m)
        self.sigma = np.zeros(1)
        xp = [self.x, self.p]
        self._f = _Call(fns.f, xp, 1)
        self._grad = _Call(fns.grad_f, xp, fns.n)
        self._g = _Call(fns.g, xp, fns.m)
        self._jac = _Call(fns.jac_g, xp, len(fns.jac_rows))
        self._hess = _Call(fns.hess_l, [self.x, self.p, self.lam, self.sigma],
                           len(fns.hess_rows))

    def set_parameters(self, values: np.ndarray) -> None:
        self.p[:] = values

    def objective(self, x) -> float:
        self.x[:] = x
        self._f.run()
        return float(self._f.out[0])

    def gradient(self, x) -> np.ndarray:
        self.x[:] = x
        self._grad.run()
        return self._grad.out

    def constraints(self, x) -> np.ndarray:
        self.x[:] = x
        self._g.run()
        return self._g.out

    def jacobian(self, x) -> np.ndarray:
        self.x[:] = x
        self._jac.run()
        return self._jac.out

    def hessian(self, x, lam, sigma) -> np.ndarray:
        self.x[:] = x
        self.lam[:] = lam
        self.sigma[0] = sigma
        self._hess.run()
        return self._hess.out


@dataclass
class Structure:
    """Everything built once per model structure (reused by warm re-solves)."""

    tape: p2c.Tape
    functions: NlpFunctions
    evaluator: Evaluator
    key: tuple
    fixed_flags: tuple
    conversion_s: float
    derivatives_s: float
    last_multipliers: tuple | None = None  # (lam, zl, zu) in Ipopt's convention
    expr_refs: list = field(default_factory=list)  # keeps the keyed ids from reuse
    extra: dict = field(default_factory=dict)

    def still_valid(self) -> bool:
        """True while no variable was fixed/unfixed and no named expression changed."""
        tape = self.tape
        if tuple(v.fixed for v in tape.all_vars) != self.fixed_flags:
            return False
        return all(e.expr is expr for e, expr in tape.named)

    def parameter_values(self) -> np.ndarray:
        return np.fromiter((_value(q) for q in self.tape.parameters), dtype=float,
                           count=len(self.tape.parameters))


def _value(q) -> float:
    v = q.value
    if v is None:
        raise ModelError(f"{q.name} has no value")
    return float(v)


_CACHE: "weakref.WeakKeyDictionary" = weakref.WeakKeyDictionary()
_CACHE_PER_MODEL = 4


def structure_key(constraints, objective) -> tuple:
    """Identity of the active constraints and objective expressions (not their values)."""
    ids = [id(c) for c in constraints]
    ids.extend(id(c.expr) for c in constraints)
    if objective is not None:
        ids.extend((id(objective), id(objective.expr), int(objective.sense)))
    return tuple(ids)


def get_structure(model, *, use_cache: bool = True) -> tuple[Structure, bool]:
    """The converted and differentiated model, from the cache when its structure holds.

    Returns ``(structure, reused)``. The cache is keyed by the model object (held
    weakly) and by the identity of the active constraints, their expressions and the
    objective; an entry is also dropped when a variable in it was fixed or unfixed or a
    named expression was given a new body. Values (of parameters, fixed variables,
    bounds, initial points) are not part of the structure and are read at every solve.
    """
    t0 = time.perf_counter()
    constraints = p2c.active_constraints(model)
    objective = p2c.active_objective(model)
    key = structure_key(constraints, objective)
    entries = _CACHE.get(model) if use_cache else None
    if entries:
        for i, s in enumerate(entries):
            if s.key == key and s.still_valid():
                entries.append(entries.pop(i))  # most recently used last
                return s, True
    with PauseGC():  # the walk allocates many long-lived objects: no GC passes
        tape = p2c.convert(model, constraints, objective)
        sxm = _derivatives.build_split_sx(tape)
        t1 = time.perf_counter()
        fns = build_functions(sxm, tape)
        ev = Evaluator(fns)
        t2 = time.perf_counter()
    s = Structure(
        tape=tape, functions=fns, evaluator=ev, key=key,
        fixed_flags=tuple(v.fixed for v in tape.all_vars),
        conversion_s=t1 - t0, derivatives_s=t2 - t1,
        expr_refs=[c.expr for c in constraints]
        + ([objective, objective.expr] if objective is not None else []),
    )
    if use_cache:
        entries = _CACHE.setdefault(model, [])
        entries.append(s)
        del entries[:-_CACHE_PER_MODEL]
    return s, False


def clear_cache(model=None) -> None:
    """Forget cached structures (of one model, or of all models)."""
    if model is None:
        _CACHE.clear()
    else:
        _CACHE.pop(model, None)
