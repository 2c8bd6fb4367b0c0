"""Nonnegative factorisation M ~ A B by hierarchical alternating least squares.

HALS (Cichocki & Phan 2009, IEICE Trans. Fundamentals E92-A(3); Gillis 2014,
"The why and how of nonnegative matrix factorization", section 3.1.3) updates
one column of A, then one row of B, at a time; each update is the exact
minimiser of a convex one-dimensional problem, so the objective

    0.5 ||M - A B||_F^2 + l1_a sum(A) + l1_b sum(B)

never increases. M may have entries of either sign (the joint refinement
fits J_EE - W, which does), only A and B are constrained. Optional masks fix
entries of A or B at zero (a tuned interneuron keeps its pool).

The start is NNDSVD (Boutsidis & Gallopoulos 2008, Pattern Recognition
41(4), Algorithm 1), which is deterministic: the same M gives the same
factors.
"""

import numpy as np

__all__ = ["Factored", "hals", "inner_passes", "leading_svd", "nndsvd", "sweep"]

INNER_EPS = 0.01    # accelerated HALS: stop the passes of one product when
                    # a pass moves the factor by less than this x the first
_DEAD_RTOL = 1e-12  # a component whose Gram diagonal is below this x the
                   # largest is dead this sweep (relative: W's scale is free)


EXACT_SVD_MAX = 2000
"""Above this many rows or columns, NNDSVD takes the k leading singular
triplets from a randomized SVD (Halko, Martinsson, Tropp 2011, SIAM Review
53(2); decompose._svt.leading_triplets, seeded) instead of a full SVD, whose
cost grows as N^3 (343 s at N = 10,000 on the project's 2-core machine)."""


def _leading_svd(M, k, seed):
    if max(M.shape) <= EXACT_SVD_MAX:
        return np.linalg.svd(M, full_matrices=False)
    return _randomized(M, k, seed)


def _randomized(M, k, seed):
    from ..decompose import leading_triplets  # one randomized SVD

    return leading_triplets(M, k, seed=seed)


def leading_svd(M, k, seed=0):
    """The k leading singular triplets of M (U, s, Vt): all of a full SVD up
    to :data:`EXACT_SVD_MAX`, a seeded randomized SVD above it or when k is
    small against the size (k <= min(m, n) / 10)."""
    if 0 < 10 * k <= min(M.shape):
        return _randomized(M, k, seed)
    return _leading_svd(M, k, seed)


def nndsvd(M, k, seed=0, svd=None):
    """NNDSVD start for a nonnegative M: A (m, k), B (k, n), both >= 0.

    ``seed`` seeds the randomized SVD used above :data:`EXACT_SVD_MAX`;
    ``svd`` is M's leading triplets (U, s, Vt) when the caller has them."""
    m, n = M.shape
    A = np.zeros((m, k))
    B = np.zeros((k, n))
    if k == 0 or not np.any(M):
        return A, B
    U, s, Vt = _leading_svd(M, k, seed) if svd is None else svd
    for j in range(min(k, len(s))):
        u, v = U[:, j], Vt[j]
        up, un = np.maximum(u, 0), np.maximum(-u, 0)
        vp, vn = np.maximum(v, 0), np.maximum(-v, 0)
        pos = np.linalg.norm(up) * np.linalg.norm(vp)
        neg = np.linalg.norm(un) * np.linalg.norm(vn)
        x, y, sigma = (up, vp, pos) if pos >= neg else (un, vn, neg)
        if sigma <= 0:
            continue
        scale = np.sqrt(s[j] * sigma)
        A[:, j] = scale * x / np.linalg.norm(x)
        B[j] = scale * y / np.linalg.norm(y)
    return A, B


class Factored:
    """M = P Q given by its factors (P: m x q, Q: q x n), for HALS on a
    low-rank stand-in of a large M: every product with M costs O((m + n) q)
    per component instead of O(m n)."""

    def __init__(self, P, Q):
        self.P, self.Q = np.asarray(P, dtype=float), np.asarray(Q, dtype=float)
        self.shape = (self.P.shape[0], self.Q.shape[1])
        self._norm2 = None

    def times_t(self, B):
        """M B^T."""
        return self.P @ (self.Q @ B.T)

    def t_times(self, A):
        """A^T M."""
        return (A.T @ self.P) @ self.Q

    def norm2(self):
        """||M||_F^2 = trace(P^T P Q Q^T), computed once."""
        if self._norm2 is None:
            self._norm2 = float(np.vdot(self.P.T @ self.P, self.Q @ self.Q.T))
        return self._norm2


def _times_t(M, B):
    return M.times_t(B) if isinstance(M, Factored) else M @ B.T


def _t_times(A, M):
    return M.t_times(A) if isinstance(M, Factored) else A.T @ M


def _norm2(M):
    return M.norm2() if isinstance(M, Factored) else float(np.vdot(M, M))


def _objective(M, A, B, l1_a, l1_b):
    if isinstance(M, Factored):
        loss = 0.5 * max(M.norm2() - 2 * float(np.vdot(M.t_times(A), B))
                         + float(np.vdot(A.T @ A, B @ B.T)), 0.0)
    else:
        R = M - A @ B
        loss = 0.5 * float(np.vdot(R, R))
    return loss + l1_a * A.sum() + l1_b * B.sum()


