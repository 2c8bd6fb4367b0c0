"""HALS with dense untuned and sparse tuned components (docs/assembly.md,
"Cost").

The factors are stored dense, A (m x k) and B (k x n), with the first
``n_u`` components dense (the untuned interneurons: few, with broad pools)
and the other k - n_u sparse (the tuned ones: many, each with a pool of a
few units). The updates are those of :func:`eidecomp.assemble._nmf.sweep`
in the same order, one column of A, then one row of B, each the exact
minimiser of a convex one-dimensional problem (Cichocki & Phan 2009;
Gillis 2014, section 3.1.3), so the iterates agree with it to rounding.
What changes is the cost: every product with a tuned component goes
through scipy.sparse (M may itself be a scipy.sparse matrix), a column
update touches only the components that overlap it (the nonzeros of the
Gram matrix), and a tuned column is computed only on the rows where it can
be nonzero (its mask, or the rows where (M B^T)[:, j] exceeds the l1
weight), so a sweep costs O(m n n_u + nnz) plus the Python loop over the
k components, instead of O(m n k + m k^2).
"""

import numpy as np
from scipy import sparse

from ._nmf import _DEAD_RTOL, sweep

SPARSE_MIN_UNITS = 500
"""Below this many units a sweep takes the dense path (_nmf.sweep), the same
exact updates in index order: scipy.sparse's fixed cost per call (tens of
microseconds) is more than the dense products there."""

SWEEP_COST_NS = {"multiply-add": 0.15, "pair": 50.0, "class": 100_000.0,
                 "untuned": 60_000.0, "entry": 0.5}
"""The assembler's cost model of one sweep, in nanoseconds per unit of
work, measured on the project's 2-core machine (OPENBLAS_NUM_THREADS=2)
from sweeps timed on both paths at the same factors (planted sheets of 800
and 2,000 units, the lateral weights of a 512-atom sparse-coding
dictionary; 978 sweeps, the path with the smaller sum the faster one in
every case): a multiply-add of the dense sweep's BLAS products (m n k of
them); an (entry, overlapping component) pair of the sparse path's tuned
updates; a colour class (its numpy calls); an untuned component of the
sparse path (its scipy.sparse products); a (row, nonzero) of the products
of M with the sparse factors. Only the comparison of the two sums is used,
and it is lopsided where it matters (planted sheets: the sparse path 3x to
15x cheaper; dense restarted pools: the dense one 2x to 30x cheaper), so
the constants need only their order of magnitude on another machine."""

__all__ = ["SPARSE_MIN_UNITS", "SWEEP_COST_NS", "colouring", "dense_pays",
           "hals_mixed", "objective_mixed", "paths", "sweep_mixed",
           "tuned_parts", "update_order"]



def _is_sparse(M):
    return sparse.issparse(M)


def _ragged(starts, lens):
    """The concatenated ranges [s, s + l) for s, l in zip(starts, lens):
    positions into the index and data arrays of a compressed matrix."""
    lens = np.asarray(lens, dtype=np.int64)
    total = int(lens.sum())
    if total == 0:
        return np.zeros(0, dtype=np.int64)
    first = np.concatenate([[0], np.cumsum(lens)[:-1]])
    return np.repeat(np.asarray(starts, dtype=np.int64) - first, lens) + \
        np.arange(total)


def colouring(G_tt, live, previous=None):
    """Colours of the tuned components such that no two components of one
    colour overlap (G_tt[j, l] == 0 between them; G_tt is the tuned block
    of the Gram matrix, CSR or CSC, symmetric; its diagonal is ignored), by
    greedy colouring in index order; -1 for components not ``live``.

    Components of one colour are decoupled in the objective, so updating
    them at once is the same as updating them one after the other.
    ``previous`` is kept when it is still a valid colouring with no more
    colours than greedy colouring promises (the largest degree plus one).

    >>> G = sparse.csr_matrix(np.array([[0, 1, 0], [1, 0, 1], [0, 1, 0.]]))
    >>> colouring(G, np.ones(3, bool)).tolist()
    [0, 1, 0]
    """
    G = sparse.csr_matrix(G_tt)
    if previous is not None and _still_valid(G, live, previous):
        colour = previous.copy()
        colour[~live] = -1             # a component dead now is not updated
        return colour
    ptr, idx = G.indptr, G.indices
    colour = np.full(G.shape[0], -1, dtype=np.int64)
    for j in np.flatnonzero(live):
        used = colour[idx[ptr[j]:ptr[j + 1]]]
        used = used[used >= 0]
        if used.size == 0:
            colour[j] = 0
            continue
        taken = np.zeros(int(used.max()) + 2, dtype=bool)
        taken[used] = True
        colour[j] = int(np.argmin(taken))
    return colour


