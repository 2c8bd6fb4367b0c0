"""HALS with dense untuned and sparse tuned components.

References: the Karush-Kuhn-Tucker conditions of nonnegative least squares
(Gillis 2014, "The why and how of nonnegative matrix factorization",
section 3.1, from memory: at a minimiser the gradient is zero where a factor is positive
and nonnegative where it is zero), evaluated with numpy; scipy.sparse and
numpy products for the path matrix and the objective; plain HALS written
out in numpy here, one component at a time in the order the mixed sweep
reports, whose iterates the mixed sweep must reproduce (its tuned
components go a colour class of non-overlapping components at a time).
"""

from importlib import import_module

import numpy as np
import pytest
from scipy import sparse

from eidecomp.assemble._mixed_hals import (
    hals_mixed,
    objective_mixed,
    paths,
    sweep_mixed,
    update_order,
)
from eidecomp.assemble._nmf import nndsvd

mixed = import_module("eidecomp.assemble._mixed_hals")


@pytest.fixture(autouse=True)
def sparse_path(monkeypatch):
    """These small problems take the sparse path under test (below
    SPARSE_MIN_UNITS the sweep would hand them to the dense one)."""
    monkeypatch.setattr(mixed, "SPARSE_MIN_UNITS", 0)


def _problem(seed, m=40, n=35, k=7, density=0.3):
    rng = np.random.default_rng(seed)
    M = rng.random((m, n)) * (rng.random((m, n)) < density)
    A, B = nndsvd(M, k)
    return M, A + 0.01, B + 0.01, rng


def _reference_sweep(M, A, B, n_u, l1, mask_a, mask_b, order_a, order_b):
    """Plain HALS in numpy (Gillis 2014, section 3.1.3, from memory): one
    column of A, then one row of B, at a time, in the given orders, each set
    to the exact
    minimiser max((M B^T - A B B^T + a_j g_jj - l1)_j / g_jj, 0); then the
    pairs rescaled as the mixed sweep does (equal norms untuned, equal sums
    tuned: the product is unchanged)."""
    k = A.shape[1]
    l1s = np.r_[np.zeros(n_u), np.full(k - n_u, l1)]

    def half(P, X, G, order, mask):
        dead = 1e-12 * G.diagonal().max()
        for j in order:
            d = G[j, j]
            if d <= dead or d == 0:
                continue
            col = np.maximum((P[:, j] - X @ G[:, j] + X[:, j] * d - l1s[j]) / d,
                             0.0)
            X[:, j] = col if mask is None else col * mask[:, j]

    half(M @ B.T, A, B @ B.T, order_a, mask_a)
    Bt = B.T
    half(M.T @ A, Bt, A.T @ A, order_b, None if mask_b is None else mask_b.T)
    na, nb = np.linalg.norm(A, axis=0), np.linalg.norm(B, axis=1)
    if l1 > 0:
        na[n_u:], nb[n_u:] = A[:, n_u:].sum(axis=0), B[n_u:].sum(axis=1)
    ok = (na > 0) & (nb > 0)
    f = np.ones(k)
    f[ok] = np.sqrt(nb[ok] / na[ok])
    A *= f
    B /= f[:, None]


def _orders(cache, n_u):
    return (np.r_[np.arange(n_u), n_u + update_order(cache["a"])].astype(int),
            np.r_[np.arange(n_u), n_u + update_order(cache["b"])].astype(int))


@pytest.mark.parametrize("seed", [0, 1, 2])
@pytest.mark.parametrize("as_sparse", [False, True])
@pytest.mark.parametrize("n_u, l1", [(0, 0.01), (1, 0.3), (3, 0.3)])
def test_tuned_sweeps_reproduce_plain_hals(seed, as_sparse, n_u, l1):
    # one cache from sweep to sweep, as the assembler keeps it; a large l1
    # empties components, which plain HALS then leaves as they are
    M, A0, B0, _ = _problem(seed)
    A1, B1, A2, B2 = A0.copy(), B0.copy(), A0.copy(), B0.copy()
    Mx = sparse.csr_matrix(M) if as_sparse else M
    cache, parts = {}, (None, None)
    for _ in range(10):
        parts = sweep_mixed(Mx, A2, B2, n_u, l1=l1, A_sp=parts[0],
                            B_sp=parts[1], cache=cache)
        _reference_sweep(M, A1, B1, n_u, l1, None, None, *_orders(cache, n_u))
    assert np.abs(A1 - A2).max() <= 1e-12
    assert np.abs(B1 - B2).max() <= 1e-12


