"""The inexact ALM of _ialm.py on a Dask cluster, for matrices beyond one
machine's memory (imported only when the dask engine is asked for).

The iteration, its stopping rule (primal and dual residuals) and its
penalty schedule are those of _ialm.py; what changes is where the arrays
live. None of the three N x N arrays is held in memory, on the workers or
here:

- W is read block by block by the workers from its file (a memory-mapped
  ``.npy`` or a zarr array);
- S and the multiplier Y live in ``.npy`` files of a work folder, two
  buffers each: iteration k reads buffer k % 2 and writes buffer
  (k + 1) % 2, block by block, so a task retried after a lost worker
  reads the same inputs and writes the same outputs;
- L is never stored: it is kept as its factors U s V^T (n x r, small) and
  rebuilt block by block where it is needed.

A worker therefore holds a few blocks at a time (W, S, Y and one result),
whatever N is. The SVT reads T = W + Y / mu - S as a chunked dask array of
such block tasks. It uses dask's randomized SVD
(``dask.array.linalg.svd_compressed``, Halko et al. 2011, with power
iterations, input recomputed at each pass) to start, and whenever the rank
outgrows the kept subspace; beyond a width whose tall factor exceeds 64 MB,
the same range finder with its QR done here instead (dask's tsqr stacks
the R factors, width^2 each, on one worker: at N = 20,000 in the first
iterations, whose rank is about 5 % of N, that killed 1.5 GB workers). In
between, one warm-started subspace iteration
from the previous right singular vectors, as in the in-memory engine (a
fresh random start every iteration leaves the SVT too inexact for the ALM
to reach 1e-8: measured, a stall near 1e-5). The rank follows the iterates
and grows (x3) until the last computed singular value falls below the
threshold.
"""

from pathlib import Path

import numpy as np

from ..errors import InputError
from ..limits import range_error
from ..params import MAX_ITER, TOL
from ._ialm import _MU_MAX_FACTOR, end_step, next_rank
from ._svt import numerical_rank

__all__ = ["BlockStore", "dask_ialm", "read_block"]


# ---- run on the workers: plain functions of paths and blocks ------------

def read_block(source, rows, cols, dtype):
    """Rows [r0, r1) and columns [c0, c1) of a .npy file (memory-mapped,
    only the block read) or of a zarr array, as a new array of ``dtype``."""
    if str(source).endswith(".npy"):
        arr = np.load(source, mmap_mode="r", allow_pickle=False)
    else:
        import zarr

        arr = zarr.open_array(source, mode="r")
    block = np.array(arr[rows[0]:rows[1], cols[0]:cols[1]], dtype=dtype)
    del arr
    return block


def _write_block(path, rows, cols, block):
    out = np.load(path, mmap_mode="r+", allow_pickle=False)
    out[rows[0]:rows[1], cols[0]:cols[1]] = block
    out.flush()
    del out


def _residual_block(source, s_path, y_path, rows, cols, inv_mu, dtype):
    """The block of T = W + Y / mu - S."""
    T = read_block(source, rows, cols, dtype)
    T -= read_block(s_path, rows, cols, dtype)
    T += read_block(y_path, rows, cols, dtype) * dtype(inv_mu)
    return T


def _update_block(source, paths, rows, cols, Us, Vt, inv_mu, mu, thr, dtype):
    """One block of the S and Y updates, written to the next buffers.

    Returns the block's contributions to ||S+ - S||^2, ||Y+ - Y||^2 and
    ||Y+||^2 (float64)."""
    s_in, y_in, s_out, y_out = paths
    S = read_block(s_in, rows, cols, dtype)
    Y = read_block(y_in, rows, cols, dtype)
    A = read_block(source, rows, cols, dtype)
    if Us.shape[1]:
        A -= Us @ Vt
    A += Y * dtype(inv_mu)
    C = np.clip(A, -thr, thr)  # A = S+ + C, Y+ = mu C
    A -= C
    C *= dtype(mu)
    dS = A - S
    dY = C - Y
    sums = np.array([np.vdot(dS, dS), np.vdot(dY, dY), np.vdot(C, C)],
                    dtype=np.float64)
    del S, Y, dS, dY
    _write_block(s_out, rows, cols, A)
    _write_block(y_out, rows, cols, C)
    return sums