def _still_valid(G, live, colour):
    if colour.shape[0] != G.shape[0] or (colour[live] < 0).any():
        return False
    degree = np.diff(G.indptr) - (G.diagonal() != 0)   # without itself
    if colour.max(initial=-1) > degree.max(initial=0):
        return False                    # more colours than greedy would use
    rows = np.repeat(np.arange(G.shape[0]), np.diff(G.indptr))
    cols = G.indices
    both = live[rows] & live[cols] & (rows != cols)
    return not (colour[rows[both]] == colour[cols[both]]).any()


def _grams(Y, Y_sp, n_u):
    """Y Y^T in pieces, Y (k x n) with tuned rows Y_sp (CSR): the untuned
    block (dense), untuned-tuned (dense n_u x k_t), the tuned block (CSC)
    and the diagonal of all."""
    Y_u = Y[:n_u]
    G_uu = Y_u @ Y_u.T
    G_ut = np.asarray(Y_sp @ Y_u.T).T
    G_tt = sparse.csc_matrix(Y_sp @ Y_sp.T)
    return G_uu, G_ut, G_tt, np.concatenate([G_uu.diagonal(),
                                             G_tt.diagonal()])


def _rescaled(grams, f):
    """The pieces of Y Y^T after Y's rows are divided by f."""
    G_uu, G_ut, G_tt, diag = grams
    n_u = G_uu.shape[0]
    fu, ft = f[:n_u], f[n_u:]
    G_tt = G_tt.tocoo()
    G_tt = sparse.csc_matrix((G_tt.data / (ft[G_tt.row] * ft[G_tt.col]),
                              (G_tt.row, G_tt.col)), shape=G_tt.shape)
    return (G_uu / np.outer(fu, fu), G_ut / np.outer(fu, ft), G_tt,
            diag / f ** 2)


def _inner(g1, g2):
    """<G1, G2> of two Gram matrices given in pieces."""
    return (float(np.vdot(g1[0], g2[0])) + 2 * float(np.vdot(g1[1], g2[1]))
            + float(g1[2].multiply(g2[2]).sum()))


def _entries_of(Xs, n_rows):
    """(rows, cols, values) of a CSC matrix, sorted by column."""
    cols = np.repeat(np.arange(Xs.shape[1]), np.diff(Xs.indptr))
    return Xs.indices, cols, Xs.data


def _omega(M, Y_sp, l1, mask_t):
    """Where the tuned columns of X can be nonzero, and (M Y^T) there: the
    mask's entries, or without one the entries where M Y^T exceeds l1 (the
    update subtracts nonnegative terms from it, so elsewhere it is zero).
    Returns rows, cols (sorted by column) and the values of M Y^T."""
    m = M.shape[0]
    if _is_sparse(M):
        P = sparse.csc_matrix(M @ Y_sp.T)
        P.sum_duplicates()
        if mask_t is None:
            rows, cols, vals = _entries_of(P, m)
            keep = vals > l1
            return rows[keep], cols[keep], vals[keep]
        cols, rows = np.nonzero(mask_t.T)
        vals = np.asarray(P.tocsr()[rows, cols]).ravel() if rows.size \
            else np.zeros(0)
        return rows, cols, vals
    if mask_t is None:
        P = np.asarray(Y_sp @ M.T)           # k_t x m: (M Y^T)^T
        cols, rows = np.nonzero(P > l1)
        return rows, cols, P[cols, rows]
    cols, rows = np.nonzero(mask_t.T)
    # the sampled product, from the (entry, nonzero of Y) pairs: no more
    # than Y_sp.nnz * m of them
    lens = np.diff(Y_sp.indptr)[cols]
    pos = _ragged(Y_sp.indptr[cols], lens)
    owner = np.repeat(np.arange(rows.size), lens)
    vals = np.bincount(owner, weights=M[rows[owner], Y_sp.indices[pos]]
                       * Y_sp.data[pos], minlength=rows.size)
    return rows, cols, vals


