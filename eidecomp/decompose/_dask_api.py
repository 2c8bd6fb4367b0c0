"""robust_pca_dask: the same PCP on a Dask cluster (the ``dist`` extra)."""

import warnings
from dataclasses import dataclass, field

import numpy as np

from ..errors import ConvergenceWarning, InputError

__all__ = ["DaskDecomposition", "robust_pca_dask"]


@dataclass(frozen=True)
class DaskDecomposition:
    """PCP on a cluster: L as its factors, S as a (computed) dask array.

    ``low_rank_factors`` is (U, s, Vt) with L = (U * s) @ Vt; ``sparse`` is
    a dask array held on the cluster until the client closes, so write it
    (``sparse.to_zarr``, ``dask.array.store``) or compute it before.
    """

    low_rank_factors: tuple
    sparse: object
    rank: int
    lam: float
    n_iter: int
    converged: bool
    history: tuple = field(default=(), repr=False)

    def low_rank(self):
        U, s, Vt = self.low_rank_factors
        return (U * s) @ Vt


def _load_block(path, rows, cols, dtype):
    """One block of a .npy file, read by a worker through a memory map."""
    arr = np.load(path, mmap_mode="r", allow_pickle=False)
    return np.array(arr[rows[0]:rows[1], cols[0]:cols[1]], dtype=dtype)


def _open(W, chunks, dtype):
    """W as a dask array; a .npy path is read lazily, block by block, by the
    workers themselves (nothing of it passes through this process)."""
    import dask
    import dask.array as da

    if isinstance(W, (str, bytes)) or hasattr(W, "__fspath__"):
        from pathlib import Path

        path = Path(W)
        if path.suffix != ".npy" or not path.is_file():
            raise InputError(f"{path}: the dask engine reads a .npy file "
                             "(memory-mapped, never loaded whole)")
        try:
            head = np.load(path, mmap_mode="r", allow_pickle=False)
        except ValueError as exc:
            raise InputError(f"{path}: not a readable .npy array ({exc})") from None
        if head.ndim != 2:
            raise InputError(f"{path}: W must be 2-D, got shape {head.shape}")
        m, n = head.shape
        del head
        cr, cc = chunks
        rows = [(i, min(i + cr, m)) for i in range(0, m, cr)]
        cols = [(j, min(j + cc, n)) for j in range(0, n, cc)]
        load = dask.delayed(_load_block, pure=True)
        return da.block([[da.from_delayed(load(str(path), r, c, dtype),
                                          (r[1] - r[0], c[1] - c[0]), dtype=dtype)
                          for c in cols] for r in rows])
    if not hasattr(W, "chunks"):
        W = da.from_array(np.asarray(W), chunks=chunks)
    if W.ndim != 2:
        raise InputError(f"W must be 2-D, got shape {W.shape}")
    return W.astype(dtype)


def robust_pca_dask(W, *, lam=None, tol=None, max_iter=5000, dtype="float64",
                    scheduler=None, n_workers=2, memory_limit="auto",
                    chunks=(2000, 2000), seed=0, progress=None, client=None,
                    sparse_out=None):
    """Robust PCA of W on a Dask cluster.

    Parameters
    ----------
    W : path to a .npy file, numpy array or dask array
        A .npy file is memory-mapped and read chunk by chunk by the workers.
    scheduler : str or None
        Address of a running scheduler; None starts a local cluster of
        ``n_workers`` single-threaded workers with ``memory_limit`` each.
    client : distributed.Client or None
        Use this client instead (it is not closed, and ``sparse`` stays a
        dask array on it).
    sparse_out : path or None
        Write S there as a .npy file, chunk by chunk from the workers
        (``dask.array.store`` into a memory-mapped file); ``sparse`` is then
        that memory-mapped array. Otherwise S is computed into memory.

    Returns
    -------
    DaskDecomposition

    Examples
    --------
    >>> from eidecomp.datasets import make_planted
    >>> W, L0, _ = make_planted(300, seed=1)
    >>> dec = robust_pca_dask(W, chunks=(150, 150))  # doctest: +SKIP
    >>> dec.rank                                      # doctest: +SKIP
    15
    """
    from distributed import Client, LocalCluster

    from ._dask import dask_ialm

    dt = {"float64": np.float64, "float32": np.float32}.get(str(dtype))
    if dt is None:
        raise InputError(f"dtype must be float64 or float32, got {dtype!r}")
    tol = (1e-6 if dt is np.float32 else 1e-8) if tol is None else tol
    own = client is None
    cluster = None
    if own:
        if scheduler:
            client = Client(scheduler)
        else:
            cluster = LocalCluster(n_workers=n_workers, threads_per_worker=1,
                                   memory_limit=memory_limit,
                                   dashboard_address=None)
            client = Client(cluster)
    try:
        Wd = _open(W, chunks, dt)
        lam = 1.0 / np.sqrt(max(Wd.shape)) if lam is None else float(lam)
        U, s, Vt, S, info = dask_ialm(Wd, lam, tol=tol, max_iter=max_iter,
                                      seed=seed, callback=progress)
        if sparse_out is not None:
            # row block by row block through this process: the workers
            # cannot write into a memory map that lives here
            out = np.lib.format.open_memmap(sparse_out, mode="w+", dtype=dt,
                                            shape=S.shape)
            start = 0
            for rows in S.chunks[0]:
                out[start:start + rows] = S[start:start + rows].compute()
                start += rows
            out.flush()
            del out
            S = np.load(sparse_out, mmap_mode="r")
        elif own:
            S = S.compute()
        dec = DaskDecomposition(low_rank_factors=(U, s, Vt), sparse=S,
                                rank=len(s), lam=lam, n_iter=info["n_iter"],
                                converged=info["converged"],
                                history=tuple(info["history"]))
    finally:
        if own:
            client.close()
            if cluster is not None:
                cluster.close()
    if not dec.converged:
        warnings.warn(f"dask robust PCA stopped after {dec.n_iter} iterations "
                      "before reaching its tolerance", ConvergenceWarning,
                      stacklevel=2)
    return dec
