"""Planted recovery, in the setting of Candes, Li, Ma, Wright (2011),
section 4.1 (from memory).

Their Table 1 (from memory of the setting, not of its digits): square n x n,
rank(L0) = 0.05 n with L0 = X Y^T, X, Y ~ N(0, 1/n); 5 % of entries corrupted
by independent random signs; lam = 1/sqrt(n). PCP recovers L0 exactly (their
Theorem 1.1), so the optimum *is* the planted matrix: a solver that reaches the
optimum must return L0 to solver precision and rank exactly 0.05 n.
"""

import numpy as np
import pytest

from eidecomp import robust_pca
from eidecomp.datasets import make_planted


def _rel(a, b):
    return np.linalg.norm(a - b) / np.linalg.norm(b)


@pytest.mark.slow
def test_planted_n500_exact_recovery():
    W, L0, S0 = make_planted(500, seed=0)
    dec = robust_pca(W)
    assert dec.converged
    assert dec.rank == 25
    assert _rel(dec.low_rank, L0) < 1e-6
    assert _rel(dec.sparse, S0) < 1e-6
    # the optimality (KKT) conditions of PCP, eq. 1.1 of Candes et al. 2011
    # (subgradients of the nuclear and l1 norms, common practice):
    # ||Y||_2 <= 1 and ||Y||_max <= lam, up to the dual residual
    assert dec.report.multiplier_spectral_norm < 1 + 1e-5
    assert dec.report.multiplier_max_norm_over_lam <= 1 + 1e-12


@pytest.mark.slow
def test_planted_n500_with_diagonal_unobserved():
    W, L0, S0 = make_planted(500, seed=1)
    W = W.copy()
    np.fill_diagonal(W, 1e3)  # garbage on the unobserved diagonal must not matter
    dec = robust_pca(W, ignore_diagonal=True)
    assert dec.converged
    assert dec.rank == 25
    assert _rel(dec.low_rank, L0) < 1e-6  # L0 completed on the diagonal too
    assert np.all(np.diag(dec.sparse) == 0)
    off = ~np.eye(500, dtype=bool)
    assert _rel(dec.sparse[off], S0[off]) < 1e-6


@pytest.mark.parametrize("seed", [0, 1])
@pytest.mark.parametrize("n", [60, 150])
def test_planted_small(n, seed):
    W, L0, _ = make_planted(n, seed=seed)
    dec = robust_pca(W)
    assert dec.converged
    assert dec.rank == round(0.05 * n)
    assert _rel(dec.low_rank, L0) < 1e-6


def test_rectangular_planted():
    # Candes et al. 2011, Theorem 1.1: it holds for n1 x n2 with
    # lam = 1/sqrt(max(n1, n2))
    W, L0, _ = make_planted(200, m=120, rank=4, seed=3)
    dec = robust_pca(W)
    assert dec.lam == pytest.approx(1 / np.sqrt(200))
    assert dec.rank == 4
    assert _rel(dec.low_rank, L0) < 1e-6


def test_scaling_equivariance():
    # PCP is positively homogeneous: W -> c W gives L, S -> c L, c S
    W, _, _ = make_planted(80, seed=4)
    a = robust_pca(W)
    b = robust_pca(1e6 * W)
    assert _rel(b.low_rank, 1e6 * a.low_rank) < 1e-6
    assert b.rank == a.rank


def test_same_seed_same_output():
    W, _, _ = make_planted(300, seed=5)
    a, b = robust_pca(W, seed=3), robust_pca(W, seed=3)
    assert np.array_equal(a.low_rank, b.low_rank)
    assert np.array_equal(a.sparse, b.sparse)