def _update_untuned(X, P_u, G_uu, G_ut, X_sp, diag, dead, mask_u, n_u):
    """The untuned columns of X one at a time (each couples with all)."""
    for j in range(n_u):
        if dead[j]:
            continue
        d = diag[j]
        col = (P_u[:, j] - X[:, :n_u] @ G_uu[:, j] - X_sp @ G_ut[j]
               + X[:, j] * d) / d
        np.maximum(col, 0.0, out=col)
        if mask_u is not None:
            col *= mask_u[:, j]
        X[:, j] = col


def _class_sum(X_t, rows, cols, G_tt):
    """sum_l X_t[i, l] G_tt[l, j] at the entries (i, j) of one class, from
    the (entry, overlapping component) pairs: no more than the dense product
    X_t G_tt[:, class] would cost, and only at the entries needed."""
    lens = np.diff(G_tt.indptr)[cols]
    if not lens.any():
        return np.zeros(rows.size)
    pos = _ragged(G_tt.indptr[cols], lens)
    owner = np.repeat(np.arange(rows.size), lens)
    return np.bincount(owner, weights=X_t[rows[owner], G_tt.indices[pos]]
                       * G_tt.data[pos], minlength=rows.size)


def _half_sweep(X, M, Y, Y_sp, X_sp, n_u, l1, mask, cache, key, grams=None):
    """Every column of X (A, or B^T) once, minimising 0.5 ||M - X Y||^2 +
    l1 (sum of X's tuned columns): the untuned columns one at a time, then
    the tuned ones a colour class at a time (a class holds components that
    do not overlap, so the block update is exact). X_sp: X's tuned columns
    (CSC) before the sweep; ``grams``: Y Y^T in pieces when the caller has
    it. Returns X's tuned columns after it (CSC), and <M Y^T, X> after it
    with the Gram pieces used (for the loss)."""
    m, k = X.shape
    k_t = k - n_u
    grams = _grams(Y, Y_sp, n_u) if grams is None else grams
    G_uu, G_ut, G_tt, diag = grams
    dead = (diag <= _DEAD_RTOL * diag.max(initial=0.0)) | (diag == 0)
    mask_u = None if mask is None else mask[:, :n_u]
    cross = 0.0
    if n_u:
        P_u = np.asarray(M @ Y[:n_u].T)
        _update_untuned(X, P_u, G_uu, G_ut, X_sp, diag, dead, mask_u, n_u)
        cross = float(np.vdot(P_u, X[:, :n_u]))
    if k_t == 0:
        return sparse.csc_matrix((m, 0)), cross, grams
    live = ~dead[n_u:]
    colour = colouring(G_tt, live, cache.get(key))
    cache[key] = colour
    rows, cols, P_om = _omega(M, Y_sp, l1, None if mask is None
                              else mask[:, n_u:])
    keep = live[cols]
    rows, cols, P_om = rows[keep], cols[keep], P_om[keep]
    base = P_om - l1 - np.einsum("eu,ue->e", X[rows, :n_u], G_ut[:, cols])
    order = np.argsort(colour[cols], kind="stable")
    rows, cols, base, P_om = rows[order], cols[order], base[order], P_om[order]
    bounds = np.searchsorted(colour[cols], np.arange(colour.max() + 2))
    o_rows, o_cols, _ = _entries_of(X_sp, m)
    X_t = X[:, n_u:]
    d_t = diag[n_u:]
    values = np.empty(rows.size)
    for c in range(colour.max() + 1):
        lo, hi = bounds[c], bounds[c + 1]
        r, j = rows[lo:hi], cols[lo:hi]
        val = (base[lo:hi] + X_t[r, j] * d_t[j]
               - _class_sum(X_t, r, j, G_tt))
        np.maximum(val, 0.0, out=val)
        val /= d_t[j]
        old = colour[o_cols] == c
        X_t[o_rows[old], o_cols[old]] = 0.0
        X_t[r, j] = val
        values[lo:hi] = val
    cross += float(P_om @ values)
    kept = ~live[o_cols]                 # dead components keep their values
    r_all = np.concatenate([rows, o_rows[kept]])
    c_all = np.concatenate([cols, o_cols[kept]])
    v_all = np.concatenate([values, X_t[o_rows[kept], o_cols[kept]]])
    if kept.any():                       # their share of <M Y^T, X>
        dead_t = np.flatnonzero(~live)
        P_dead = np.asarray(M @ Y_sp[dead_t].T.toarray())
        cross += float(np.vdot(P_dead, X_t[:, dead_t]))
    pos = v_all > 0
    return (sparse.csc_matrix((v_all[pos], (r_all[pos], c_all[pos])),
                              shape=(m, k_t)), cross, grams)


