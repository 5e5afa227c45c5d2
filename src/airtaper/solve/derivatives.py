"""Sparse first and second derivatives of a converted model by a linear/nonlinear split.

Most of a process model is linear: mass balances, collocation sums, flow splits and
means are linear combinations, and the nonlinearity sits in comparatively few products,
quotients and powers (rates, transfer terms). This module exploits that generically,
for any :class:`~airtaper.solve.pyomo_to_casadi.Tape`:

1. *Flattening.* Every tape node is written as an affine function of the free
   variables ``x``, the parameters ``p`` and the values ``w`` of the *nonlinear* nodes
   (every node that is not a leaf or a linear combination):
   ``node = E_x x + E_p p + E_w w + e0``. With ``C`` the (nilpotent) matrix of the
   linear-combination coefficients and ``B`` the unit rows of the leaves and nonlinear
   nodes, ``E = (I - C)^-1 B = B + C B + C^2 B + ...``, a few sparse products in scipy.
2. *Jacobian.* Each nonlinear node is ``w_k = phi_k(u_k1, u_k2)`` with arguments
   ``u_ks = E[arg_ks]`` (affine in ``x`` and lower ``w``). The chain rule gives
   ``dw/dx`` one nonlinear *depth* at a time (depth: longest chain of nonlinear nodes
   below, so one depth depends only on lower depths)::

       U_s   = E_x[arg_s] + E_w[arg_s] W_lower        (gradients of the arguments)
       W_d   = sum_s diag(d phi / d u_s) U_s           (gradients of the nodes of depth d)

   and the constraint Jacobian is ``J = E_x[g] + E_w[g] W``: a numeric constant part
   plus CasADi sparse products, with no graph colouring and no AD sweep over the whole
   expression graph. Only the local partial derivatives of the nonlinear operations are
   CasADi expressions.
3. *Hessian of the Lagrangian* ``L = sigma f + lam' g``. The linear parts contribute
   nothing, so ``L`` is affine in ``w``: ``L = mu' w + (linear)``, with
   ``mu = sigma E_w[f]' + E_w[g]' lam``. Reverse accumulation over the depths gives the
   total multiplier of each nonlinear node,
   ``bar_d = mu_d + sum_s E_w[arg_s]' (diag(d phi/d u_s) bar_higher)``, and then
   ``H = sum_k bar_k sum_{s,t} (d2 phi_k / du_s du_t) grad(u_ks) grad(u_kt)'``,
   i.e. ``H = sum_{s,t} U_s' diag(bar * phi_st) U_t`` (the "edge pushing" form of the
   second-order chain rule).

The results are the same functions as CasADi's own ``jacobian``/``hessian`` of the
graph (tested to rounding at random points, including the operations handled by the
generic fallback, which takes CasADi's own derivative of the operation).

References
----------
Griewank, A. and Walther, A. (2008), "Evaluating Derivatives: Principles and Techniques
of Algorithmic Differentiation", 2nd ed., SIAM (chain rule and its second-order form,
vertex elimination). Gower, R. M. and Mello, M. P. (2012), "A new framework for the
computation of Hessians", Optimization Methods and Software 27(2), 251-273 (edge
pushing: the Hessian accumulated from the local second derivatives and the adjoints).
"""

from __future__ import annotations

from dataclasses import dataclass

import casadi as ca
import numpy as np
import scipy.sparse as sp

from airtaper.solve import pyomo_to_casadi as p2c

_ARITH2 = (p2c.MUL, p2c.DIV, p2c.POW, p2c.FMAX, p2c.FMIN)
_NO_DERIVATIVE = (p2c.LE, p2c.LT, p2c.EQ, p2c.AND,
                  p2c.UNARY_CODE["ceil"], p2c.UNARY_CODE["floor"])


def differentiable_slots(code: int) -> tuple[int, ...]:
    """Argument slots (1 = ``arg1``, ...) through which an operation has a derivative."""
    if code in _ARITH2:
        return (1, 2)
    if code == p2c.IFELSE:
        return (2, 3)  # the condition is piecewise constant
    if code in _NO_DERIVATIVE:
        return ()
    return (1,)  # POWC and the unary intrinsics


