"""Singular value thresholding, full or partial.

``svt(A, tau, ...)`` returns the proximal operator of ``tau * ||.||_*`` at A as
factors (U, s, Vt) with ``s`` already shrunk by ``tau``, together with the
right singular subspace to warm-start the next call.

The partial path is a warm-started randomized range finder (Halko, Martinsson,
Tropp 2011, SIAM Review 53(2), Algorithms 4.1 and 4.4): the previous
iteration's right singular vectors are the starting block, so each call is one
more subspace iteration on a matrix that changes little between calls. Only
singular values above ``tau`` survive the threshold, so it is enough to compute
``k`` of them as long as the k-th computed value falls below ``tau``; when it
does not, ``k`` is doubled and the call repeated, and past ``full_fraction`` of
the smaller dimension a full SVD is used instead.
"""

import numpy as np

from ..params import RANK_RTOL, REPORTED_RANK_RTOL

__all__ = ["leading_triplets", "numerical_rank", "rank_cut", "reported_rank",
           "sketch_plan", "spectral_norm", "svt"]

# Below this size a full SVD is as cheap as any partial scheme.
_SMALL = 64
_OVERSAMPLE = 10
_GRAM_RATIO = 1e5  # sigma_1 / tau above which the Gram route is too coarse
_GROWTH = 3  # factor by which k grows when k triplets were not enough


# numpy's LAPACK only: numpy and scipy wheels each bring an OpenBLAS with its
# own thread pool, and alternating between them in a loop makes the idle pool's
# spinning threads compete with the busy one (measured: small QR and SVD calls
# ten times slower inside the solver loop than alone).
def _full_svd(A):
    """Thin SVD, computed on the tall orientation (faster in LAPACK)."""
    if A.shape[0] < A.shape[1]:
        V, s, Ut = np.linalg.svd(A.T, full_matrices=False)
        return Ut.T, s, V.T
    return np.linalg.svd(A, full_matrices=False)


def rank_cut(largest, dtype=np.float64):
    """The numerical-rank rule: singular values at or below this value are
    zero (``params.RANK_RTOL`` of the dtype times the largest)."""
    return RANK_RTOL[np.dtype(dtype).name] * float(largest)


def numerical_rank(s, dtype=np.float64):
    """How many of the singular values ``s`` (in decreasing order) count
    under the rule of ``rank_cut``."""
    s = np.asarray(s)
    if s.size == 0 or not s[0] > 0:
        return 0
    return int(np.count_nonzero(s > rank_cut(s[0], dtype)))


def reported_rank(s, dtype=np.float64):
    """(rank, band) of L from its decreasing singular values ``s``: the
    values above ``params.REPORTED_RANK_RTOL`` times the largest, and how
    many lie between that cut and the noise floor of ``rank_cut`` (None in
    float32, whose floor is the cut).

    >>> reported_rank([1.0, 0.5, 2e-3, 5e-4, 1e-4, 1e-7])
    (3, 2)
    """
    s = np.asarray(s, dtype=float)
    if RANK_RTOL[np.dtype(dtype).name] >= REPORTED_RANK_RTOL:
        band = None  # float32: the noise floor is the cut, no band to count
    else:
        band = 0
    if s.size == 0 or not s[0] > 0:
        return 0, band
    rank = int(np.count_nonzero(s > REPORTED_RANK_RTOL * s[0]))
    if band is None:
        return rank, None
    return rank, max(0, numerical_rank(s, dtype) - rank)


def _kept(s, tau, dtype):
    """How many of the decreasing values ``s`` survive thresholding at tau
    and the rank rule."""
    return numerical_rank(s[:int(np.count_nonzero(s > tau))] - tau, dtype)


def _gram_svt(A, tau):
    """SVT of A (float64) through the eigendecomposition of its Gram matrix.

    eigh of the n x n Gram matrix costs about 0.4 of LAPACK's SVD at n = 200
    and 0.7 at n = 1000 (measured, one thread). Squaring A squares its
    condition number: an eigenvalue is accurate to about eps * sigma_1^2, so
    a kept singular value s > tau is accurate to eps * sigma_1^2 / tau
    relative to tau. Returns None when sigma_1 / tau > _GRAM_RATIO (then the
    caller takes the SVD), so that error stays below 1e-6 of tau.
    """
    tall = A.shape[0] >= A.shape[1]
    B = A if tall else A.T
    evals, V = np.linalg.eigh(B.T @ B)
    evals, V = evals[::-1], V[:, ::-1]
    top = float(np.sqrt(max(evals[0], 0.0)))
    if top > _GRAM_RATIO * tau:
        return None
    s = np.sqrt(np.clip(evals, 0.0, None))
    keep = min(len(s), 2 * int(np.count_nonzero(s > tau)) + 2 * _OVERSAMPLE)
    r = _kept(s, tau, A.dtype)
    Ur = (B @ V[:, :r]) / s[:r]
    shrunk = s[:r] - tau
    if tall:
        return Ur, shrunk, V[:, :r].T, V[:, :keep], B.shape[1]
    # A = B^T: its left vectors are V, its right vectors Ur; the warm start
    # of the partial path is a basis of the working side (see svt)
    return V[:, :r], shrunk, Ur.T, V[:, :keep], B.shape[1]