def tuned_parts(A, B, n_u):
    """The tuned columns of A (CSC) and rows of B (CSR)."""
    return sparse.csc_matrix(A[:, n_u:]), sparse.csr_matrix(B[n_u:])


def sweep_mixed(M, A, B, n_u, *, l1=0.0, mask_a=None, mask_b=None, B_sp=None,
                A_sp=None, cache=None, by_cost=False):
    """One HALS sweep in place over dense untuned (first ``n_u``) and sparse
    tuned components, minimising 0.5 ||M - A B||_F^2 + l1 (sum of the tuned
    factors): every column of A, then every row of B, each the exact
    minimiser of its convex problem given the others.

    The untuned components are updated one at a time, in order; the tuned
    ones a colour class at a time (:func:`colouring`: no two components of a
    class overlap, so the block is the same as one at a time, in the order
    :func:`update_order` gives for ``cache["a"]`` and ``cache["b"]``, the
    colourings used). ``A_sp``, ``B_sp``
    are the tuned parts when the caller has them (the previous sweep returns
    them); ``cache`` (a dict) keeps the colourings from sweep to sweep.
    Below SPARSE_MIN_UNITS units, and with ``by_cost`` wherever
    :func:`dense_pays`, the sweep is the dense one (:func:`_nmf.sweep`):
    the same exact updates, the tuned components in index order instead
    of class order (so the iterates differ; not with an l1 weight and
    untuned components: it would weigh them too).
    Returns the tuned parts (A_sp, B_sp) after the sweep.

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> A0 = rng.random((8, 3)) * (rng.random((8, 3)) < 0.5)
    >>> B0 = rng.random((3, 8)) * (rng.random((3, 8)) < 0.5)
    >>> M = A0 @ B0
    >>> A, B = A0 + 0.1, B0 + 0.1
    >>> before = np.linalg.norm(M - A @ B)
    >>> _ = sweep_mixed(M, A, B, 1)
    >>> bool(np.linalg.norm(M - A @ B) <= before)
    True
    """
    if A.shape[1] == 0:
        return tuned_parts(A, B, n_u)
    cache = {} if cache is None else cache
    if not (n_u and l1) and (
            max(A.shape[0], B.shape[1]) < SPARSE_MIN_UNITS
            or (by_cost and dense_pays(A, B, n_u, (A_sp, B_sp)))):
        # the dense sweep is the same computation at less overhead
        cache["loss"] = sweep(M.toarray() if _is_sparse(M) else M, A, B,
                              l1_a=l1, l1_b=l1, mask_a=mask_a, mask_b=mask_b)
        cache.pop("a", None), cache.pop("b", None)
        return tuned_parts(A, B, n_u)
    if B_sp is None:
        B_sp = sparse.csr_matrix(B[n_u:])
    if A_sp is None:
        A_sp = sparse.csc_matrix(A[:, n_u:])
    known = cache.get("grams_b")
    grams_b = known[1] if known is not None and known[0] is B_sp else None
    A_sp, _, _ = _half_sweep(A, M, B, B_sp, A_sp, n_u, l1, mask_a, cache, "a",
                             grams_b)
    Bt_sp, cross, grams_a = _half_sweep(
        B.T, M.T, A.T, A_sp.T.tocsr(), B_sp.T.tocsc(), n_u, l1,
        None if mask_b is None else mask_b.T, cache, "b")
    B_sp = Bt_sp.T.tocsr()
    grams_b = _grams(B, B_sp, n_u)
    # 0.5 ||M - A B||^2 = 0.5 (||M||^2 - 2 <M^T A, B^T> + <A^T A, B B^T>)
    m2 = cache.get("m2")               # ||M||^2, when the caller keeps M
    if m2 is None:
        m2 = float(M.multiply(M).sum() if _is_sparse(M) else np.vdot(M, M))
    cache["loss"] = 0.5 * max(m2 - 2 * cross + _inner(grams_a, grams_b), 0.0)
    f = _balance(A, B, n_u, l1, (A_sp, B_sp))
    cache["grams_b"] = (B_sp, _rescaled(grams_b, f))
    return A_sp, B_sp