# --- step 1: flattening ----------------------------------------------------------------
@dataclass
class Flat:
    """Affine representation of every tape node in ``x`` and the nonlinear values ``w``.

    ``Ex`` (nodes x n) and ``Ew`` (nodes x K) are CSR matrices; the columns of ``Ew``
    are the nonlinear nodes ``w_nodes`` ordered by ``depth`` (then by operation).
    ``offsets[d]`` is the first ``w`` index of depth ``d`` (depths start at 1).
    """

    Ex: sp.csr_matrix
    Ew: sp.csr_matrix
    w_nodes: np.ndarray
    depth: np.ndarray  # of each w, in w order
    offsets: np.ndarray


def flatten(tape: p2c.Tape) -> Flat:
    """Express every node of ``tape`` in ``x`` and the nonlinear values (module notes)."""
    op = np.asarray(tape.op, dtype=np.int64)
    level = np.asarray(tape.level, dtype=np.int64)
    aux = np.asarray(tape.aux, dtype=float)
    N, n = len(op), len(tape.variables)
    nl = np.flatnonzero(op > p2c.LIN)
    nl = nl[np.argsort(level[nl], kind="stable")]  # topological order
    K = len(nl)
    # columns: [x | w] (parameters and constants are not needed for derivatives)
    col = np.full(N, -1, dtype=np.int64)
    xs = np.flatnonzero(op == p2c.X)
    col[xs] = aux[xs].astype(np.int64)
    col[nl] = n + np.arange(K)
    rows = np.flatnonzero(col >= 0)
    B = sp.csr_matrix((np.ones(len(rows)), (rows, col[rows])), shape=(N, n + K))
    C = sp.csr_matrix((np.asarray(tape.lin_coef, dtype=float),
                       (np.asarray(tape.lin_row, dtype=np.int64),
                        np.asarray(tape.lin_arg, dtype=np.int64))), shape=(N, N))
    E, F = B, B
    for _ in range(N + 1):  # C is nilpotent: at most (longest linear chain) products
        F = C @ F
        if F.nnz == 0:
            break
        E = E + F
    E = E.tocsr()
    E.sum_duplicates()
    Ew_tape = E[:, n:].tocsr()  # w columns still in topological order

    # nonlinear depth of each w, one tape level at a time (arguments are lower levels)
    depth_t = np.zeros(K, dtype=np.int64)  # indexed by topological w position
    arg = (None, np.asarray(tape.arg1, dtype=np.int64), np.asarray(tape.arg2, dtype=np.int64),
           np.asarray(tape.arg3, dtype=np.int64))
    op_nl = op[nl]
    lv = level[nl]
    cuts = np.flatnonzero(np.diff(lv)) + 1 if K else np.zeros(0, dtype=np.int64)
    for chunk in np.split(np.arange(K), cuts) if K else []:
        best = np.zeros(len(chunk), dtype=np.int64)
        for slot in (1, 2, 3):
            has = np.array([slot in differentiable_slots(c) for c in op_nl[chunk]], dtype=bool)
            if not has.any():
                continue
            sub = Ew_tape[arg[slot][nl[chunk[has]]]]
            if sub.nnz == 0:
                continue
            vals = depth_t[sub.indices]
            counts = np.diff(sub.indptr)
            nonempty = counts > 0
            mx = np.zeros(len(counts), dtype=np.int64)
            mx[nonempty] = np.maximum.reduceat(vals, sub.indptr[:-1][nonempty])
            best[has] = np.maximum(best[has], mx)
        depth_t[chunk] = best + 1
    order = np.lexsort((np.arange(K), op_nl, depth_t)) if K else np.zeros(0, dtype=np.int64)
    new_of_old = np.empty(K, dtype=np.int64)
    new_of_old[order] = np.arange(K)
    Ew = sp.csr_matrix((Ew_tape.data, new_of_old[Ew_tape.indices], Ew_tape.indptr),
                       shape=(N, K))
    Ew.sort_indices()
    depth = depth_t[order]
    max_depth = int(depth.max()) if K else 0
    offsets = np.searchsorted(depth, np.arange(1, max_depth + 2))
    return Flat(Ex=E[:, :n].tocsr(), Ew=Ew, w_nodes=nl[order], depth=depth,
                offsets=offsets)