def _orth(Y):
    """Orthonormal basis of range(Y): CholeskyQR2, Householder if that fails.

    CholeskyQR2 (Fukaya et al. 2014) is two Cholesky passes on the Gram
    matrix, ten times cheaper than Householder QR for tall blocks and as
    accurate while cond(Y) < 1e7; a failed factorisation falls back.
    """
    try:
        for _ in range(2):
            R = np.linalg.cholesky(Y.T @ Y).T
            Y = Y @ np.linalg.inv(R)  # R is width x width: tiny
        return Y
    except np.linalg.LinAlgError:
        return np.linalg.qr(Y)[0]


def _start_block(n, k, V0, rng, dtype=np.float64):
    """Starting block of the range finder, and whether it is a warm start.

    It has the matrix's dtype: a float64 block against a float32 matrix
    would make numpy copy the whole matrix to float64 for each product.
    """
    width = min(k + _OVERSAMPLE, n)
    if V0 is not None and V0.shape[0] != n:
        V0 = None
    if V0 is not None and V0.shape[1] >= width:
        return np.ascontiguousarray(V0[:, :width], dtype=dtype), True
    have = 0 if V0 is None else V0.shape[1]
    block = rng.standard_normal((n, width - have)).astype(dtype, copy=False)
    # Warm when the previous vectors span at least the k wanted: only the
    # oversampling columns are fresh, and the solver's iterations refine them.
    Omega = block if V0 is None else np.hstack([V0.astype(dtype, copy=False), block])
    return Omega, have >= k


def sketch_plan(shape, k, V0, rng, full_fraction=0.25, dtype=np.float64):
    """The starting block ``svt`` would use for these arguments, or None.

    A caller that already streams through A can form ``A @ Omega`` in the same
    pass and hand ``(Omega, warm, A @ Omega)`` to ``svt`` as ``sketch``. None
    means the call takes another path (a full SVD, or the transposed range
    finder of a wide matrix) and no product is needed.
    """
    m, n = shape
    small = min(m, n)
    if k is None or small <= _SMALL or k >= full_fraction * small or m < n:
        return None
    return _start_block(n, max(int(k), 1), V0, rng, dtype)


def _partial_svd(A, k, V0, rng, power_iter, sketch=None):
    """Top-k singular triplets of A (m >= n) by a warm-started range finder."""
    if sketch is None:
        Omega, warm = _start_block(A.shape[1], k, V0, rng, A.dtype)
        P = A @ Omega
    else:
        Omega, warm, P = sketch
    if warm:
        power_iter = 0  # the solver's own iterations are the power steps
    Q = _orth(P)
    for _ in range(power_iter):
        Q = _orth(A @ _orth(A.T @ Q))
    B = Q.T @ A
    # SVD of the small wide B through its width x width Gram matrix; the
    # singular values that matter here are far above sqrt(eps) * ||B||.
    evals, Ub = np.linalg.eigh(B @ B.T)
    order = np.argsort(evals)[::-1]
    evals, Ub = evals[order], Ub[:, order]
    s = np.sqrt(np.clip(evals, 0.0, None))
    keep = s > s[0] * 1e-7 if s.size and s[0] > 0 else np.zeros(0, bool)
    Ub, s = Ub[:, keep], s[keep]
    Vt = (Ub.T @ B) / s[:, None]
    return Q @ Ub, s, Vt