def _block_scan(source, rows, cols, dtype):
    """A block's squared norm (float64) and its io.range_stats."""
    from ..limits import range_stats

    B = read_block(source, rows, cols, dtype)
    top, (i, j), value, n_sub, first = range_stats(B)
    return (float(np.vdot(B, B)), top, (rows[0] + i, cols[0] + j), value, n_sub,
            None if first is None else (rows[0] + first[0], cols[0] + first[1]))


# ---- the layout, here -----------------------------------------------------

class BlockStore:
    """Where the arrays of one run live: W's source, the four buffers of S
    and Y in ``workdir``, and the block grid over them.

    ``workdir`` must be visible at the same path to every worker (a local
    cluster: any local folder; a remote one: shared storage).
    """

    def __init__(self, source, shape, dtype, chunks, workdir):
        self.source = str(source)
        self.shape = tuple(shape)
        self.dtype = np.dtype(dtype).type
        m, n = self.shape
        cr, cc = chunks
        self.rows = [(i, min(i + cr, m)) for i in range(0, m, cr)]
        self.cols = [(j, min(j + cc, n)) for j in range(0, n, cc)]
        work = Path(workdir)
        self.S = [str(work / f"S{b}.npy") for b in (0, 1)]
        self.Y = [str(work / f"Y{b}.npy") for b in (0, 1)]
        for path in self.S + self.Y:  # zero-filled (sparse files)
            np.lib.format.open_memmap(path, mode="w+", dtype=self.dtype,
                                      shape=self.shape).flush()

    def residual(self, buf, inv_mu):
        """T = W + Y / mu - S as a chunked dask array of block tasks."""
        import dask
        import dask.array as da

        task = dask.delayed(_residual_block, pure=False)
        return da.block([[da.from_delayed(
            task(self.source, self.S[buf], self.Y[buf], r, c, inv_mu, self.dtype),
            (r[1] - r[0], c[1] - c[0]), dtype=self.dtype)
            for c in self.cols] for r in self.rows])

    def update(self, buf, Us, Vt, inv_mu, mu, thr):
        """Write S and Y of buffer 1 - buf from buffer buf; return the three
        squared norms summed over blocks."""
        import dask

        paths = (self.S[buf], self.Y[buf], self.S[1 - buf], self.Y[1 - buf])
        us = [dask.delayed(np.ascontiguousarray(Us[r[0]:r[1]]), pure=False)
              for r in self.rows]
        vt = [dask.delayed(np.ascontiguousarray(Vt[:, c[0]:c[1]]), pure=False)
              for c in self.cols]
        task = dask.delayed(_update_block, pure=False)
        parts = [task(self.source, paths, r, c, us[i], vt[j], inv_mu, mu, thr,
                      self.dtype)
                 for i, r in enumerate(self.rows) for j, c in enumerate(self.cols)]
        return np.sum(dask.compute(*parts), axis=0)

    def scan(self):
        """||W||_F and W's io.range_stats, in one pass over the blocks."""
        import dask

        from ..limits import merge_range_stats

        task = dask.delayed(_block_scan, pure=True)
        parts = dask.compute(*[task(self.source, r, c, self.dtype)
                               for r in self.rows for c in self.cols])
        norm = float(np.sqrt(sum(p[0] for p in parts)))
        return norm, merge_range_stats(p[1:] for p in parts)

    def source_array(self):
        """W as a chunked dask array of block reads."""
        import dask
        import dask.array as da

        task = dask.delayed(read_block, pure=True)
        return da.block([[da.from_delayed(
            task(self.source, r, c, self.dtype),
            (r[1] - r[0], c[1] - c[0]), dtype=self.dtype)
            for c in self.cols] for r in self.rows])


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


