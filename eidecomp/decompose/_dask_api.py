"""robust_pca_dask: the same PCP on a Dask cluster (the ``dist`` extra)."""

import shutil
import tempfile
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import InputError, warn_stopped
from ..params import SolverSettings, resolve_dtype
from ._svt import reported_rank

__all__ = ["DaskDecomposition", "robust_pca_dask"]


@dataclass(frozen=True)
class DaskDecomposition:
    """PCP on a cluster: L as its factors, S as an array on disk or in memory.

    ``low_rank_factors`` is (U, s, Vt) with L = (U * s) @ Vt; ``sparse`` is
    the memory-mapped ``sparse_out`` file when one was given, else a numpy
    array.
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


def _source(W, workdir, chunks):
    """(source, shape) for the workers: a .npy file or zarr array is read
    where it is; an in-memory or dask array is first written, block by
    block, to W.npy in the work folder."""
    if isinstance(W, (str, bytes)) or hasattr(W, "__fspath__"):
        path = Path(W)
        if path.suffix == ".npy" and path.is_file():
            try:
                head = np.load(path, mmap_mode="r", allow_pickle=False)
            except ValueError as exc:
                raise InputError(f"{path}: not a readable .npy array "
                                 f"(object arrays are refused; {exc})") from None
            shape, kind = head.shape, head.dtype.kind
            del head
        elif path.suffix == ".zarr" and path.exists():
            try:
                import zarr
            except ImportError:
                raise InputError(f"{path}: reading zarr needs the dist extra: "
                                 "pip install 'eidecomp[dist]'") from None
            try:
                head = zarr.open_array(str(path), mode="r")
            except Exception as exc:  # zarr raises several kinds
                raise InputError(f"{path}: not a readable zarr array ({exc})") from None
            shape, kind = head.shape, head.dtype.kind
        else:
            raise InputError(f"{path}: the dask engine reads a .npy file or a "
                             ".zarr array (never loaded whole)")
        if len(shape) != 2:
            raise InputError(f"{path}: W must be 2-D, got shape {shape}")
        if kind not in "fiu":
            raise InputError(f"{path}: W must be numeric, got dtype kind {kind!r}")
        return str(path), shape
    if W.ndim != 2:
        raise InputError(f"W must be 2-D, got shape {W.shape}")
    target = Path(workdir) / "W.npy"
    out = np.lib.format.open_memmap(target, mode="w+", dtype=np.float64,
                                    shape=W.shape)
    for start in range(0, W.shape[0], chunks[0]):
        block = W[start:start + chunks[0]]
        out[start:start + chunks[0]] = np.asarray(
            block.compute() if hasattr(block, "compute") else block)
    out.flush()
    del out
    return str(target), W.shape


LOCAL_WORKERS = 2
"""Workers of the local cluster started when no scheduler is given (one per
core of the project's 2-core machine), each single-threaded."""


def robust_pca_dask(W, *, lam=None, tol=None, max_iter=None, dtype="float64",
                    scheduler=None, n_workers=LOCAL_WORKERS, memory_limit="auto",
                    chunks=(2000, 2000), seed=0, progress=None, client=None,
                    sparse_out=None, workdir=None):
    """Robust PCA of W on a Dask cluster, with no N x N array in memory.

    W is read block by block by the workers; S and the multiplier Y live in
    ``.npy`` files of a work folder (see ``_dask.py``), so each worker holds
    a few ``chunks``-sized blocks at a time whatever the size of W.

    Parameters
    ----------
    W : path to a .npy file or a .zarr array, numpy array or dask array
        A file is read where it is, block by block, by the workers; an
        array is first written to the work folder.
    scheduler : str or None
        Address of a running scheduler; None starts a local cluster of
        ``n_workers`` single-threaded workers with ``memory_limit`` each.
    client : distributed.Client or None
        Use this client instead (it is not closed).
    sparse_out : path or None
        Keep S there, as a .npy file (moved from the work folder at the end);
        ``sparse`` is then that file memory-mapped. Otherwise S is loaded
        into memory.
    workdir : path or None
        Where S and Y live during the run (4 files of the size of W, in
        ``dtype``); by default a temporary folder beside ``sparse_out``, or
        in the system's temporary folder. Every worker must see it at the
        same path (shared storage for a remote cluster). Removed at the end.

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

    from ._dask import BlockStore, dask_ialm

    dt = resolve_dtype(dtype)
    if workdir is None and sparse_out is not None:
        workdir = Path(sparse_out).resolve().parent
    work = Path(tempfile.mkdtemp(prefix=".eidecomp-dask-", dir=workdir))
    own = client is None
    cluster = None
    try:
        source, shape = _source(W, work, chunks)
        if own:
            if scheduler:
                client = Client(scheduler)
            else:
                cluster = LocalCluster(n_workers=n_workers, threads_per_worker=1,
                                       memory_limit=memory_limit,
                                       dashboard_address=None)
                client = Client(cluster)
        store = BlockStore(source, shape, dt, chunks, work)
        settings = SolverSettings.resolve(shape, lam=lam, tol=tol,
                                          max_iter=max_iter, dtype=dtype,
                                          stop="residuals")
        lam = settings.lam
        U, s, Vt, s_path, info = dask_ialm(store, lam, tol=settings.tol,
                                           max_iter=settings.max_iter, seed=seed,
                                           callback=progress)
        if sparse_out is not None:
            shutil.move(s_path, sparse_out)
            S = np.load(sparse_out, mmap_mode="r")
        else:
            S = np.load(s_path)
        dec = DaskDecomposition(low_rank_factors=(U, s, Vt), sparse=S,
                                rank=reported_rank(s, dt)[0], lam=lam,
                                n_iter=info["n_iter"],
                                converged=info["converged"],
                                history=tuple(info["history"]))
    finally:
        if own and client is not None:
            client.close()
            if cluster is not None:
                cluster.close()
        shutil.rmtree(work, ignore_errors=True)
    if not dec.converged:
        warn_stopped("dask robust PCA", dec.n_iter)
    return dec