def test_a_component_that_dies_keeps_its_other_factor():
    # plain HALS skips a component whose Gram diagonal is zero (its B row
    # emptied by l1) and leaves its A column; a colouring kept from the
    # previous sweep must not zero it (four disjoint blocks, the last faint)
    m = 40
    M, A, B = np.zeros((m, m)), np.zeros((m, 4), order="F"), np.zeros((4, m))
    for j, (lo, v) in enumerate(((0, 1.0), (10, 1.5), (20, 1.5), (30, 0.1))):
        M[lo:lo + 10, lo:lo + 10] = v
        A[lo:lo + 10, j] = 1.0
        B[j, lo:lo + 10] = 100.0 if j == 3 else 1.0
    cache = {}
    parts = sweep_mixed(M, A, B, 1, l1=0.5, cache=cache)
    assert not B[3].any() and A[:, 3].any()          # dead after sweep 1
    kept = A[:, 3].copy()
    sweep_mixed(M, A, B, 1, l1=0.5, A_sp=parts[0], B_sp=parts[1], cache=cache)
    np.testing.assert_array_equal(A[:, 3], kept)
    assert 3 - 1 not in update_order(cache["a"])   # tuned index of component 3


@pytest.mark.parametrize("seed", [3, 4])
def test_mixed_components_with_masks_reproduce_plain_hals(seed):
    M, A0, B0, rng = _problem(seed)
    M = rng.standard_normal(M.shape)          # the refinement fits a signed M
    ma = rng.random(A0.shape) < 0.5
    mb = rng.random(B0.shape) < 0.5
    ma[:, :2], mb[:2] = True, True            # two dense (untuned) components
    A1, B1 = A0 * ma, B0 * mb
    A2, B2 = A1.copy(), B1.copy()
    for _ in range(10):
        cache = {}
        sweep_mixed(M, A2, B2, 2, mask_a=ma, mask_b=mb, cache=cache)
        _reference_sweep(M, A1, B1, 2, 0.0, ma, mb, *_orders(cache, 2))
    assert np.abs(A1 - A2).max() <= 1e-12
    assert np.abs(B1 - B2).max() <= 1e-12
    assert not (A2[~ma]).any() and not (B2[~mb]).any()
    assert np.abs(paths(A2, B2, 2) - A2 @ B2).max() <= 1e-12   # numpy


def test_pool_structured_factors_update_a_class_at_a_time():
    """Tuned components on a ring, each overlapping its neighbours only (as
    planted pools do): a few colour classes, no two overlapping components
    in one, and the sweep equals plain HALS in that order."""
    rng = np.random.default_rng(7)
    m, k, n_u = 120, 30, 2
    A0, B0 = np.zeros((m, k)), np.zeros((k, m))
    A0[:, :n_u], B0[:n_u] = rng.random((m, n_u)), rng.random((n_u, m))
    for t in range(n_u, k):
        c = 4 * t
        A0[(c + np.arange(8)) % m, t] = rng.uniform(0.5, 1.5, 8)
        B0[t, (c + 60 + np.arange(8)) % m] = rng.uniform(0.5, 1.5, 8)
    M = A0 @ B0 + 0.05 * rng.standard_normal((m, m))
    ma, mb = A0 > 0, B0 > 0
    A1, B1 = A0 * 0.8 + ma * 0.1, B0 * 1.1
    A2, B2 = A1.copy(), B1.copy()
    for _ in range(5):
        cache = {}
        sweep_mixed(M, A2, B2, n_u, mask_a=ma, mask_b=mb, l1=0.01,
                    cache=cache)
        _reference_sweep(M, A1, B1, n_u, 0.01, ma, mb, *_orders(cache, n_u))
        for key, G in (("a", B2[n_u:] @ B2[n_u:].T),
                       ("b", A2[:, n_u:].T @ A2[:, n_u:])):
            colour = cache[key]
            assert 1 < colour.max() + 1 <= 4
            same = colour[:, None] == colour[None, :]
            np.fill_diagonal(same, False)
            # the sweep coloured the Gram matrix before this sweep's update;
            # the supports are fixed by the masks, so the pattern is the same
            assert not (same & (G > 0)).any()
    assert np.abs(A1 - A2).max() <= 1e-12
    assert np.abs(B1 - B2).max() <= 1e-12