def dense_pays(A, B, n_u, parts=(None, None)):
    """Whether a dense sweep over A (m x k), B (k x n) costs less than the
    sparse path by :data:`SWEEP_COST_NS`: m n k multiply-adds against the
    untuned products, the (entry, overlapping component) pairs of the
    tuned updates, a bound on the colour classes (the largest overlap
    degree, itself included) and the products with the sparse factors.
    ``parts``: the tuned parts (A_sp, B_sp) when the caller has them.

    >>> rng = np.random.default_rng(0)
    >>> A = rng.random((600, 150)); B = rng.random((150, 600))
    >>> dense_pays(A, B, 0)                       # every pool is every unit
    True
    >>> A[:, 1:] *= np.arange(600)[:, None] // 4 == np.arange(149)  # 4 each
    >>> B[1:] *= np.arange(600)[None, :] // 4 == np.arange(149)[:, None]
    >>> dense_pays(A, B, 1)
    False
    """
    m, k = A.shape
    n = B.shape[1]
    if k == n_u:
        return True                      # no tuned part: the same products
    A_sp = sparse.csc_matrix(A[:, n_u:]) if parts[0] is None else parts[0]
    B_sp = sparse.csr_matrix(B[n_u:]) if parts[1] is None else parts[1]
    pattern = [X.astype(bool).astype(np.float64) for X in (A_sp, B_sp)]
    deg_b = np.diff(sparse.csr_matrix(pattern[1] @ pattern[1].T).indptr)
    deg_a = np.diff(sparse.csr_matrix(pattern[0].T @ pattern[0]).indptr)
    pairs = float(np.diff(A_sp.indptr) @ deg_b
                  + np.diff(B_sp.indptr) @ deg_a)
    ns = SWEEP_COST_NS
    dense = ns["multiply-add"] * m * n * k
    sparse_cost = (ns["multiply-add"] * m * n * n_u + ns["untuned"] * n_u
                   + ns["pair"] * pairs
                   + ns["class"] * (deg_a.max(initial=0)
                                    + deg_b.max(initial=0))
                   + ns["entry"] * (m * B_sp.nnz + n * A_sp.nnz))
    return bool(dense < sparse_cost)


def update_order(colour):
    """The tuned components in the order a sweep updates them (class by
    class, ascending within a class), live ones only."""
    live = np.flatnonzero(colour >= 0)
    return live[np.argsort(colour[live], kind="stable")]


def _balance(A, B, n_u, l1, parts):
    """Rescale each pair (column of A, row of B), product unchanged: equal
    norms for unpenalised pairs, the l1-optimal scale (equal sums) for the
    penalised tuned ones, so the objective can only fall. The tuned pairs
    are read and scaled on their nonzeros (``parts``: A's tuned columns as
    CSC, B's tuned rows as CSR, scaled too). Returns the factors applied to
    A's columns."""
    A_sp, B_sp = parts
    a_cols = np.repeat(np.arange(A_sp.shape[1]), np.diff(A_sp.indptr))
    b_rows = np.repeat(np.arange(B_sp.shape[0]), np.diff(B_sp.indptr))
    if l1 > 0:
        na_t = np.bincount(a_cols, A_sp.data, A_sp.shape[1])
        nb_t = np.bincount(b_rows, B_sp.data, B_sp.shape[0])
    else:
        na_t = np.sqrt(np.bincount(a_cols, A_sp.data ** 2, A_sp.shape[1]))
        nb_t = np.sqrt(np.bincount(b_rows, B_sp.data ** 2, B_sp.shape[0]))
    na = np.concatenate([np.linalg.norm(A[:, :n_u], axis=0), na_t])
    nb = np.concatenate([np.linalg.norm(B[:n_u], axis=1), nb_t])
    ok = (na > 0) & (nb > 0)
    f = np.ones_like(na)
    f[ok] = np.sqrt(nb[ok] / na[ok])
    A[:, :n_u] *= f[:n_u]
    B[:n_u] /= f[:n_u, None]
    ft = f[n_u:]
    A[A_sp.indices, n_u + a_cols] *= ft[a_cols]
    B[n_u + b_rows, B_sp.indices] /= ft[b_rows]
    A_sp.data *= ft[a_cols]
    B_sp.data /= ft[b_rows]
    return f