_TSQR_BYTES = 64 << 20  # tall factors above this are orthonormalised here


def _subspace_svd(T, V):
    """SVD of T restricted to the range of T V: two passes over T, the
    products on the workers, the small QR and SVD here."""
    import dask.array as da

    Q = _orth(da.dot(T, V).compute())
    B = da.dot(Q.T, T).compute()
    ub, sv, vt = np.linalg.svd(B, full_matrices=False)
    return Q @ ub, sv, vt


def dask_ialm(store, lam, *, tol=TOL["float64"], max_iter=MAX_ITER, rho=1.5,
              n_power_iter=2,
              seed=0, callback=None):
    """PCP of the matrix in ``store`` (a BlockStore).

    Returns (U, s, Vt, s_path, info): L = (U * s) @ Vt as numpy factors,
    and S in the .npy file ``s_path`` of the store's work folder.
    """
    import dask
    import dask.array as da

    dtype = store.dtype
    m, n = store.shape
    norm_W, stats = store.scan()
    problem = None if np.isfinite(stats[0]) else InputError(
        f"{store.source}: W holds NaN or Inf values, or values too large for "
        f"{np.dtype(dtype).name}")
    problem = problem or range_error(store.source, stats, "weight matrix",
                                     base=0, dtype=dtype)
    if problem is not None:
        raise problem
    if norm_W == 0.0:
        return (np.zeros((m, 0), dtype), np.zeros(0, dtype), np.zeros((0, n), dtype),
                store.S[0], {"n_iter": 0, "converged": True, "history": []})
    mu = 1.25 / _spectral_norm(store.source_array(), seed=seed)
    mu_max = mu * _MU_MAX_FACTOR
    k, r = min(10, m, n), 0
    history = []
    converged = polishing = False
    it = buf = 0
    U = s = Vt = V = None
    for it in range(1, max_iter + 1):
        inv_mu = 1.0 / mu
        T = store.residual(buf, inv_mu)
        while True:
            kk = min(k, min(m, n))
            width = min(kk + 10, min(m, n))
            wide = width * max(m, n) * np.dtype(dtype).itemsize > _TSQR_BYTES
            if V is not None and V.shape[1] >= width:
                # warm: one subspace iteration from the last right vectors,
                # as in the in-memory engine (two passes over T)
                u, sv, vt = _subspace_svd(T, V[:, :width].astype(dtype))
            elif wide:
                # cold and wide: the same range finder, orthonormalised here
                # (dask's tsqr would gather the stacked R factors, width^2
                # times the number of row blocks, on one worker)
                rng = np.random.default_rng(seed + it)
                V0 = rng.standard_normal((n, width)).astype(dtype)
                for _ in range(n_power_iter):
                    V0 = _orth(da.dot(T.T, _orth(da.dot(T, V0).compute()))
                               .compute())
                u, sv, vt = _subspace_svd(T, V0)
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
        keep[numerical_rank(sv[keep] - inv_mu, dtype):] = False
        r_prev, r = r, int(keep.sum())
        U = u[:, keep].astype(dtype)
        s = (sv[keep] - inv_mu).astype(dtype)
        Vt = vt[keep].astype(dtype)
        k = next_rank(r_prev, r, min(m, n))
        dS2, dY2, nY2 = store.update(buf, U * s, Vt, inv_mu, mu, lam * inv_mu)
        buf = 1 - buf
        converged, mu, polishing = end_step(
            history, callback, it, r, mu, polishing, np.sqrt(dY2), np.sqrt(dS2),
            np.sqrt(nY2), norm_W, tol=tol, rho=rho, mu_max=mu_max)
        if converged:
            break
    return U, s, Vt, store.S[buf], {"n_iter": it, "converged": converged,
                                    "history": history}