# --- local partial derivatives of the operations ---------------------------------------
def _local(code: int, a, b=None, c=None, w=None):
    """First and second partial derivatives of one operation (vectors, elementwise).

    Returns ``(first, second)``: ``first[s]`` is d phi / d u_s, ``second[(s, t)]``
    (``s <= t``) is d2 phi / du_s du_t, over the differentiable slots in order
    (:func:`differentiable_slots`); entries missing from ``second`` are zero.
    ``w`` is the operation's own value (shared where the derivative reuses it).
    """
    if code == p2c.MUL:
        return [b, a], {(0, 1): ca.DM.ones(a.shape[0])}
    if code == p2c.DIV:
        inv = 1.0 / b
        q = w if w is not None else a * inv
        return [inv, -q * inv], {(0, 1): -inv * inv, (1, 1): 2.0 * q * inv * inv}
    if code == p2c.POWC:
        e = ca.DM(b)
        d1 = e * a ** (e - 1.0)
        return [d1], {(0, 0): e * (e - 1.0) * a ** (e - 2.0)}
    if code == p2c.IFELSE:
        on = ca.if_else(a, ca.DM.ones(a.shape[0]), ca.DM.zeros(a.shape[0]))
        return [on, 1.0 - on], {}
    return _generic_local(code, a, b)


def _generic_local(code: int, a, b=None):
    """CasADi's own partial derivatives of an elementwise operation (fallback)."""
    from airtaper.solve.nlp import _BINARY_CA, _UNARY_BY_CODE

    k = a.shape[0]
    sa = ca.SX.sym("a", k)
    if b is None:
        fn = _UNARY_BY_CODE[int(code)]
        syms, vals = [sa], [a]
        phi = fn(sa)
    else:
        sb = ca.SX.sym("b", k)
        syms, vals = [sa, sb], [a, b]
        phi = _BINARY_CA[int(code)](sa, sb)
    first = [ca.densify(ca.diag(ca.jacobian(phi, s))) for s in syms]
    second = {}
    for i, fi in enumerate(first):
        for j in range(i, len(syms)):
            d2 = ca.densify(ca.diag(ca.jacobian(fi, syms[j])))
            second[(i, j)] = d2
    exprs = first + list(second.values())
    out = ca.substitute(exprs, syms, vals)
    return out[:len(first)], dict(zip(second, out[len(first):]))


# --- steps 2 and 3: Jacobian and Hessian ------------------------------------------------
def _dm(a: sp.spmatrix):
    """scipy sparse -> CasADi DM with the same sparsity."""
    a = sp.csc_matrix(a)
    a.sort_indices()
    return ca.DM(ca.Sparsity(a.shape[0], a.shape[1], a.indptr.tolist(), a.indices.tolist()),
                 a.data.tolist())


@dataclass
class _DepthBlock:
    """What the Jacobian pass keeps of one (depth, operation) group for the Hessian."""

    lo: int  # first w index of the group
    hi: int
    first: list  # d phi / d u_s (SX vectors)
    second: dict  # (s, t) -> SX vector
    U: list  # SX gradients (rows x n) of the arguments, per slot
    Aw: list  # scipy CSR: E_w rows of the arguments (columns < lo), per slot


