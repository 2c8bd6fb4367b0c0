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

__all__ = ["hals", "nndsvd", "sweep"]

_DEAD_RTOL = 1e-12  # a component whose Gram diagonal is below this x the
                   # largest is dead this sweep (relative: W's scale is free)


def nndsvd(M, k):
    """NNDSVD start for a nonnegative M: A (m, k), B (k, n), both >= 0."""
    m, n = M.shape
    A = np.zeros((m, k))
    B = np.zeros((k, n))
    if k == 0 or not np.any(M):
        return A, B
    U, s, Vt = np.linalg.svd(M, full_matrices=False)
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


def _objective(M, A, B, l1_a, l1_b):
    R = M - A @ B
    return 0.5 * float(np.vdot(R, R)) + l1_a * A.sum() + l1_b * B.sum()


def hals(M, A, B, *, l1_a=0.0, l1_b=0.0, mask_a=None, mask_b=None,
         max_iter=500, tol=1e-7):
    """Refine A, B >= 0 to minimise 0.5||M - AB||^2 + l1 terms.

    Parameters
    ----------
    M : ndarray (m, n)
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
        sweep(M, A, B, l1_a=l1_a, l1_b=l1_b, mask_a=mask_a, mask_b=mask_b)
        history.append(_objective(M, A, B, l1_a, l1_b))
        converged = history[-2] - history[-1] <= tol * history[0]
    return A, B, {"n_iter": len(history) - 1, "converged": converged,
                  "history": history}


def sweep(M, A, B, *, l1_a=0.0, l1_b=0.0, mask_a=None, mask_b=None):
    """One HALS sweep in place: every column of A, then every row of B."""
    k = A.shape[1]
    if k == 0:
        return
    BBt = B @ B.T
    MBt = M @ B.T
    dead = _DEAD_RTOL * BBt.diagonal().max()
    for j in range(k):
        d = BBt[j, j]
        if d <= dead or d == 0:
            continue
        col = (MBt[:, j] - A @ BBt[:, j] + A[:, j] * d - l1_a) / d
        np.maximum(col, 0.0, out=col)
        if mask_a is not None:
            col *= mask_a[:, j]
        A[:, j] = col
    AtA = A.T @ A
    AtM = A.T @ M
    dead = _DEAD_RTOL * AtA.diagonal().max()
    for j in range(k):
        d = AtA[j, j]
        if d <= dead or d == 0:
            continue
        row = (AtM[j] - AtA[j] @ B + B[j] * d - l1_b) / d
        np.maximum(row, 0.0, out=row)
        if mask_b is not None:
            row *= mask_b[j]
        B[j] = row
    if (l1_a > 0) == (l1_b > 0):
        _balance(A, B, l1_a, l1_b)


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
