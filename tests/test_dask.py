"""The dask engine against the in-memory one.

Reference: eidecomp's in-memory ALM (checked against cvxpy and tensorly in
their suites) on the same planted matrix (Candes et al. 2011 setting); the
dask engine runs on a local distributed cluster of decompose.LOCAL_WORKERS
workers (the dist extra, installed by .ci/run).
"""

import json

import numpy as np
import pytest
from conftest import require

from eidecomp import robust_pca
from eidecomp.cli import main
from eidecomp.datasets import make_planted


def test_dask_engine_agrees_with_in_memory_at_2000(tmp_path):
    require("distributed")
    from eidecomp.decompose import robust_pca_dask

    W, L0, _ = make_planted(2000, seed=0)
    ref = robust_pca(W)
    np.save(tmp_path / "w.npy", W)
    dec = robust_pca_dask(tmp_path / "w.npy", chunks=(1000, 1000),
                          sparse_out=tmp_path / "s.npy")
    assert dec.converged and dec.rank == ref.rank == 100
    L = dec.low_rank()
    assert np.linalg.norm(L - ref.low_rank) / np.linalg.norm(ref.low_rank) < 1e-6
    S = np.load(tmp_path / "s.npy")
    assert np.linalg.norm(S - ref.sparse) / np.linalg.norm(ref.sparse) < 1e-6


def test_dask_command(tmp_path, capsys):
    require("distributed")
    W, _, _ = make_planted(300, seed=1)
    np.save(tmp_path / "w.npy", W)
    out = tmp_path / "o"
    assert main(["decompose", str(tmp_path / "w.npy"), "-o", str(out), "-q",
                 "--engine", "dask"]) == 0
    U, s, Vt = (np.load(out / f"low_rank_{x}.npy") for x in ("U", "s", "Vt"))
    ref = robust_pca(W)
    np.testing.assert_allclose((U * s) @ Vt, ref.low_rank, atol=1e-6)
    summary = json.loads((out / "summary.json").read_text())
    assert summary["engine"]["name"] == "dask" and summary["converged"]
    capsys.readouterr()
    assert main(["decompose", str(tmp_path / "w.npy"), "-o", str(tmp_path / "x"),
                 "-q", "--engine", "dask", "--ignore-diagonal"]) == 2
    assert "plain PCP" in capsys.readouterr().err
    assert not (tmp_path / "x").exists()


def test_dask_engine_reads_zarr_and_keeps_nothing_in_the_work_folder(tmp_path):
    """Reference: the in-memory ALM on the same matrix, stored by zarr (the
    dist extra) in its own format; the work folder of S and Y is removed."""
    require("distributed")
    zarr = require("zarr")
    from eidecomp.decompose import robust_pca_dask

    W, _, _ = make_planted(240, seed=2)
    z = zarr.open_array(str(tmp_path / "w.zarr"), mode="w", shape=W.shape,
                        chunks=(100, 100), dtype="f8")
    z[:] = W
    work = tmp_path / "work"
    work.mkdir()
    dec = robust_pca_dask(tmp_path / "w.zarr", chunks=(100, 100), workdir=work)
    ref = robust_pca(W)
    assert dec.converged and dec.rank == ref.rank
    np.testing.assert_allclose(dec.low_rank(), ref.low_rank, atol=1e-6)
    np.testing.assert_allclose(dec.sparse, ref.sparse, atol=1e-6)
    assert list(work.iterdir()) == []


def test_dask_engine_refuses_nan_and_object_arrays(tmp_path):
    require("distributed")
    from eidecomp.decompose import robust_pca_dask
    from eidecomp.errors import InputError

    W = np.ones((50, 50))
    W[3, 4] = np.nan
    np.save(tmp_path / "nan.npy", W)
    with pytest.raises(InputError, match="NaN or Inf"):
        robust_pca_dask(tmp_path / "nan.npy", chunks=(25, 25))
    np.save(tmp_path / "obj.npy", np.array([[{"a": 1}]], dtype=object))
    with pytest.raises(InputError, match="object arrays are refused"):
        robust_pca_dask(tmp_path / "obj.npy")


def test_wide_cold_starts_orthonormalise_here(monkeypatch):
    """The range finder used when dask's tsqr would need too much memory on
    one worker (forced here at N = 300) gives the in-memory solution."""
    require("distributed")
    from eidecomp.decompose import _dask, robust_pca_dask

    monkeypatch.setattr(_dask, "_TSQR_BYTES", 0)
    W, _, _ = make_planted(300, seed=4)
    dec = robust_pca_dask(W, chunks=(150, 150))
    ref = robust_pca(W)
    assert dec.converged and dec.rank == ref.rank
    np.testing.assert_allclose(dec.low_rank(), ref.low_rank, atol=1e-6)


def test_dask_engine_refuses_magnitudes_it_cannot_square(tmp_path):
    """The same limits as the readers (docs/reliability.md)."""
    require("distributed")
    from eidecomp.decompose import robust_pca_dask
    from eidecomp.errors import InputError

    W = np.ones((40, 40))
    W[30, 7] = 1e200
    np.save(tmp_path / "big.npy", W)
    with pytest.raises(InputError, match=r"value 1e\+200 at row 30, column 7 is "
                       "too large"):
        robust_pca_dask(tmp_path / "big.npy", chunks=(20, 20))
    W[30, 7] = 5e-320
    np.save(tmp_path / "sub.npy", W)
    with pytest.raises(InputError, match="1 subnormal value"):
        robust_pca_dask(tmp_path / "sub.npy", chunks=(20, 20))
