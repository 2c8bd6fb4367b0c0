"""The dask engine against the in-memory one.

Reference: eidecomp's in-memory ALM (checked against cvxpy and tensorly in
their suites) on the same planted matrix (Candes et al. 2011 setting); the
dask engine runs on a local distributed cluster of two workers (the dist
extra, installed by .ci/run).
"""

import json

import numpy as np
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
