"""CasADi functions of a converted model: values, sparse Jacobian, Lagrangian Hessian.

:func:`get_structure` converts a model once per structure and caches the result:

1. :func:`airtaper.solve.pyomo_to_casadi.convert` walks it into a tape (every variable
   met is a column, fixed or not);
2. :func:`airtaper.solve.derivatives.build_split_sx` builds the CasADi SX graph in
   split form (the linear part flattened into sparse matrices, the nonlinear
   operations one depth at a time);
3. :func:`build_functions` builds

   * ``f(x, p)`` objective (already multiplied by the sense, so always minimised),
   * ``grad_f(x, p)`` dense gradient,
   * ``g(x, p)`` constraint bodies,
   * ``jac_g(x, p)`` Jacobian nonzeros (sparsity computed once),
   * ``hess_l(x, p, lam, sigma)`` lower triangle of the Hessian of
     ``sigma * f + lam' g`` (sparsity computed once),

   by default with :func:`airtaper.solve.derivatives.derivatives` (the
   linear/nonlinear split); ``method="casadi"`` keeps CasADi's own whole-graph
   ``jacobian``/``hessian`` as the reference (with :func:`build_sx`, which builds the
   graph as walked, one level and operation kind at a time);
4. :class:`Evaluator` calls them through CasADi function buffers writing straight into
   preallocated numpy arrays, so no Python loop over constraints runs inside the Ipopt
   callbacks.

Which variables are fixed is not part of the structure: each :func:`get_structure`
call reads the fixed flags and :class:`Structure` exposes views of the current state
(free columns only; fixed values enter as parameters), so fixing and unfixing
variables changes values and index arrays, never the derivative functions.
"""

from __future__ import annotations

import time
import weakref
from dataclasses import dataclass

import casadi as ca
import numpy as np
import scipy.sparse as sp
from pyomo.common.gc_manager import PauseGC

from airtaper.errors import ModelError
from airtaper.solve import derivatives as _derivatives
from airtaper.solve import pyomo_to_casadi as p2c
from airtaper.solve.derivatives import BINARY_CA as _BINARY_CA
from airtaper.solve.derivatives import UNARY_BY_CODE as _UNARY_BY_CODE


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


class TapeView:
    """The tape as one fixed state of the variables sees it.

    ``variables`` are the free variables (Ipopt's columns, in column order),
    ``fixed`` the fixed ones, ``parameters`` the tape's mutable parameters followed by
    the fixed variables (their values are constants of the solve). Every other
    attribute (``constraints``, ``objective``, ``sense``, ...) is the tape's own.
    """

    def __init__(self, tape: p2c.Tape, free: np.ndarray, fixed: np.ndarray):
        self.full = tape
        cols = tape.variables
        self.variables = [cols[i] for i in free.tolist()]
        self.fixed = [cols[i] for i in fixed.tolist()]
        self.parameters = list(tape.parameters) + self.fixed

    def __getattr__(self, name):
        return getattr(self.full, name)


class FunctionsView:
    """:class:`NlpFunctions` restricted to the free columns: ``n``, ``n_par`` and the
    sparsity (``jac_rows``/``jac_cols``, ``hess_rows``/``hess_cols``, columns numbered
    among the free variables); the CasADi functions themselves are the full ones."""

    def __init__(self, full: NlpFunctions, free: np.ndarray, fixed_mask: np.ndarray,
                 n_fixed: int):
        self.full = full
        self.n = len(free)
        self.m = full.m
        self.n_par = full.n_par + n_fixed
        if n_fixed == 0:
            self.jac_sel = self.hess_sel = None
            self.jac_rows, self.jac_cols = full.jac_rows, full.jac_cols
            self.hess_rows, self.hess_cols = full.hess_rows, full.hess_cols
            return
        colmap = np.full(full.n, -1, dtype=np.int64)
        colmap[free] = np.arange(len(free))
        self.jac_sel = np.flatnonzero(~fixed_mask[full.jac_cols])
        self.jac_rows = full.jac_rows[self.jac_sel]
        self.jac_cols = colmap[full.jac_cols[self.jac_sel]]
        self.hess_sel = np.flatnonzero(~(fixed_mask[full.hess_rows]
                                         | fixed_mask[full.hess_cols]))
        self.hess_rows = colmap[full.hess_rows[self.hess_sel]]
        self.hess_cols = colmap[full.hess_cols[self.hess_sel]]

    def __getattr__(self, name):
        return getattr(self.full, name)


