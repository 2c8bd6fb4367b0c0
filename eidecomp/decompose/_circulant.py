"""PCP of a translation-invariant matrix on a torus, on its kernel.

For a kernel tiled over an H x W torus (eidecomp.kernels), the matrix M is
block-circulant: M = U* D U with U the 2-D Fourier transform over positions
(unitary) and D block-diagonal, one F x F block per frequency. PCP is convex
and invariant under the translations of the torus (they permute entries,
keep ||.||_* and ||.||_1, and fix M), so the average of an optimal (L, S)
over all translations is optimal and translation-invariant
(docs/kernels.md): the problem can be solved over translation-invariant
L and S, that is, over kernels. There

* the SVT of the tiled matrix is the SVT of each Fourier block with the
  same threshold (the unitary U commutes with it), and the inverse
  transform of thresholded blocks is a real kernel because the blocks of
  f and -f are complex conjugates (numpy's rfft2 keeps one of each pair);
* elementwise shrinkage of the matrix is shrinkage of the kernel, and every
  Frobenius norm of the matrix is sqrt(H W) times the kernel's, so the
  relative residuals of the ALM are the same on kernels.

The iteration, its stopping rule, its penalty schedule and its Anderson
acceleration are those of _ialm.py (the inexact ALM of Lin, Chen & Ma 2010
with primal and dual residuals), on arrays of F * F * H * W numbers instead
of (F H W)^2.
"""

import numpy as np

from ..params import MAX_ITER, TOL
from ._anderson import Anderson, depth_for
from ._ialm import _MU_MAX_FACTOR, _accelerate, end_step
from ._svt import rank_cut

__all__ = ["kernel_ialm"]


def _weights(h, w):
    """Multiplicity of each rfft2 column in the full spectrum."""
    c = np.full(w // 2 + 1, 2.0)
    c[0] = 1.0
    if w % 2 == 0:
        c[-1] = 1.0
    return np.broadcast_to(c, (h, w // 2 + 1))


def _blocks(G):
    """rfft2 over the offset axes, as (H, W//2+1, F, F) blocks."""
    return np.moveaxis(np.fft.rfft2(G, axes=(2, 3)), (2, 3), (0, 1))


def _kernel(B, grid):
    return np.fft.irfft2(np.moveaxis(B, (0, 1), (2, 3)), s=grid, axes=(2, 3))


def spectral_norm(G):
    """||M||_2 of the tiled matrix: the largest singular value of any block."""
    return float(np.linalg.svd(_blocks(G), compute_uv=False).max())


def nuclear_norm(G):
    """||M||_* of the tiled matrix."""
    h, w = G.shape[2:]
    s = np.linalg.svd(_blocks(G), compute_uv=False)
    return float((s.sum(axis=-1) * _weights(h, w)).sum())


def _svt(B, tau):
    U, s, Vh = np.linalg.svd(B, full_matrices=False)
    s = np.maximum(s - tau, 0.0)
    # the numerical-rank rule of the tiled matrix, whose singular values
    # are those of all the blocks together (_svt.numerical_rank)
    s[s <= rank_cut(s.max(initial=0.0), s.dtype)] = 0.0
    return (U * s[..., None, :]) @ Vh, np.count_nonzero(s > 0, axis=-1)


def kernel_ialm(G, lam, *, tol=TOL["float64"], max_iter=MAX_ITER, rho=1.5,
                callback=None):
    """PCP on a full-grid kernel G (F, F, H, W); kernels in, kernels out.

    Returns
    -------
    L, S, Y : ndarray (F, F, H, W)
        Kernels of the low-rank part, the sparse part and the multiplier.
    info : dict
        ``n_iter``, ``converged``, ``history`` (primal, dual, max rank, mu),
        ``ranks`` (H, W): the rank of L's block at each frequency.
    """
    grid = G.shape[2:]
    h, w = grid
    norm_W = float(np.linalg.norm(G))
    if norm_W == 0.0:
        z = np.zeros_like(G)
        return z, z.copy(), z.copy(), {"n_iter": 0, "converged": True,
                                       "history": [], "ranks": np.zeros(grid, int)}
    mu = 1.25 / spectral_norm(G)
    mu_max = mu * _MU_MAX_FACTOR
    S = np.zeros_like(G)
    Y = np.zeros_like(G)
    history = []
    converged = polishing = False
    depth = depth_for(G.size, G.itemsize)
    accel = Anderson(depth) if depth else None
    it = 0
    ranks_half = None
    for it in range(1, max_iter + 1):
        inv_mu = 1.0 / mu
        A = G + Y * inv_mu
        Lb, ranks_half = _svt(_blocks(A - S), inv_mu)
        L = _kernel(Lb, grid)
        T = A - L
        thr = lam * inv_mu
        C = np.clip(T, -thr, thr)                  # Y_new / mu
        S_new = T - C
        Y_new = mu * C
        dY, dS = np.linalg.norm(Y_new - Y), np.linalg.norm(S_new - S)
        q = S + Y * inv_mu if polishing and accel is not None else None
        S, Y = S_new, Y_new
        mu_was = mu
        converged, mu, polishing = end_step(
            history, callback, it, int(ranks_half.max()), mu, polishing, dY, dS,
            np.linalg.norm(Y), norm_W, tol=tol, rho=rho, mu_max=mu_max)
        if converged:
            break
        if q is not None:  # the dense solver's acceleration, on kernels
            _accelerate(accel, q, S, Y, mu_was, mu, lam)
    # ranks at every frequency of the full grid: f and -f share a rank
    ranks = np.zeros(grid, int)
    half = w // 2 + 1
    ranks[:, :half] = ranks_half
    fy = (-np.arange(h)) % h
    for fx in range(half, w):
        ranks[:, fx] = ranks_half[fy, w - fx]
    return L, S, Y, {"n_iter": it, "converged": converged, "history": history,
                     "ranks": ranks}