def hals(M, A, B, *, l1_a=0.0, l1_b=0.0, mask_a=None, mask_b=None,
         max_iter=500, tol=1e-7, inner=1):
    """Refine A, B >= 0 to minimise 0.5||M - AB||^2 + l1 terms.

    Parameters
    ----------
    M : ndarray (m, n) or Factored
        The matrix, or its factors (a low-rank stand-in for a large one).
    A : ndarray (m, k), B : ndarray (k, n)
        Nonnegative starting factors (copied).
    l1_a, l1_b : float
        Weights of the l1 penalties on A and B.
    mask_a, mask_b : ndarray of bool or None
        Where False, the entry is held at zero.
    max_iter : int
        Sweeps (each updates every column of A and every row of B).
    tol : float
        Stop when a sweep lowers the objective by less than ``tol`` times
        its starting value (a relative test would never stop on an exact
        factorisation, whose objective falls linearly towards zero).
    inner : int
        Passes over each factor per product with M (1: plain HALS; see
        :func:`inner_passes` for the cap of accelerated HALS).

    Returns
    -------
    A, B : ndarray
    info : dict
        ``n_iter``, ``converged``, ``history`` (objective per sweep).

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> M = rng.random((6, 2)) @ rng.random((2, 5))
    >>> A, B, info = hals(M, *nndsvd(M, 2))
    >>> bool(np.linalg.norm(M - A @ B) < 1e-3 * np.linalg.norm(M))
    True
    """
    A = np.array(A, dtype=float, copy=True)
    B = np.array(B, dtype=float, copy=True)
    history = [_objective(M, A, B, l1_a, l1_b)]
    converged = A.shape[1] == 0 or history[0] == 0
    while not converged and len(history) <= max_iter:
        loss = sweep(M, A, B, l1_a=l1_a, l1_b=l1_b, mask_a=mask_a,
                     mask_b=mask_b, inner=inner)
        history.append(loss + l1_a * A.sum() + l1_b * B.sum())
        converged = history[-2] - history[-1] <= tol * history[0]
    return A, B, {"n_iter": len(history) - 1, "converged": converged,
                  "history": history}


def _pass(P, A, G, l1, mask):
    """Every column of A once: A[:, j] = max((P - A G + A_j G_jj - l1)_j /
    G_jj, 0) in turn (P = M B^T, G = B B^T); rows of B with A^T."""
    dead = _DEAD_RTOL * G.diagonal().max()
    for j in range(A.shape[1]):
        d = G[j, j]
        if d <= dead or d == 0:
            continue
        col = (P[:, j] - A @ G[:, j] + A[:, j] * d - l1) / d
        np.maximum(col, 0.0, out=col)
        if mask is not None:
            col *= mask[:, j]
        A[:, j] = col


def _passes(P, A, G, l1, mask, inner):
    """Up to ``inner`` passes with the same P and G, stopping when a pass
    moves A by less than INNER_EPS times the first one did (Gillis and
    Glineur 2012, Neural Computation 24(4), section 3: accelerated HALS)."""
    first = None
    for _ in range(inner):
        before = A.copy() if inner > 1 else None
        _pass(P, A, G, l1, mask)
        if before is None:
            return
        moved = np.linalg.norm(A - before)
        if first is None:
            first = moved
        elif moved <= INNER_EPS * first:
            return


def inner_passes(m, n, k):
    """The cap on passes per product of accelerated HALS, 1 + alpha rho with
    rho = 1 + (m n + n k) / (m (k + 1)) the cost of the products M B^T and
    B B^T over one pass, and alpha = 0.5 (Gillis and Glineur 2012, section
    3, from memory of its recommended values)."""
    return 1 + int(0.5 * (1 + (m * n + n * k) / (m * (k + 1))))


def sweep(M, A, B, *, l1_a=0.0, l1_b=0.0, mask_a=None, mask_b=None, inner=1):
    """One HALS sweep in place: every column of A, then every row of B;
    with ``inner`` > 1, up to that many passes over each factor for one
    product with M (accelerated HALS). Returns 0.5 ||M - A B||_F^2 after
    it, from the Gram matrices the sweep computed (no m x n residual)."""
    k = A.shape[1]
    if k == 0:
        return 0.5 * _norm2(M)
    _passes(_times_t(M, B), A, B @ B.T, l1_a, mask_a, inner)
    Bt = B.T                                   # rows of B as columns
    AtM, AtA = _t_times(A, M), A.T @ A
    _passes(AtM.T, Bt, AtA, l1_b, None if mask_b is None else mask_b.T, inner)
    # 0.5 ||M - A B||^2 from the products at hand (the balance below keeps A B)
    loss = 0.5 * max(_norm2(M) - 2 * float(np.vdot(AtM, B))
                     + float(np.vdot(AtA, B @ B.T)), 0.0)
    if (l1_a > 0) == (l1_b > 0):
        _balance(A, B, l1_a, l1_b)
    return loss


def _balance(A, B, l1_a, l1_b):
    """Rescale each pair (column of A, row of B) in place, product unchanged.

    With penalties, the scale f minimising l1_a f sum(a) + l1_b sum(b) / f
    (f = sqrt(l1_b sum(b) / (l1_a sum(a)))), so the objective can only
    fall; without, equal norms, which keeps the factors well scaled.
    """
    if l1_a > 0 and l1_b > 0:
        na, nb = l1_a * A.sum(axis=0), l1_b * B.sum(axis=1)
    else:
        na, nb = np.linalg.norm(A, axis=0), np.linalg.norm(B, axis=1)
    ok = (na > 0) & (nb > 0)
    f = np.ones_like(na)
    f[ok] = np.sqrt(nb[ok] / na[ok])
    A *= f
    B /= f[:, None]
