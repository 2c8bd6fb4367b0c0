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
"""Below this many units a sweep takes the dense path (_nmf.sweep), whose
iterates are the same to rounding: scipy.sparse's fixed cost per call
(tens of microseconds) is more than the dense products there."""

__all__ = ["SPARSE_MIN_UNITS", "hals_split", "objective_split", "paths",
           "sweep_split", "tuned_parts"]



def _is_sparse(M):
    return sparse.issparse(M)


def _gram(X_dense, X_sp, n_u, rows):
    """X X^T (rows=True, X = B) or X^T X (X = A), dense k x k, from the
    dense untuned part and the sparse tuned part."""
    if rows:
        D, S = X_dense, X_sp
        dd, sd, ss = D @ D.T, np.asarray(S @ D.T), (S @ S.T).toarray()
    else:
        D, S = X_dense, X_sp
        dd, sd, ss = D.T @ D, np.asarray(S.T @ D), (S.T @ S).toarray()
    k = n_u + ss.shape[0]
    G = np.empty((k, k))
    G[:n_u, :n_u], G[n_u:, :n_u], G[:n_u, n_u:], G[n_u:, n_u:] = dd, sd, sd.T, ss
    return G


def _times_bt(M, B, B_sp, n_u):
    """M B^T as (dense untuned part, tuned part): the tuned part is dense
    for a dense M and CSC for a sparse one."""
    if _is_sparse(M):
        return np.asarray(M @ B[:n_u].T), sparse.csc_matrix(M @ B_sp.T)
    return M @ B[:n_u].T, np.asarray((B_sp @ M.T).T)


def _at_times(A, A_sp, M, n_u):
    """A^T M as (dense untuned part, tuned part: dense, or CSR for a sparse
    M)."""
    if _is_sparse(M):
        return np.asarray((M.T @ A[:, :n_u]).T), sparse.csr_matrix(A_sp.T @ M)
    return A[:, :n_u].T @ M, np.asarray(A_sp.T @ M)


def _columns(G):
    """Per column j of the symmetric Gram matrix G: its nonzero rows and
    values (the components that overlap j), from one CSC conversion."""
    G_sp = sparse.csc_matrix(G)
    ptr, idx, val = G_sp.indptr, G_sp.indices, G_sp.data
    return [(idx[ptr[j]:ptr[j + 1]], val[ptr[j]:ptr[j + 1]])
            for j in range(G.shape[0])]


def _tuned_base(part, j, l1, mask, along_rows):
    """(indices, values of the product) where tuned component j (column or
    row j of ``part``) can be nonzero: its ``mask`` (a boolean vector), or
    without one the entries of the product above l1 (the update subtracts
    nonnegative terms from it, so elsewhere it is zero)."""
    if mask is not None:
        idx = np.flatnonzero(mask)
        if sparse.issparse(part):
            vec = (part[:, [j]] if along_rows else part[[j]]).toarray().ravel()
        else:
            vec = part[:, j] if along_rows else part[j]
        return idx, vec[idx]
    if sparse.issparse(part):
        lo, hi = part.indptr[j], part.indptr[j + 1]
        idx, val = part.indices[lo:hi], part.data[lo:hi]
        return idx[val > l1], val[val > l1]
    vec = part[:, j] if along_rows else part[j]
    idx = np.flatnonzero(vec > l1)
    return idx, vec[idx]


def _csc_from_columns(parts, n_rows):
    """A CSC matrix from per-column (row index, value) pairs, in O(nnz)."""
    sizes = np.fromiter((idx.size for idx, _ in parts), dtype=np.int64,
                        count=len(parts))
    ptr = np.concatenate([[0], np.cumsum(sizes)])
    idx = (np.concatenate([i for i, _ in parts]) if parts
           else np.zeros(0, dtype=np.int64))
    val = np.concatenate([v for _, v in parts]) if parts else np.zeros(0)
    return sparse.csc_matrix((val, idx, ptr), shape=(n_rows, len(parts)))