class EvaluatorView:
    """:class:`Evaluator` on the free columns: the fixed columns take their values from
    :meth:`set_parameters` (which receives the mutable parameters, then the fixed
    variables, as :class:`TapeView` orders them). Returned arrays are buffers."""

    def __init__(self, ev: Evaluator, fns: FunctionsView, free: np.ndarray,
                 fixed: np.ndarray):
        self.full = ev
        self.free, self.fixed = free, fixed
        self.identity = len(fixed) == 0
        self.n_par = ev.fns.n_par
        self.jac_sel, self.hess_sel = fns.jac_sel, fns.hess_sel
        self._grad = np.zeros(len(free))
        self._jac = np.zeros(len(fns.jac_rows))
        self._hess = np.zeros(len(fns.hess_rows))

    def set_parameters(self, values) -> None:
        values = np.asarray(values, dtype=float)
        self.full.p[:] = values[:self.n_par]
        if not self.identity:
            self.full.x[self.fixed] = values[self.n_par:]

    def set_x(self, x) -> None:
        if self.identity:
            self.full.x[:] = x
        else:
            self.full.x[self.free] = x

    def objective(self, x) -> float:
        self.set_x(x)
        call = self.full._f
        call.run()
        return float(call.out[0])

    def gradient(self, x) -> np.ndarray:
        self.set_x(x)
        call = self.full._grad
        call.run()
        if self.identity:
            return call.out
        np.take(call.out, self.free, out=self._grad)
        return self._grad

    def constraints(self, x) -> np.ndarray:
        self.set_x(x)
        call = self.full._g
        call.run()
        return call.out

    def jacobian(self, x) -> np.ndarray:
        self.set_x(x)
        call = self.full._jac
        call.run()
        if self.identity:
            return call.out
        np.take(call.out, self.jac_sel, out=self._jac)
        return self._jac

    def hessian(self, x, lam, sigma) -> np.ndarray:
        self.set_x(x)
        ev = self.full
        ev.lam[:] = lam
        ev.sigma[0] = sigma
        ev._hess.run()
        if self.identity:
            return ev._hess.out
        np.take(ev._hess.out, self.hess_sel, out=self._hess)
        return self._hess

    def fixed_reduced_gradient(self, x, lam, sigma: float = 1.0) -> np.ndarray:
        """``sigma * df/dx_j + lam' dg/dx_j`` for the fixed columns ``j`` at the free
        point ``x`` (the fixed values as set): the derivative of the Lagrangian with
        respect to each fixed value."""
        ev = self.full
        self.set_x(x)
        ev._grad.run()
        out = sigma * ev._grad.out[self.fixed]
        if ev.fns.m and len(self.fixed):
            ev._jac.run()
            fns = ev.fns
            pos = np.full(fns.n, -1, dtype=np.int64)
            pos[self.fixed] = np.arange(len(self.fixed))
            k = pos[fns.jac_cols]
            sel = k >= 0
            out = out + np.bincount(k[sel], weights=ev._jac.out[sel] * lam[fns.jac_rows[sel]],
                                    minlength=len(self.fixed))
        return out


class Structure:
    """Everything built once per model structure (reused by warm re-solves).

    The tape and the functions cover every variable met, fixed or not. Which ones are
    fixed is read at every :func:`get_structure` call: ``tape``, ``functions`` and
    ``evaluator`` are views (:class:`TapeView`, :class:`FunctionsView`,
    :class:`EvaluatorView`) of that fixed state, rebuilt cheaply (index arrays) when it
    changes, so fixing or unfixing a variable does not rebuild the derivatives.
    """

    def __init__(self, tape: p2c.Tape, functions: NlpFunctions, evaluator: Evaluator,
                 key: tuple, conversion_s: float, derivatives_s: float,
                 expr_refs: list):
        self.full_tape = tape
        self.full_functions = functions
        self.full_evaluator = evaluator
        self.key = key
        self.conversion_s = conversion_s
        self.derivatives_s = derivatives_s
        self.expr_refs = expr_refs  # keeps the keyed ids from reuse
        self.extra: dict = {}
        # (lam, zl, zu) of the last successful solve in Ipopt's convention, zl and zu
        # over all columns (0 for columns that were fixed)
        self.multipliers_full: tuple | None = None
        self._fixed_mask: np.ndarray | None = None
        self.refresh()

    def refresh(self) -> bool:
        """Read the fixed flags; rebuild the views if they changed (returns True)."""
        tape = self.full_tape
        cols = tape.variables
        mask = np.fromiter((v.fixed for v in cols), dtype=bool, count=len(cols))
        if self._fixed_mask is not None and np.array_equal(mask, self._fixed_mask):
            return False
        p2c.check_discrete(tape.discrete)
        free = np.flatnonzero(~mask)
        fixed = np.flatnonzero(mask)
        self._fixed_mask = mask
        self.tape = TapeView(tape, free, fixed)
        self.functions = FunctionsView(self.full_functions, free, mask, len(fixed))
        self.evaluator = EvaluatorView(self.full_evaluator, self.functions, free, fixed)
        self.free_columns, self.fixed_columns = free, fixed
        return True

    def still_valid(self) -> bool:
        """True while no named expression was given a new body."""
        return all(e.expr is expr for e, expr in self.full_tape.named)

    def parameter_values(self) -> np.ndarray:
        """Values of ``tape.parameters`` (mutable parameters, then fixed variables)."""
        return np.fromiter((_value(q) for q in self.tape.parameters), dtype=float,
                           count=len(self.tape.parameters))

    @property
    def last_multipliers(self) -> tuple | None:
        """(lam, zl, zu) of the last successful solve, zl/zu over the free columns."""
        if self.multipliers_full is None:
            return None
        lam, zl, zu = self.multipliers_full
        return lam, zl[self.free_columns], zu[self.free_columns]

    @last_multipliers.setter
    def last_multipliers(self, value) -> None:
        if value is None:
            self.multipliers_full = None
            return
        lam, zl, zu = value
        n = len(self.full_tape.variables)
        zl_full, zu_full = np.zeros(n), np.zeros(n)
        zl_full[self.free_columns] = zl
        zu_full[self.free_columns] = zu
        self.multipliers_full = (np.array(lam, dtype=float), zl_full, zu_full)


def _value(q) -> float:
    v = q.value
    if v is None:
        kind = "fixed variable" if q.is_variable_type() else "parameter"
        raise ModelError(f"{kind} {q.name} has no value")
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
    objective; an entry is also dropped when a named expression in it was given a new
    body. Values (of parameters, fixed variables, bounds, initial points) and which
    variables are fixed are not part of the structure: they are read at every call
    (the structure's views follow the current fixed state).
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
                s.refresh()
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