def paths(A, B, n_u, parts=None, out=None):
    """A B as a dense array: the untuned part by BLAS, the tuned part as a
    scipy.sparse product added in place, or all of it by BLAS when the
    tuned parts are dense enough that it costs less (SWEEP_COST_NS: a
    multiply-add of BLAS against a product of two nonzeros); ``parts``: the
    tuned parts, when the caller has them; ``out``: an array to write
    into."""
    A_sp, B_sp = tuned_parts(A, B, n_u) if parts is None else parts
    if out is None:
        out = np.empty((A.shape[0], B.shape[1]))
    ns = SWEEP_COST_NS
    products = float(np.diff(A_sp.indptr) @ np.diff(B_sp.indptr))
    if ns["multiply-add"] * A.shape[0] * B.shape[1] * A_sp.shape[1] \
            < ns["pair"] * products:     # dense tuned parts: one BLAS call
        return np.matmul(A, B, out=out)
    P = np.matmul(A[:, :n_u], B[:n_u], out=out)
    T = (A_sp @ B_sp).tocoo()
    P[T.row, T.col] += T.data
    return P


def objective_mixed(M, A, B, n_u, l1=0.0, m_norm2=None, parts=None):
    """0.5 ||M - A B||_F^2 + l1 (sum of the tuned factors), without forming
    A B (M dense or sparse): ||M||^2 - 2 <A^T M, B> + <A^T A, B B^T>.
    ``parts`` are the tuned parts (A_sp, B_sp) when the caller has them."""
    A_sp, B_sp = tuned_parts(A, B, n_u) if parts is None else parts
    tuned = l1 * (A_sp.sum() + B_sp.sum())
    if not _is_sparse(M):  # the same identity, dense: no N x N array
        m2 = float(np.vdot(M, M)) if m_norm2 is None else m_norm2
        cross = float(np.vdot(M @ B.T, A))
        gram = float(np.vdot(A.T @ A, B @ B.T))
        return 0.5 * max(m2 - 2 * cross + gram, 0.0) + tuned
    m2 = float(M.multiply(M).sum()) if m_norm2 is None else m_norm2
    AtM_u = np.asarray(M.T @ A[:, :n_u]).T
    cross = float(np.vdot(AtM_u, B[:n_u])
                  + sparse.csr_matrix(A_sp.T @ M).multiply(B_sp).sum())
    gram = _inner(_grams(A.T, A_sp.T.tocsr(), n_u), _grams(B, B_sp, n_u))
    return 0.5 * max(m2 - 2 * cross + gram, 0.0) + tuned


def hals_mixed(M, A, B, n_u, *, l1=0.0, mask_a=None, mask_b=None,
               max_iter=500, tol=1e-7, scale=None, by_cost=False):
    """:func:`eidecomp.assemble._nmf.hals` with dense untuned and sparse
    tuned components (l1 on the tuned ones only); M dense or scipy.sparse.
    It stops when a sweep lowers the objective by less than ``tol`` times
    ``scale`` (by default the objective at the start); ``by_cost`` as in
    :func:`sweep_mixed`.
    Returns A, B (copies) and the same ``info``."""
    A = np.array(A, dtype=float, copy=True, order="F")  # columns contiguous
    B = np.array(B, dtype=float, copy=True)
    m2 = float(M.multiply(M).sum() if _is_sparse(M) else np.vdot(M, M))
    parts = tuned_parts(A, B, n_u)
    history = [objective_mixed(M, A, B, n_u, l1, m2, parts)]
    converged = A.shape[1] == 0 or history[0] == 0
    cache = {"m2": m2}
    while not converged and len(history) <= max_iter:
        parts = sweep_mixed(M, A, B, n_u, l1=l1, mask_a=mask_a, mask_b=mask_b,
                            A_sp=parts[0], B_sp=parts[1], cache=cache,
                            by_cost=by_cost)
        loss = cache.pop("loss", None)
        history.append(objective_mixed(M, A, B, n_u, l1, m2, parts)
                       if loss is None
                       else loss + l1 * (parts[0].sum() + parts[1].sum()))
        converged = history[-2] - history[-1] <= tol * (
            history[0] if scale is None else scale)
    return A, B, {"n_iter": len(history) - 1, "converged": converged,
                  "history": history}