def derivatives(tape: p2c.Tape, x, blocks, f, g, lam, sigma, *, flat: Flat | None = None):
    """Sparse Jacobian of ``g`` and lower-triangular Lagrangian Hessian, as SX.

    ``blocks`` locates the SX value of every tape node (:func:`airtaper.solve.nlp.build_sx`).
    ``f`` must be the objective already multiplied by the sense, as built there.
    Returns ``(jac, hess_lower)``.
    """
    flat = flat or flatten(tape)
    n = x.shape[0]
    K = len(flat.w_nodes)
    arg = {1: np.asarray(tape.arg1, dtype=np.int64), 2: np.asarray(tape.arg2, dtype=np.int64),
           3: np.asarray(tape.arg3, dtype=np.int64)}
    op = np.asarray(tape.op, dtype=np.int64)
    aux = np.asarray(tape.aux, dtype=float)
    Ex, Ew = flat.Ex, flat.Ew

    # --- Jacobian of the nonlinear values, depth by depth
    groups: list[_DepthBlock] = []
    W_parts = []
    Wstack = ca.SX(0, n)
    for d in range(len(flat.offsets) - 1):
        lo_d, hi_d = int(flat.offsets[d]), int(flat.offsets[d + 1])
        if hi_d == lo_d:
            continue
        codes = op[flat.w_nodes[lo_d:hi_d]]
        cut = np.flatnonzero(np.diff(codes)) + 1
        level_parts = []
        for seg in np.split(np.arange(lo_d, hi_d), cut):
            ids = flat.w_nodes[seg]
            code = int(op[ids[0]])
            slots = differentiable_slots(code)
            k = len(ids)
            if not slots:
                level_parts.append(ca.SX(k, n))
                continue
            vals = [blocks.gather(arg[s][ids]) for s in slots]
            if code == p2c.POWC:
                first, second = _local(code, vals[0], aux[ids])
            elif code == p2c.IFELSE:
                first, second = _local(code, blocks.gather(arg[1][ids]))
            else:
                first, second = _local(code, *vals, w=blocks.gather(ids))
            U, Aw = [], []
            for s in slots:
                rows = arg[s][ids]
                aw = Ew[rows][:, :lo_d]
                u = _dm(Ex[rows])
                if aw.nnz:
                    u = u + ca.mtimes(_dm(aw), Wstack)
                U.append(u)
                Aw.append(aw)
            Wg = None
            for fs, u in zip(first, U):
                term = ca.mtimes(ca.diag(fs), u)
                Wg = term if Wg is None else Wg + term
            level_parts.append(Wg)
            groups.append(_DepthBlock(int(seg[0]), int(seg[-1]) + 1, first, second, U, Aw))
        part = ca.vertcat(*level_parts)
        W_parts.append(part)
        Wstack = ca.vertcat(Wstack, part)
    W = Wstack if K else ca.SX(0, n)

    roots = np.asarray(tape.constraint_roots, dtype=np.int64)
    m = len(roots)
    if m:
        Ex_g = Ex[roots]
        Ex_g.eliminate_zeros()
        jac = _dm(Ex_g)
        Ew_g = Ew[roots]
        Ew_g.eliminate_zeros()
        if Ew_g.nnz:
            jac = jac + ca.mtimes(_dm(Ew_g), W)
        jac = ca.SX(jac)
    else:
        jac = ca.SX(0, n)

    # --- Hessian: total multipliers of the nonlinear values, top depth first
    mu = ca.SX(K, 1)
    if m and Ew_g.nnz:
        mu = mu + ca.mtimes(_dm(Ew_g.T), lam)
    if tape.objective_root >= 0:
        Ew_f = Ew[[tape.objective_root]]
        Ew_f.eliminate_zeros()
        if Ew_f.nnz:
            mu = mu + sigma * tape.sense * _dm(Ew_f.T)
    bar_of = {}
    acc = mu
    for grp in reversed(groups):
        bar = acc[grp.lo:grp.hi]
        bar_of[grp.lo] = bar
        for fs, aw in zip(grp.first, grp.Aw):
            if aw.nnz == 0:
                continue
            contrib = ca.mtimes(_dm(aw.T), fs * bar)  # length grp.lo
            acc = acc + ca.vertcat(contrib, ca.SX(K - contrib.shape[0], 1))
    pairs: dict = {}
    for grp in groups:
        bar = bar_of[grp.lo]
        for (s, t), d2 in grp.second.items():
            coef = bar * d2
            pairs.setdefault((s, t), []).append((grp.U[s], coef, grp.U[t]))
    H = ca.SX(n, n)
    for (s, t), items in pairs.items():
        Us = ca.vertcat(*[u for u, _, _ in items])
        cs = ca.vertcat(*[c for _, c, _ in items])
        Ut = ca.vertcat(*[u for _, _, u in items])
        term = ca.mtimes(Us.T, ca.mtimes(ca.diag(cs), Ut))
        H = H + term if s == t else H + term + term.T
    return jac, ca.tril(H)
