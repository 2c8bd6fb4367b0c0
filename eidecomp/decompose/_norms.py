"""The spectral norm of a dense real matrix, with an upper bound.

``spectral_norm_bound(A)`` returns ``estimate`` and ``upper`` with
``estimate <= ||A||_2 <= upper`` (the first to rounding) and ``upper <=
estimate * (1 + rtol)``: the value to a stated relative accuracy, and a
bound that a certificate (the ``||Y||_2 <= 1`` line of the optimality
report) may quote without under-reporting.

Two paths, by the smaller dimension p = min(m, n):

- p <= 300: all singular values (LAPACK through numpy), exact to rounding.
  LAPACK's computed singular values are within p(m, n) * eps * sigma_1 of
  the exact ones, p a modestly growing function (LAPACK Users' Guide, 3rd
  ed., section 4.9, from memory); ``upper`` adds 2 * max(m, n) * eps, and at
  least 1e-12, relative.
- p > 300: Lanczos with full reorthogonalisation on the p x p Gram matrix
  B = A^T A (or A A^T when A is wide), from a seeded Gaussian start. The
  Rayleigh quotient theta of the final Ritz vector v is a lower bound on
  lambda_1(B) = ||A||_2^2; the residual bound for symmetric matrices (some
  eigenvalue of B lies within ||B v - theta v|| / ||v|| of theta: Parlett,
  "The Symmetric Eigenvalue Problem", 1998, Theorem 4.5.1; Saad, "Numerical
  Methods for Large Eigenvalue Problems", 2011, chapter 3; both from
  memory) gives ``upper = sqrt(theta + ||B v - theta v|| + slack)``, where
  ``slack`` covers the rounding of the products (|fl(A x) - A x| <=
  gamma_n |A| |x|, Higham, "Accuracy and Stability of Numerical
  Algorithms", 2002, section 3.5, with || |A| ||_2 <= ||A||_F).

What the Lanczos bound assumes: that the eigenvalue near theta is the
largest one, i.e. that the Krylov space of the random start has reached the
top of the spectrum. A start with a component of exactly zero on the top
eigenvector would never reach it in exact arithmetic, and no bound from
Krylov information alone can exclude that for a deterministic start
(Kuczynski & Wozniakowski 1992, SIAM J. Matrix Anal. Appl. 13(4):1094). For
a start uniform on the sphere (a normalised Gaussian, as here) they bound the
chance that k Lanczos steps leave a relative error >= eps on lambda_1 by
1.648 sqrt(p) exp(-(2k - 1) sqrt(eps)), whatever the matrix (the rate is in
their abstract, the constant from memory). Measured: with top values 0.7926
and 0.7681, a start whose component on the top vector is 1e-10 (a random one
has ~1/sqrt(p)) still reaches it; at 1e-12 the bound reports 0.7681. The
bound is also capped by ||A||_F, which needs no assumption. When Lanczos
does not reach ``rtol`` in its budget, the full singular values are used
instead (``method == "svd-fallback"``).

Products are formed in float64, row block by row block (about 1 MiB each),
so a float32 matrix is never copied whole; each block is read once per
product for both A x and A^T (A x) (it stays in cache). numpy's BLAS only:
see the note on thread pools in ``_svt``.
"""

import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..params import positive_number

__all__ = ["SpectralNorm", "gram_eigh", "gram_upper", "spectral_norm_bound"]

# Measured on square Gaussian matrices, OPENBLAS_NUM_THREADS=1: the singular
# values alone cost ~0.35 of a full SVD at every size (0.7, 3.0, 6.8, 13.6 ms
# at p = 100, 200, 300, 400); the Lanczos path 1.2, 3.2, 3.0, 5.1 ms. They
# cross near p = 200; up to 300 the dense path costs under 7 ms and needs no
# assumption, so it is kept there.
_DENSE_MAX = 300
_BLOCK_BYTES = 1 << 20  # float64 row block of the products: fits in L2
_MAX_STEPS = 300  # Lanczos steps of one run (memory: up to _MAX_STEPS p floats)
_FIRST_ROWS = 64  # Lanczos vectors allocated at first; doubled when full
_MAX_RUNS = 3  # runs, each restarted from the previous Ritz vector
_RTOL_MIN = 1e-12  # below this only the dense path can deliver
_EPS = float(np.finfo(np.float64).eps)


@dataclass(frozen=True)
class SpectralNorm:
    """``||A||_2`` with a bound: ``estimate <= ||A||_2 <= upper``.

    Attributes
    ----------
    estimate : float
        The value; within ``rtol`` of ``||A||_2`` (relative). On the Lanczos
        path it is the square root of a Rayleigh quotient, so a lower bound
        up to rounding.
    upper : float
        An upper bound on ``||A||_2``, at most ``estimate * (1 + rtol)``.
        See the module docstring for what it assumes on the Lanczos path.
    method : str
        ``"svd"``, ``"lanczos"``, ``"svd-fallback"`` (Lanczos did not reach
        ``rtol``) or ``"zero"`` (A is empty or all zeros).
    n_products : int
        Products with the Gram matrix (each is A x and A^T (A x)).
    """

    estimate: float
    upper: float
    method: str
    n_products: int = 0


