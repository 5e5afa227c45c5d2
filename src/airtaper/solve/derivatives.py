"""Sparse first and second derivatives of a converted model by a linear/nonlinear split.

Most of a process model is linear: mass balances, collocation sums, flow splits and
means are linear combinations, and the nonlinearity sits in comparatively few products,
quotients and powers (rates, transfer terms). This module exploits that generically,
for any :class:`~airtaper.solve.pyomo_to_casadi.Tape`:

1. *Flattening.* Every tape node is written as an affine function of the variable
   columns ``x``, the parameters ``p`` and the values ``w`` of the *nonlinear* nodes
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

The values themselves are built from the same split form (:func:`build_split_sx`):
each argument row and each constraint body is one sparse product ``E [x; p; w] + e0``.
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
(Both cited from memory.)
"""

from __future__ import annotations

from dataclasses import dataclass

import casadi as ca
import numpy as np
import scipy.sparse as sp

from airtaper.solve import pyomo_to_casadi as p2c

# CasADi counterparts of the tape's operations (elementwise on SX columns)
UNARY_CA = {
    "exp": ca.exp, "log": ca.log, "log10": ca.log10, "sqrt": ca.sqrt, "sin": ca.sin,
    "cos": ca.cos, "tan": ca.tan, "asin": ca.asin, "acos": ca.acos, "atan": ca.atan,
    "sinh": ca.sinh, "cosh": ca.cosh, "tanh": ca.tanh, "asinh": ca.asinh,
    "acosh": ca.acosh, "atanh": ca.atanh, "abs": ca.fabs, "ceil": ca.ceil,
    "floor": ca.floor,
}
UNARY_BY_CODE = {p2c.UNARY_CODE[name]: fn for name, fn in UNARY_CA.items()}
BINARY_CA = {
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
    """Affine representation of every tape node in ``x``, ``p`` and the nonlinear ``w``.

    ``E`` (nodes x (n + n_par + K), CSR) and ``e0`` (nodes) give
    ``node = E [x; p; w] + e0``; the ``w`` columns are the nonlinear nodes ``w_nodes``
    ordered by ``depth`` (then by operation, then topologically), so that the nodes of
    one depth depend only on the ``w`` before them. ``offsets[d]`` is the first ``w``
    index of depth ``d + 1``; ``offsets[-1] == K``.
    """

    E: sp.csr_matrix
    e0: np.ndarray
    n: int
    n_par: int
    w_nodes: np.ndarray
    depth: np.ndarray  # of each w, in w order
    offsets: np.ndarray

    @property
    def Ex(self) -> sp.csr_matrix:
        return self.E[:, :self.n]

    @property
    def Ew(self) -> sp.csr_matrix:
        return self.E[:, self.n + self.n_par:]


def flatten(tape: p2c.Tape) -> Flat:
    """Express every node of ``tape`` in ``x``, ``p`` and the nonlinear values (notes)."""
    a = tape.arrays()
    op, level, aux = a["op"], a["level"], a["aux"]
    N, n, npar = len(op), len(tape.variables), len(tape.parameters)
    nl = np.flatnonzero(op > p2c.LIN)
    nl = nl[np.argsort(level[nl], kind="stable")]  # topological order
    K = len(nl)
    base = n + npar
    col = np.full(N, -1, dtype=np.int64)
    xs = np.flatnonzero(op == p2c.X)
    col[xs] = aux[xs].astype(np.int64)
    ps = np.flatnonzero(op == p2c.P)
    col[ps] = n + aux[ps].astype(np.int64)
    col[nl] = base + np.arange(K)
    rows = np.flatnonzero(col >= 0)
    B = sp.csr_matrix((np.ones(len(rows)), (rows, col[rows])), shape=(N, base + K))
    C = sp.csr_matrix((a["lin_coef"], (a["lin_row"], a["lin_arg"])), shape=(N, N))
    c0 = np.where((op == p2c.C) | (op == p2c.LIN), aux, 0.0)
    E, F, e0, f0 = B, B, c0, c0
    for _ in range(N + 1):  # C is nilpotent: (longest linear chain) products at most
        F = C @ F
        f0 = C @ f0
        if F.nnz == 0 and not f0.any():
            break
        E = E + F
        e0 = e0 + f0
    E = E.tocsr()
    E.sum_duplicates()

    # nonlinear depth of each w, one tape level at a time (arguments are lower levels)
    depth_t = np.zeros(K, dtype=np.int64)  # by topological position
    lv = level[nl]
    cuts = np.flatnonzero(np.diff(lv)) + 1 if K else np.zeros(0, dtype=np.int64)
    Ew_t = E[:, base:].tocsr()
    for chunk in np.split(np.arange(K), cuts) if K else []:
        best = np.zeros(len(chunk), dtype=np.int64)
        for slot in ("arg1", "arg2", "arg3"):
            args = a[slot][nl[chunk]]
            has = args >= 0
            if not has.any():
                continue
            sub = Ew_t[args[has]]
            if sub.nnz == 0:
                continue
            vals = depth_t[sub.indices]
            nonempty = np.diff(sub.indptr) > 0
            mx = np.zeros(len(nonempty), dtype=np.int64)
            mx[nonempty] = np.maximum.reduceat(vals, sub.indptr[:-1][nonempty])
            best[has] = np.maximum(best[has], mx)
        depth_t[chunk] = best + 1
    order = np.lexsort((np.arange(K), op[nl], depth_t)) if K else np.zeros(0, np.int64)
    new_of_old = np.arange(base + K, dtype=np.int64)
    new_of_old[base + order] = base + np.arange(K)
    E = sp.csr_matrix((E.data, new_of_old[E.indices], E.indptr), shape=E.shape)
    E.sort_indices()
    depth = depth_t[order]
    max_depth = int(depth.max()) if K else 0
    offsets = np.searchsorted(depth, np.arange(1, max_depth + 2))
    return Flat(E=E, e0=e0, n=n, n_par=npar, w_nodes=nl[order], depth=depth,
                offsets=offsets)


# --- values: the SX graph of the split form ---------------------------------------------
@dataclass
class Group:
    """Nonlinear nodes of one depth and one operation: ``w[lo:hi]``."""

    lo: int
    hi: int
    depth_lo: int  # first w index of the group's depth (its arguments use w before it)
    code: int
    ids: np.ndarray  # tape nodes
    args: dict  # slot (1..3) -> SX column of the argument values
    w: object  # SX column of the values


@dataclass
class SplitSX:
    x: object
    p: object
    f: object  # objective times sense (scalar SX)
    g: object  # constraint bodies (SX column)
    groups: list
    flat: Flat


def build_split_sx(tape: p2c.Tape, flat: Flat | None = None) -> SplitSX:
    """CasADi SX of the model in split form: nonlinear values one depth at a time, each
    argument and each constraint body one sparse product ``E [x; p; w] + e0``."""
    flat = flat or flatten(tape)
    a = tape.arrays()
    op, aux = a["op"], a["aux"]
    n, npar = flat.n, flat.n_par
    base = n + npar
    x = ca.SX.sym("x", n)
    p = ca.SX.sym("p", npar)
    z = ca.vertcat(x, p)
    groups: list[Group] = []
    for d in range(len(flat.offsets) - 1):
        lo_d, hi_d = int(flat.offsets[d]), int(flat.offsets[d + 1])
        ids_d = flat.w_nodes[lo_d:hi_d]
        codes = op[ids_d]
        cut = np.flatnonzero(np.diff(codes)) + 1
        segs = np.split(np.arange(lo_d, hi_d), cut)
        rows, where = [], []  # argument rows of the whole depth, one product
        start = 0
        for seg in segs:
            ids = flat.w_nodes[seg]
            slots = {}
            for slot in (1, 2, 3):
                r = a[f"arg{slot}"][ids]
                if r[0] < 0:
                    continue
                rows.append(r)
                slots[slot] = (start, start + len(r))
                start += len(r)
            where.append(slots)
        R = np.concatenate(rows)
        vals = ca.mtimes(_dm(flat.E[R][:, :base + lo_d]), z) + ca.DM(flat.e0[R])
        parts = []
        for seg, slots in zip(segs, where):
            ids = flat.w_nodes[seg]
            code = int(op[ids[0]])
            args = {s: vals[i:j] for s, (i, j) in slots.items()}
            if code == p2c.POWC:
                w = args[1] ** ca.DM(aux[ids])
            elif code == p2c.IFELSE:
                w = ca.if_else(args[1], args[2], args[3])
            elif code in BINARY_CA:
                w = BINARY_CA[code](args[1], args[2])
            else:
                w = UNARY_BY_CODE[code](args[1])
            w = ca.densify(w)
            parts.append(w)
            groups.append(Group(int(seg[0]), int(seg[-1]) + 1, lo_d, code, ids, args, w))
        z = ca.vertcat(z, *parts)
    roots = np.asarray(tape.constraint_roots, dtype=np.int64)
    if len(roots):
        g = ca.densify(ca.mtimes(_dm(flat.E[roots]), z) + ca.DM(flat.e0[roots]))
    else:
        g = ca.SX(0, 1)
    if tape.objective_root >= 0:
        r = [tape.objective_root]
        f = tape.sense * (ca.mtimes(_dm(flat.E[r]), z) + float(flat.e0[r[0]]))
        f = ca.densify(f)
    else:
        f = ca.SX(0.0)
    return SplitSX(x=x, p=p, f=f, g=g, groups=groups, flat=flat)


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
    k = a.shape[0]
    sa = ca.SX.sym("a", k)
    if b is None:
        fn = UNARY_BY_CODE[int(code)]
        syms, vals = [sa], [a]
        phi = fn(sa)
    else:
        sb = ca.SX.sym("b", k)
        syms, vals = [sa, sb], [a, b]
        phi = BINARY_CA[int(code)](sa, sb)
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


def _ones(spa):
    """DM of ones on a sparsity (for structural products)."""
    return ca.DM(spa, 1.0)


def _product_pattern(a_dm, b_sparsity):
    """Sparsity of ``a @ b`` (structural: ``a`` holds ones, nothing cancels)."""
    return ca.mtimes(_ones(a_dm.sparsity()), _ones(b_sparsity)).sparsity()


def _affine(const_rows: sp.csr_matrix, coef_rows: sp.csr_matrix, W_blocks: list):
    """``const_rows + coef_rows @ W`` (SX), ``W`` given as row blocks
    ``(lo, hi, W[lo:hi], its sparsity)``: one multiply-accumulate per block onto the
    precomputed sparsity of the result (no sparse sums, no stacking of ``W``)."""
    c = _dm(const_rows)
    if coef_rows.nnz == 0:
        return ca.SX(c)
    coef_rows = sp.csc_matrix(coef_rows)
    parts = []
    pattern = c.sparsity()
    for lo, hi, Wb, Wb_sp in W_blocks:
        a = coef_rows[:, lo:hi]
        if a.nnz == 0:
            continue
        a = _dm(a)
        pattern = pattern.unite(_product_pattern(a, Wb_sp))
        parts.append((a, Wb))
    out = ca.SX(ca.project(c, pattern))
    for a, Wb in parts:
        out = ca.mac(a, Wb, out)
    return out


@dataclass
class _Depth:
    """What the Jacobian pass keeps of one nonlinear depth for the Hessian pass."""

    lo: int  # w[lo:hi] are the nodes of this depth
    hi: int
    D: object  # SX (hi - lo) x len(R): d w / d u for each differentiable argument row
    Aw: sp.csr_matrix  # E_w of the argument rows (columns < lo)
    U: object  # SX len(R) x n: gradients of the argument rows
    second: list  # (local node rows, argument rows s, argument rows t, SX d2 phi/du_s du_t)


def derivatives(tape: p2c.Tape, sxm: SplitSX, lam, sigma):
    """Sparse Jacobian of ``g`` and lower-triangular Lagrangian Hessian, as SX.

    ``sxm`` is the split form of the model (:func:`build_split_sx`); the Lagrangian is
    ``sigma * sxm.f + lam' sxm.g``. Returns ``(jac, hess_lower)``.

    Per depth, every differentiable argument row of its nodes is stacked into one
    matrix ``U`` (gradients of the arguments) and the local partial derivatives into
    one selection-like matrix ``D``, so that ``W_depth = D U`` and the depth's Hessian
    term is ``U' M U`` with ``M`` block diagonal (the local second derivatives times the
    node's total multiplier); products land on precomputed sparsity patterns
    (multiply-accumulate), so no sparse sums are formed.
    """
    flat = sxm.flat
    x = sxm.x
    n = x.shape[0]
    K = len(flat.w_nodes)
    a = tape.arrays()
    aux = a["aux"]
    Ex, Ew = flat.Ex, flat.Ew

    by_depth: dict = {}
    for grp in sxm.groups:
        by_depth.setdefault(grp.depth_lo, []).append(grp)
    depths: list[_Depth] = []
    W_blocks = []  # (lo, hi, W[lo:hi], sparsity): d w / d x one depth at a time
    for d in range(len(flat.offsets) - 1):
        lo, hi = int(flat.offsets[d]), int(flat.offsets[d + 1])
        rows, node, partials, second = [], [], [], []
        pos = 0
        for grp in by_depth.get(lo, []):
            slots = differentiable_slots(grp.code)
            if not slots:
                continue
            if grp.code == p2c.POWC:
                first, sec = _local(grp.code, grp.args[1], aux[grp.ids])
            elif grp.code == p2c.IFELSE:
                first, sec = _local(grp.code, grp.args[1])
            else:
                first, sec = _local(grp.code, *[grp.args[s] for s in slots], w=grp.w)
            local = np.arange(grp.lo - lo, grp.hi - lo)
            where = []
            for j, s in enumerate(slots):
                rows.append(a[f"arg{s}"][grp.ids])
                node.append(local)
                partials.append(ca.densify(first[j]))
                where.append(np.arange(pos, pos + len(local)))
                pos += len(local)
            for (s, t), d2 in sec.items():
                second.append((local, where[s], where[t], ca.densify(d2)))
        k = hi - lo
        if not rows:
            Wd = ca.SX(k, n)
        else:
            R = np.concatenate(rows)
            Aw = Ew[R][:, :lo]
            U = _affine(Ex[R], Aw, W_blocks)
            D = ca.SX(ca.Sparsity(k, len(R), list(range(len(R) + 1)),
                                  np.concatenate(node).tolist()), ca.vertcat(*partials))
            Wd = ca.mtimes(D, U)
            depths.append(_Depth(lo, hi, D, Aw, U, second))
        W_blocks.append((lo, hi, Wd, Wd.sparsity()))

    roots = np.asarray(tape.constraint_roots, dtype=np.int64)
    Ew_g = Ew[roots]
    Ew_g.eliminate_zeros()
    if len(roots):
        Ex_g = Ex[roots]
        Ex_g.eliminate_zeros()
        jac = _affine(Ex_g, Ew_g, W_blocks)
    else:
        jac = ca.SX(0, n)

    # --- total multipliers of the nonlinear values, top depth first (module notes)
    acc = ca.SX(K, 1)
    if Ew_g.nnz:
        acc = acc + ca.mtimes(_dm(Ew_g.T), lam)
    if tape.objective_root >= 0:
        Ew_f = Ew[[tape.objective_root]]
        Ew_f.eliminate_zeros()
        if Ew_f.nnz:
            acc = acc + sigma * tape.sense * _dm(Ew_f.T)
    terms = []  # (U, M) of each depth
    for dep in reversed(depths):
        bar = acc[dep.lo:dep.hi]
        if dep.Aw.nnz:
            contrib = ca.mtimes(_dm(dep.Aw.T), ca.mtimes(dep.D.T, bar))  # length dep.lo
            acc = acc + ca.vertcat(contrib, ca.SX(K - dep.lo, 1))
        if not dep.second:
            continue
        r_idx, c_idx, vals = [], [], []
        for local, ws, wt, d2 in dep.second:
            coef = bar[local.tolist()] * d2
            r_idx.append(ws)
            c_idx.append(wt)
            vals.append(coef)
            if ws is not wt and not np.array_equal(ws, wt):
                r_idx.append(wt)
                c_idx.append(ws)
                vals.append(coef)
        rr, cc = np.concatenate(r_idx), np.concatenate(c_idx)
        nR = dep.U.shape[0]
        order = np.lexsort((rr, cc))  # column-major nonzero order
        colind = np.searchsorted(cc[order], np.arange(nR + 1))
        M = ca.SX(ca.Sparsity(nR, nR, colind.tolist(), rr[order].tolist()),
                  ca.vertcat(*vals)[order.tolist()])
        terms.append((dep.U, M))
    if not terms:
        return jac, ca.SX(n, n)
    MU = [ca.mtimes(M, U) for U, M in terms]
    pattern = ca.Sparsity(n, n)
    for (U, _), mu in zip(terms, MU):
        pattern = pattern.unite(_product_pattern(U.T, mu.sparsity()))
    lower = ca.tril(_ones(pattern)).sparsity()
    H = ca.SX.zeros(lower)
    for (U, _), mu in zip(terms, MU):
        H = ca.mac(U.T, mu, H)
    return jac, H