def leading_triplets(A, k, *, seed=0, power_iter=7):
    """The k leading singular triplets (U, s, Vt) of A by a seeded randomized
    range finder with power iterations (Halko, Martinsson, Tropp 2011,
    Algorithms 4.4 and 5.1: k + 10 columns, the small SVD exact).

    >>> rng = np.random.default_rng(0)
    >>> A = rng.random((60, 3)) @ rng.random((3, 50))
    >>> _, s, _ = leading_triplets(A, 3)
    >>> bool(np.allclose(s, np.linalg.svd(A, compute_uv=False)[:3]))
    True
    """
    A = np.asarray(A)
    m, n = A.shape
    k = min(int(k), m, n)
    if k == 0:
        return np.zeros((m, 0)), np.zeros(0), np.zeros((0, n))
    rng = np.random.default_rng(seed)
    width = min(k + _OVERSAMPLE, m, n)
    Q = np.linalg.qr(A @ rng.standard_normal((n, width)).astype(A.dtype,
                                                                  copy=False))[0]
    for _ in range(power_iter):
        Q = np.linalg.qr(A @ np.linalg.qr(A.T @ Q)[0])[0]
    Ub, s, Vt = np.linalg.svd(Q.T @ A, full_matrices=False)
    return Q @ Ub[:, :k], s[:k], Vt[:k]


def spectral_norm(A, *, rtol=1e-6, max_iter=200, seed=0):
    """Largest singular value of A by power iteration on A^T A (numpy only)."""
    m, n = A.shape
    if min(m, n) <= _SMALL:
        return float(np.linalg.norm(A, 2))
    v = np.random.default_rng(seed).standard_normal(n).astype(A.dtype)
    sigma = 0.0
    for _ in range(max_iter):
        u = A @ v
        v = A.T @ u
        norm_v = float(np.linalg.norm(v))
        if norm_v == 0.0:
            return 0.0
        v /= norm_v
        new = np.sqrt(norm_v)
        if abs(new - sigma) <= rtol * new:
            return float(new)
        sigma = new
    return float(sigma)


def svt(A, tau, *, k=None, V0=None, rng=None, full_fraction=0.25, power_iter=1,
        sketch=None):
    """Singular value thresholding of A at ``tau``.

    Parameters
    ----------
    A : ndarray of shape (m, n)
    tau : float
        Threshold; singular values are replaced by ``max(s - tau, 0)``.
    k : int or None
        Number of singular triplets to compute. None computes all of them.
    V0 : ndarray or None
        ``V_next`` of the previous call on a matrix of the same shape.
    rng : numpy.random.Generator or None
        Source of the random part of the starting block.
    full_fraction : float
        Above ``full_fraction * min(m, n)`` triplets a full SVD is used.
    power_iter : int
        Subspace iterations per call on the partial path.
    sketch : tuple or None
        ``(Omega, warm, A @ Omega)`` with ``(Omega, warm)`` from
        ``sketch_plan`` for the same arguments: the first product, already
        formed by the caller.

    Returns
    -------
    U : ndarray of shape (m, r)
    s : ndarray of shape (r,)
        Shrunk singular values, all above ``numerical_rank``'s cut.
    Vt : ndarray of shape (r, n)
    V_next : ndarray
        Singular vectors to warm-start the next call (pass back as ``V0``).
    n_computed : int
        How many triplets were computed (``min(m, n)`` for a full SVD).
    """
    m, n = A.shape
    small = min(m, n)
    if k is None or small <= _SMALL or k >= full_fraction * small:
        if A.dtype == np.float64:
            out = _gram_svt(A, tau)
            if out is not None:
                return out
        U, s, Vt = _full_svd(A)
        # room for the rank to grow
        keep = min(small, 2 * int(np.count_nonzero(s > tau)) + 2 * _OVERSAMPLE)
        r = _kept(s, tau, A.dtype)
        return U[:, :r], s[:r] - tau, Vt[:r], Vt[:keep].T, small
    if rng is None:
        rng = np.random.default_rng(0)
    transposed = m < n
    if transposed:  # the range finder works on the taller side
        A = A.T
    k = max(int(k), 1)
    while True:
        U, s, Vt = _partial_svd(A, k, V0, rng, power_iter, sketch)
        sketch = None
        if len(s) < k or s[k - 1] <= tau or k >= small:
            break
        k = _GROWTH * k
        V0 = Vt.T  # keep what was found; the range finder adds the rest
        if k >= full_fraction * small:
            return svt(A.T if transposed else A, tau, k=None)
    r = _kept(s, tau, A.dtype)
    V_next = Vt.T  # every computed vector: the next call starts warm
    U, s, Vt = U[:, :r], s[:r] - tau, Vt[:r]
    if transposed:  # V_next stays a basis of the working (taller) side
        U, Vt = Vt.T, U.T
    return U, s, Vt, V_next, k