def spectral_norm_bound(A, *, rtol=1e-6, seed=0):
    """The spectral norm of a dense real matrix, with an upper bound.

    Parameters
    ----------
    A : array_like of shape (m, n)
        Real; float32 and float64 are used as they are, other real types
        are converted to float64.
    rtol : float, default 1e-6
        Relative accuracy: ``upper <= estimate * (1 + rtol)``. Below 1e-12
        the full singular values are used.
    seed : int, default 0
        Seed of the Lanczos start, ``default_rng(seed).standard_normal(p)``
        with p = min(m, n) (the Gram side).

    Returns
    -------
    SpectralNorm
        ``estimate``, ``upper``, ``method`` and ``n_products``.

    Examples
    --------
    >>> A = np.diag([3.0, 2.0, 1.0])
    >>> r = spectral_norm_bound(A)
    >>> r.estimate, r.method, 3.0 <= r.upper <= 3.0 * (1 + 1e-6)
    (3.0, 'svd', True)
    >>> big = np.random.default_rng(0).standard_normal((400, 500))
    >>> r, ref = spectral_norm_bound(big), float(np.linalg.norm(big, 2))
    >>> r.method, abs(r.estimate - ref) <= 1e-6 * ref, r.upper >= ref
    ('lanczos', True, True)
    """
    A = _real_matrix(A)
    rtol = positive_number(rtol, "rtol")
    G = A if A.shape[0] >= A.shape[1] else A.T  # Gram side: G^T G is p x p
    rows = max(1, _BLOCK_BYTES // (8 * max(G.shape[1], 1)))
    fro = _frobenius(G, rows)
    if fro == 0.0:  # also an empty A
        return SpectralNorm(0.0, 0.0, "zero")
    if not math.isfinite(fro):
        if not np.isfinite(A).all():
            raise InputError("spectral_norm_bound: A has NaN or infinite entries")
        return _dense(A, "svd")  # ||A||_F overflows; LAPACK scales
    if min(A.shape) <= _DENSE_MAX or rtol < _RTOL_MIN:
        return _dense(A, "svd")
    return _lanczos_bound(G, rows, fro, rtol, seed)


def _real_matrix(A):
    """A as a 2-D float32 or float64 array (a view when it already is)."""
    A = np.asarray(A)
    if A.ndim != 2:
        raise InputError(f"spectral_norm_bound needs a 2-D matrix, got "
                         f"{A.ndim} dimension(s)")
    if np.iscomplexobj(A) or not (np.issubdtype(A.dtype, np.number)
                                  or A.dtype == bool):
        raise InputError(f"spectral_norm_bound needs a real matrix, got "
                         f"dtype {A.dtype}")
    if A.dtype not in (np.float32, np.float64):
        A = A.astype(np.float64)
    return A


def _gram_slack(A, G):
    """The rounding allowance of ``gram_upper`` for A and its Gram matrix G."""
    return (max(A.shape) + 8) * _EPS * float(np.trace(G))


def _gram_matrix(A):
    """A in float64 and the Gram matrix of its smaller side."""
    A = _real_matrix(A).astype(np.float64, copy=False)
    return A, (A.T @ A if A.shape[0] >= A.shape[1] else A @ A.T)


def gram_upper(A):
    """An upper bound on ||A||_2 from the largest eigenvalue of the Gram
    matrix of A's smaller side (LAPACK's symmetric eigenvalues only, about
    a third of the singular values' cost at 576 units, measured).

    The computed Gram matrix differs from the exact one by at most
    gamma_n ||A||_F^2 in norm (Higham 2002, section 3.5, from memory), and
    the computed eigenvalue from the exact one of the computed matrix by a
    modest multiple of eps ||G||_2 (Golub & Van Loan 2013, section 8.4,
    from memory); ``(max(m, n) + 8) eps ||A||_F^2`` covers both, so
    sqrt(lambda_max + slack) is never below ||A||_2 beyond rounding.

    >>> gram_upper(np.diag([3.0, 2.0, 1.0])) >= 3.0
    True
    """
    A, G = _gram_matrix(A)
    if A.size == 0:
        return 0.0
    top = float(np.linalg.eigvalsh(G)[-1])
    return _upper(top, _gram_slack(A, G))


def _upper(top, slack):
    return math.sqrt(max(top, 0.0) + slack) * (1 + 4 * _EPS)


def gram_eigh(A):
    """``gram_upper``'s bound with the eigenpairs it came from.

    Returns ``(upper, s, V)``: the bound on ||A||_2, the singular values of
    A from the Gram matrix of its smaller side (ascending, as eigh orders
    them) and that matrix's eigenvectors: A's right singular vectors when
    A is tall (m >= n), its left ones when it is wide. The full
    eigendecomposition costs about twice ``gram_upper`` (eigh against
    eigvalsh, measured at 576); the vectors let a caller act on the
    spectrum (``_certificate``'s projection onto the spectral ball).

    >>> upper, s, V = gram_eigh(np.diag([3.0, 2.0, 1.0]))
    >>> bool(upper >= 3.0), bool(np.allclose(s, [1.0, 2.0, 3.0]))
    (True, True)
    """
    A, G = _gram_matrix(A)
    if A.size == 0:
        return 0.0, np.zeros(0), np.zeros((min(A.shape), 0))
    evals, V = np.linalg.eigh(G)
    upper = _upper(float(evals[-1]), _gram_slack(A, G))
    return upper, np.sqrt(np.clip(evals, 0.0, None)), V


def _dense(A, method, n_products=0):
    """All singular values in float64; ``upper`` covers LAPACK's rounding."""
    value = float(np.linalg.svd(A.astype(np.float64, copy=False),
                                compute_uv=False)[0])
    rel = max(1e-12, 2 * max(A.shape) * _EPS)
    return SpectralNorm(value, value * (1 + rel), method, n_products)


def _blocks(G, rows):
    """Row blocks of G in float64 (a float32 block is converted alone)."""
    for i in range(0, G.shape[0], rows):
        yield G[i:i + rows].astype(np.float64, copy=False)


def _frobenius(G, rows):
    return math.sqrt(sum(float(np.vdot(b, b)) for b in _blocks(G, rows)))


def _gram(G, x, rows):
    """G^T (G x) in float64, one pass over G."""
    out = np.zeros(G.shape[1])
    for block in _blocks(G, rows):
        out += block.T @ (block @ x)
    return out


def _lanczos_bound(G, rows, fro, rtol, seed):
    """The Lanczos path: runs restarted from the last Ritz vector, checked
    each time by an explicit residual; the full SVD when the budget is out."""
    m, p = G.shape
    goal = rtol * (2 + rtol)  # upper^2 <= (1 + rtol)^2 estimate^2
    q = np.random.default_rng(seed).standard_normal(p)
    products = 0
    for _ in range(_MAX_RUNS):
        q, steps = _lanczos(lambda x: _gram(G, x, rows), q / np.linalg.norm(q),
                            tol=0.8 * goal, max_steps=min(_MAX_STEPS, p))
        products += steps + 1
        theta, resid, q = _ritz_residual(G, q, rows)
        slack = (m + p + 4) * _EPS * fro * (fro + math.sqrt(theta))
        upper = min(math.sqrt(theta + resid + slack) * (1 + 4 * _EPS),
                    fro * (1 + m * p * _EPS))  # fro: a sum of m p squares
        estimate = math.sqrt(theta)
        if upper <= estimate * (1 + rtol):
            return SpectralNorm(estimate, upper, "lanczos", products)
    return _dense(G, "svd-fallback", products)


def _ritz_residual(G, v, rows):
    """Rayleigh quotient theta of B = G^T G at v, ||B v - theta v|| and v,
    normalised (its norm is 1 to rounding, which the caller's slack covers)."""
    v = v / np.linalg.norm(v)
    Bv = _gram(G, v, rows)
    theta = max(float(v @ Bv), 0.0)
    return theta, float(np.linalg.norm(Bv - theta * v)), v


def _lanczos(op, q0, *, tol, max_steps):
    """Top Ritz vector of the symmetric operator ``op`` and the steps taken.

    Lanczos from the unit vector ``q0`` with full reorthogonalisation
    (classical Gram-Schmidt twice against all previous vectors); it stops
    when the Lanczos estimate of the top Ritz pair's residual, beta_k |s_k|
    (Parlett 1998, section 13.2, from memory), is below ``tol * theta``.
    """
    Q = np.empty((min(_FIRST_ROWS, max_steps + 1), q0.size))  # grows
    Q[0] = q0
    alpha, beta = [], []
    s = np.ones(1)
    for j in range(max_steps):
        if j + 1 == Q.shape[0]:
            Q = np.concatenate([Q, np.empty_like(Q)])[:max_steps + 1]
        w = op(Q[j])
        basis = Q[:j + 1]
        h = basis @ w
        alpha.append(float(h[j]))
        w -= basis.T @ h
        w -= basis.T @ (basis @ w)
        beta.append(float(np.linalg.norm(w)))
        top = max(abs(a) for a in alpha)
        if beta[-1] <= tol * top or _check_due(j):
            theta, s = _top_ritz(alpha, beta)
            if beta[-1] * abs(s[-1]) <= tol * theta:  # also on breakdown
                break
        Q[j + 1] = w / beta[-1]
    else:
        theta, s = _top_ritz(alpha, beta)
    return s @ Q[:len(s)], len(alpha)


def _check_due(j):
    """Check the Ritz pair at every step up to 30, then every j/30 steps: the
    small eigenproblem then costs little next to the products."""
    return j < 30 or j % max(1, j // 30) == 0


def _top_ritz(alpha, beta):
    """Largest eigenvalue of the Lanczos tridiagonal and its eigenvector."""
    T = np.diag(alpha)
    if len(alpha) > 1:
        off = np.arange(len(alpha) - 1)
        T[off, off + 1] = T[off + 1, off] = beta[:-1]
    w, S = np.linalg.eigh(T)
    return float(w[-1]), S[:, -1]
