"""HALS with dense untuned and sparse tuned components.

References: the Karush-Kuhn-Tucker conditions of nonnegative least squares
(Gillis 2014, "The why and how of nonnegative matrix factorization",
section 3.1: at a minimiser the gradient is zero where a factor is positive
and nonnegative where it is zero), evaluated with numpy; scipy.sparse and
numpy products for the path matrix and the objective; the one-at-a-time
dense sweep (eidecomp.assemble._nmf.sweep), whose iterates the split sweep
must reproduce.
"""

from importlib import import_module

import numpy as np
import pytest
from scipy import sparse

from eidecomp.assemble._nmf import nndsvd, sweep
from eidecomp.assemble._split_hals import (
    hals_split,
    objective_split,
    paths,
    sweep_split,
)

split = import_module("eidecomp.assemble._split_hals")


@pytest.fixture(autouse=True)
def sparse_path(monkeypatch):
    """These small problems take the sparse path under test (below
    SPARSE_MIN_UNITS the sweep would hand them to the dense one)."""
    monkeypatch.setattr(split, "SPARSE_MIN_UNITS", 0)


def _problem(seed, m=40, n=35, k=7, density=0.3):
    rng = np.random.default_rng(seed)
    M = rng.random((m, n)) * (rng.random((m, n)) < density)
    A, B = nndsvd(M, k)
    return M, A + 0.01, B + 0.01, rng


@pytest.mark.parametrize("seed", [0, 1, 2])
@pytest.mark.parametrize("as_sparse", [False, True])
def test_tuned_sweeps_reproduce_the_dense_sweep(seed, as_sparse):
    M, A0, B0, _ = _problem(seed)
    A1, B1, A2, B2 = A0.copy(), B0.copy(), A0.copy(), B0.copy()
    Mx = sparse.csr_matrix(M) if as_sparse else M
    for _ in range(10):
        sweep(M, A1, B1, l1_a=0.01, l1_b=0.01)
        sweep_split(Mx, A2, B2, 0, l1=0.01)
    assert np.abs(A1 - A2).max() <= 1e-12
    assert np.abs(B1 - B2).max() <= 1e-12


@pytest.mark.parametrize("seed", [3, 4])
def test_mixed_components_with_masks_reproduce_the_dense_sweep(seed):
    M, A0, B0, rng = _problem(seed)
    M = rng.standard_normal(M.shape)          # the refinement fits a signed M
    ma = rng.random(A0.shape) < 0.5
    mb = rng.random(B0.shape) < 0.5
    ma[:, :2], mb[:2] = True, True            # two dense (untuned) components
    A1, B1 = A0 * ma, B0 * mb
    A2, B2 = A1.copy(), B1.copy()
    for _ in range(10):
        sweep(M, A1, B1, mask_a=ma, mask_b=mb)
        sweep_split(M, A2, B2, 2, mask_a=ma, mask_b=mb)
    assert np.abs(A1 - A2).max() <= 1e-12
    assert np.abs(B1 - B2).max() <= 1e-12
    assert not (A2[~ma]).any() and not (B2[~mb]).any()
    assert np.abs(paths(A2, B2, 2) - A2 @ B2).max() <= 1e-12   # numpy


@pytest.mark.parametrize("as_sparse", [False, True])
def test_converged_factors_meet_the_kkt_conditions(as_sparse):
    M, A0, B0, _ = _problem(5)
    l1 = 0.02
    Mx = sparse.csr_matrix(M) if as_sparse else M
    A, B, info = hals_split(Mx, A0, B0, 0, l1=l1, max_iter=5000, tol=1e-13)
    assert info["converged"]
    h = np.asarray(info["history"])
    assert (np.diff(h) <= 1e-12 * h[0]).all()          # never increases
    R = A @ B - M                                       # numpy gradient
    gA, gB = R @ B.T + l1, A.T @ R + l1
    scale = np.abs(M).max() * max(np.abs(A).max(), np.abs(B).max())
    assert np.abs(gA[A > 0]).max() <= 1e-5 * scale
    assert np.abs(gB[B > 0]).max() <= 1e-5 * scale
    assert gA[A == 0].min() >= -1e-5 * scale
    assert gB[B == 0].min() >= -1e-5 * scale
    direct = 0.5 * np.linalg.norm(M - A @ B) ** 2 + l1 * (A.sum() + B.sum())
    assert objective_split(Mx, A, B, 0, l1) == pytest.approx(direct, rel=1e-10)