@pytest.mark.parametrize("as_sparse", [False, True])
def test_converged_factors_meet_the_kkt_conditions(as_sparse):
    M, A0, B0, _ = _problem(5)
    l1 = 0.02
    Mx = sparse.csr_matrix(M) if as_sparse else M
    A, B, info = hals_mixed(Mx, A0, B0, 0, l1=l1, max_iter=5000, tol=1e-13)
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
    assert objective_mixed(Mx, A, B, 0, l1) == pytest.approx(direct, rel=1e-10)


def _dense_pools(seed, m=60, k=12, n_u=2):
    """Tuned components whose pools hold every unit, as interneurons started
    again on a dense residual do: the case the cost model sends to the
    dense sweep."""
    rng = np.random.default_rng(seed)
    M = rng.random((m, m))
    return M, rng.random((m, k)), rng.random((k, m)), n_u


def test_the_cost_model_sends_dense_pools_to_plain_hals():
    """With ``by_cost`` a sweep over dense tuned pools is plain HALS in
    index order (the reference sweep written out here, no l1: the dense
    sweep weighs every component alike), and one over ring pools keeps the
    class order of the sparse path."""
    M, A0, B0, n_u = _dense_pools(3)
    assert mixed.dense_pays(A0, B0, n_u)
    A1, B1, A2, B2 = A0.copy(), B0.copy(), A0.copy(), B0.copy()
    order = np.arange(A0.shape[1])
    for _ in range(5):
        sweep_mixed(M, A2, B2, n_u, by_cost=True)
        _reference_sweep(M, A1, B1, n_u, 0.0, None, None, order, order)
    assert np.abs(A1 - A2).max() <= 1e-12
    assert np.abs(B1 - B2).max() <= 1e-12


def _ring_pools(seed, m=600, k=150, n_u=2):
    """Tuned pools of 8 neighbours on a ring, as planted sheets have."""
    rng = np.random.default_rng(seed)
    A, B = np.zeros((m, k)), np.zeros((k, m))
    A[:, :n_u], B[:n_u] = rng.random((m, n_u)), rng.random((n_u, m))
    for t in range(n_u, k):
        A[(4 * t + np.arange(8)) % m, t] = rng.uniform(0.5, 1.5, 8)
        B[t, (4 * t + 300 + np.arange(8)) % m] = rng.uniform(0.5, 1.5, 8)
    return A, B, n_u


def test_the_cost_model_keeps_ring_pools_sparse():
    rng = np.random.default_rng(4)
    A, B, n_u = _ring_pools(4)
    m, k = A.shape
    assert not mixed.dense_pays(A, B, n_u)
    A[:, n_u:] = rng.random((m, k - n_u))       # the same sizes, pools dense
    assert mixed.dense_pays(A, B, n_u)


@pytest.mark.parametrize("dense", [False, True])
def test_paths_is_the_product_numpy(dense):
    """A B from paths, on either of its routes (sparse tuned product added
    to the untuned one, or one BLAS call for dense tuned parts), against
    numpy's product."""
    A, B, n_u = _dense_pools(6)[1:] if dense else _ring_pools(6)
    assert mixed.dense_pays(A, B, n_u) == dense   # the route under test
    np.testing.assert_allclose(paths(A, B, n_u), A @ B, rtol=0, atol=1e-12)
