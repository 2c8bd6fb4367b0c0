"""The inexact ALM of _ialm.py on Dask arrays, for matrices beyond one
machine's memory (imported only when the dask engine is asked for).

The iteration, its stopping rule (primal and dual residuals) and its
penalty schedule are those of _ialm.py; what changes is where the arrays
live. W, S and the multiplier Y are chunked dask arrays (W read lazily, for
example from a memory-mapped .npy); S and Y are persisted on the workers
each iteration, and L is never stored: it is kept as its factors U s V^T
(small, n x r) and rebuilt block by block where it is needed. The SVT uses
dask's randomized SVD (``dask.array.linalg.svd_compressed``, Halko et al.
2011, with power iterations) to start, and whenever the rank outgrows the
kept subspace; in between, one warm-started subspace iteration from the
previous right singular vectors, as in the in-memory engine (a fresh random
start every iteration leaves the SVT too inexact for the ALM to reach
1e-8: measured, a stall near 1e-5). The rank follows the iterates and grows
(x3) until the last computed singular value falls below the threshold.
"""

import numpy as np

from ._ialm import _MU_MAX_FACTOR, next_penalty

__all__ = ["dask_ialm"]


def _spectral_norm(W, iters=30, seed=0):
    import dask.array as da

    n = W.shape[1]
    v = np.random.default_rng(seed).standard_normal(n).astype(W.dtype)
    sigma = 0.0
    for _ in range(iters):
        u = da.dot(W, v)
        v = da.dot(W.T, u).compute()
        nv = float(np.linalg.norm(v))
        if nv == 0:
            return 0.0
        v /= nv
        new = np.sqrt(nv)
        if abs(new - sigma) <= 1e-3 * new:
            return new
        sigma = new
    return sigma


def _orth(P):
    Q, _ = np.linalg.qr(P)
    return Q


def dask_ialm(W, lam, *, tol=1e-8, max_iter=5000, rho=1.5, n_power_iter=2,
              seed=0, callback=None):
    """PCP of a 2-D dask array W; returns (U, s, Vt, S, info).

    L = (U * s) @ Vt (numpy factors); S is a persisted dask array.
    """
    import dask
    import dask.array as da

    dtype = W.dtype
    m, n = W.shape
    norm_W = float(da.linalg.norm(W).compute())
    if norm_W == 0.0:
        z = da.zeros_like(W)
        return (np.zeros((m, 0), dtype), np.zeros(0, dtype), np.zeros((0, n), dtype),
                z, {"n_iter": 0, "converged": True, "history": []})
    mu = 1.25 / _spectral_norm(W, seed=seed)
    mu_max = mu * _MU_MAX_FACTOR
    S = da.zeros_like(W)
    Y = da.zeros_like(W)
    k, r = min(10, m, n), 0
    history = []
    converged = polishing = False
    it = 0
    U = s = Vt = V = None
    for it in range(1, max_iter + 1):
        inv_mu = 1.0 / mu
        T = W + Y * inv_mu - S
        while True:
            kk = min(k, min(m, n))
            width = min(kk + 10, min(m, n))
            if V is not None and V.shape[1] >= width:
                # warm: one subspace iteration from the last right vectors,
                # as in the in-memory engine (two passes over T)
                P = da.dot(T, V[:, :width].astype(dtype)).compute()
                Q = _orth(P)
                B = da.dot(Q.T, T).compute()
                ub, sv, vt = np.linalg.svd(B, full_matrices=False)
                u = Q @ ub
            else:
                # cold: dask's randomized SVD with power iterations
                u, sv, vt = da.linalg.svd_compressed(
                    T, width, n_power_iter=n_power_iter, seed=seed + it,
                    compute=True)
                u, sv, vt = dask.compute(u, sv, vt)
            V = vt.T
            if kk >= min(m, n) or sv[kk - 1] <= inv_mu:
                break
            k, V = 3 * kk, None
        keep = sv > inv_mu
        r_prev, r = r, int(keep.sum())
        U = u[:, keep].astype(dtype)
        s = (sv[keep] - inv_mu).astype(dtype)
        Vt = vt[keep].astype(dtype)
        k = r + 5 + max(5, r // 10) if r >= r_prev else r + 1 + max(2, r // 20)
        L = da.dot(da.from_array(U * s, chunks=(W.chunks[0], -1)),
                   da.from_array(Vt, chunks=(-1, W.chunks[1])))
        A = W - L + Y * inv_mu
        thr = lam * inv_mu
        C = da.clip(A, -thr, thr)
        S_new = A - C
        Y_new = C * mu
        S_new, Y_new = dask.persist(S_new, Y_new)
        dY, dS, nY = dask.compute(da.linalg.norm(Y_new - Y),
                                  da.linalg.norm(S_new - S),
                                  da.linalg.norm(Y_new))
        primal = float(dY) / mu / norm_W
        dual = mu * float(dS) / max(float(nY), np.finfo(dtype).tiny)
        S, Y = S_new, Y_new
        history.append((primal, dual, r, mu))
        if callback is not None:
            callback(it, primal, dual, r, mu)
        if primal < tol and dual < tol:
            converged = True
            break
        mu, polishing = next_penalty(mu, primal, dual, polishing, tol=tol,
                                     rho=rho, mu_max=mu_max)
    return U, s, Vt, S, {"n_iter": it, "converged": converged,
                         "history": history}
