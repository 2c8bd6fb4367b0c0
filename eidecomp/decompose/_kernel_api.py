"""robust_pca_kernel: PCP of a lateral kernel tiled over a grid."""

import numpy as np

from ..errors import InputError, warn_stopped
from ..kernels import check_kernel, expand, full_grid
from ..params import SolverSettings
from ..types import KernelDecomposition
from ._api import robust_pca
from ._circulant import kernel_ialm, nuclear_norm
from ._threads import blas_threads

__all__ = ["robust_pca_kernel"]


def robust_pca_kernel(K, grid, *, lam=None, boundary="periodic", offsets=False,
                      tol=None, max_iter=None, rho=1.5, progress=None, seed=0):
    """Robust PCA of the matrix of a kernel tiled over an H x W grid.

    Parameters
    ----------
    K : ndarray (F, F, kh, kw)
        K[post_feature, pre_feature, dy, dx], odd spatial size, centred (see
        eidecomp.kernels); with ``offsets=True``, a full-grid kernel
        (F, F, H, W) indexed by offset mod the grid instead.
    grid : tuple (H, W)
    lam : float or None
        Default 1/sqrt(F H W), that of the tiled matrix (Candes et al. 2011).
    boundary : "periodic" or "zero"
        Periodic: the structured solver on kernels, never forming the
        matrix; returns a KernelDecomposition. Zero: the tiled matrix is not
        block-circulant, so it is expanded (after a memory check) and
        decomposed densely; returns a Decomposition.

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> K = rng.standard_normal((2, 2, 3, 3))
    >>> dec = robust_pca_kernel(K, (5, 5))
    >>> dec.low_rank.shape, dec.converged
    ((2, 2, 5, 5), True)
    """
    h, w = (int(g) for g in grid)
    if offsets:
        G = np.asarray(K, dtype=float)
        if G.ndim != 4 or G.shape[2:] != (h, w) or G.shape[0] != G.shape[1]:
            raise InputError(f"a full-grid kernel must have shape (F, F, {h}, "
                             f"{w}), got {G.shape}")
        if not np.isfinite(G).all():
            raise InputError("kernel has NaN or Inf entries")
        if boundary != "periodic":
            raise InputError("a full-grid kernel describes a torus; use "
                             "boundary='periodic'")
    else:
        K = check_kernel(K, (h, w), boundary)
        G = full_grid(K, (h, w)) if boundary == "periodic" else None
    F = (G if G is not None else K).shape[0]
    n = F * h * w
    settings = SolverSettings.resolve((n, n), lam=lam, tol=tol,
                                      max_iter=max_iter, stop="residuals")
    lam, tol = settings.lam, settings.tol
    if boundary == "zero":
        return robust_pca(expand(K, (h, w), "zero"), lam=lam, tol=tol,
                          max_iter=max_iter, rho=rho, progress=progress,
                          seed=seed, stop="residuals")
    with blas_threads(G.shape[:2]):  # many small F x F blocks
        L, S, _, info = kernel_ialm(G, lam, tol=tol, max_iter=settings.max_iter,
                                    rho=rho, callback=progress)
    objective = nuclear_norm(L) + lam * h * w * float(np.abs(S).sum())
    dec = KernelDecomposition(low_rank=L, sparse=S, ranks=info["ranks"],
                              lam=lam, objective=objective,
                              n_iter=info["n_iter"], converged=info["converged"],
                              grid=(h, w), history=tuple(info["history"]))
    if not dec.converged:
        warn_stopped("kernel robust PCA", dec.n_iter)
    return dec