def _update_a(A, MBt_u, MBt_t, G, n_u, l1, mask_a):
    """Every column of A in turn, each the exact minimiser of its problem
    (MBt_u, MBt_t: M B^T's untuned and tuned columns, G = B B^T). Returns
    the tuned columns as a CSC matrix."""
    dead = _DEAD_RTOL * G.diagonal().max()
    parts = []
    for j, (nz, g) in enumerate(_columns(G)):
        d = G[j, j]
        if d <= dead or d == 0:
            if j >= n_u:
                keep = np.flatnonzero(A[:, j])
                parts.append((keep, A[keep, j]))
            continue
        if j < n_u:
            col = (MBt_u[:, j] - A[:, nz] @ g + A[:, j] * d) / d
            np.maximum(col, 0.0, out=col)
            if mask_a is not None:
                col *= mask_a[:, j]
            A[:, j] = col
            continue
        rows, base = _tuned_base(MBt_t, j - n_u, l1,
                                 None if mask_a is None else mask_a[:, j], True)
        val = np.maximum(base - A[rows[:, None], nz] @ g + A[rows, j] * d - l1,
                         0.0) / d
        A[:, j] = 0.0
        A[rows, j] = val
        pos = val > 0
        parts.append((rows[pos], val[pos]))
    return _csc_from_columns(parts, A.shape[0])


def _update_b(B, AtM_u, AtM_t, G, n_u, l1, mask_b):
    """Every row of B in turn: the columns of B^T by :func:`_update_a` (G is
    symmetric, B^T's columns are B's rows). Returns the tuned rows as CSR."""
    B_sp = _update_a(B.T, AtM_u.T, AtM_t.T, G, n_u, l1,
                     None if mask_b is None else mask_b.T)
    return B_sp.T.tocsr()


def tuned_parts(A, B, n_u):
    """The tuned columns of A (CSC) and rows of B (CSR)."""
    return sparse.csc_matrix(A[:, n_u:]), sparse.csr_matrix(B[n_u:])


def sweep_split(M, A, B, n_u, *, l1=0.0, mask_a=None, mask_b=None, B_sp=None):
    """One HALS sweep in place over dense untuned (first ``n_u``) and sparse
    tuned components, minimising 0.5 ||M - A B||_F^2 + l1 (sum of the tuned
    factors); the same updates as :func:`eidecomp.assemble._nmf.sweep`.

    ``B_sp`` is B's tuned rows as CSR when the caller has it (the previous
    sweep returns it). Returns the tuned parts (A_sp, B_sp) after the sweep.

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> A0 = rng.random((8, 3)) * (rng.random((8, 3)) < 0.5)
    >>> B0 = rng.random((3, 8)) * (rng.random((3, 8)) < 0.5)
    >>> M = A0 @ B0
    >>> A, B = A0 + 0.1, B0 + 0.1
    >>> before = np.linalg.norm(M - A @ B)
    >>> _ = sweep_split(M, A, B, 1)
    >>> bool(np.linalg.norm(M - A @ B) <= before)
    True
    """
    if A.shape[1] == 0:
        return tuned_parts(A, B, n_u)
    if max(A.shape[0], B.shape[1]) < SPARSE_MIN_UNITS and not (n_u and l1):
        # small: the dense sweep is the same computation at less overhead
        sweep(M.toarray() if _is_sparse(M) else M, A, B, l1_a=l1, l1_b=l1,
              mask_a=mask_a, mask_b=mask_b)
        return tuned_parts(A, B, n_u)
    if B_sp is None:
        B_sp = sparse.csr_matrix(B[n_u:])
    MBt_u, MBt_t = _times_bt(M, B, B_sp, n_u)
    A_sp = _update_a(A, MBt_u, MBt_t, _gram(B[:n_u], B_sp, n_u, True), n_u, l1,
                     mask_a)
    AtM_u, AtM_t = _at_times(A, A_sp, M, n_u)
    B_sp = _update_b(B, AtM_u, AtM_t, _gram(A[:, :n_u], A_sp, n_u, False), n_u,
                     l1, mask_b)
    f = _balance(A, B, n_u, l1)[n_u:]
    A_sp.data *= np.repeat(f, np.diff(A_sp.indptr))
    B_sp.data /= np.repeat(f, np.diff(B_sp.indptr))
    return A_sp, B_sp


def _balance(A, B, n_u, l1):
    """Rescale each pair (column of A, row of B), product unchanged: equal
    norms for unpenalised pairs, the l1-optimal scale (equal sums) for the
    penalised tuned ones, so the objective can only fall. Returns the
    factors applied to A's columns."""
    na, nb = np.linalg.norm(A, axis=0), np.linalg.norm(B, axis=1)
    if l1 > 0:
        na[n_u:], nb[n_u:] = A[:, n_u:].sum(axis=0), B[n_u:].sum(axis=1)
    ok = (na > 0) & (nb > 0)
    f = np.ones_like(na)
    f[ok] = np.sqrt(nb[ok] / na[ok])
    A *= f
    B /= f[:, None]
    return f


def paths(A, B, n_u, parts=None):
    """A B as a dense array: the untuned part by BLAS, the tuned part as a
    scipy.sparse product added in place (``parts``: the tuned parts, when
    the caller has them)."""
    A_sp, B_sp = tuned_parts(A, B, n_u) if parts is None else parts
    P = A[:, :n_u] @ B[:n_u]
    T = (A_sp @ B_sp).tocoo()
    P[T.row, T.col] += T.data
    return P


def objective_split(M, A, B, n_u, l1=0.0, m_norm2=None, parts=None):
    """0.5 ||M - A B||_F^2 + l1 (sum of the tuned factors), without forming
    A B when M is sparse: ||M||^2 - 2 <A^T M, B> + <A^T A, B B^T>.
    ``parts`` are the tuned parts (A_sp, B_sp) when the caller has them."""
    A_sp, B_sp = tuned_parts(A, B, n_u) if parts is None else parts
    tuned = l1 * (A_sp.sum() + B_sp.sum())
    if not _is_sparse(M):
        R = M - paths(A, B, n_u, parts=(A_sp, B_sp))
        return 0.5 * float(np.vdot(R, R)) + tuned
    m2 = float(M.multiply(M).sum()) if m_norm2 is None else m_norm2
    AtM_u, AtM_t = _at_times(A, A_sp, M, n_u)
    cross = float(np.vdot(AtM_u, B[:n_u]) + AtM_t.multiply(B_sp).sum())
    gram = float(np.vdot(_gram(A[:, :n_u], A_sp, n_u, False),
                         _gram(B[:n_u], B_sp, n_u, True)))
    return 0.5 * max(m2 - 2 * cross + gram, 0.0) + tuned


def hals_split(M, A, B, n_u, *, l1=0.0, mask_a=None, mask_b=None,
               max_iter=500, tol=1e-7):
    """:func:`eidecomp.assemble._nmf.hals` with dense untuned and sparse
    tuned components (l1 on the tuned ones only); M dense or scipy.sparse.
    Returns A, B (copies) and the same ``info``."""
    A = np.array(A, dtype=float, copy=True, order="F")  # columns contiguous
    B = np.array(B, dtype=float, copy=True)
    m2 = float(M.multiply(M).sum()) if _is_sparse(M) else None
    parts = tuned_parts(A, B, n_u)
    history = [objective_split(M, A, B, n_u, l1, m2, parts)]
    converged = A.shape[1] == 0 or history[0] == 0
    while not converged and len(history) <= max_iter:
        parts = sweep_split(M, A, B, n_u, l1=l1, mask_a=mask_a, mask_b=mask_b,
                            B_sp=parts[1])
        history.append(objective_split(M, A, B, n_u, l1, m2, parts))
        converged = history[-2] - history[-1] <= tol * history[0]
    return A, B, {"n_iter": len(history) - 1, "converged": converged,
                  "history": history}
