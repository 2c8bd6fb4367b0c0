"""RobustPCA as a scikit-learn estimator, checked by scikit-learn itself.

Reference: scikit-learn's own estimator checks
(``sklearn.utils.estimator_checks.parametrize_with_checks``, the suite every
estimator of the library passes), and its ``clone``, ``GridSearchCV`` and
``Pipeline``. The recovery the grid search must find is that of Candes, Li,
Ma and Wright (2011), Theorem 1.1: at lam = 1 / sqrt(n) a planted rank-r
matrix with a few per cent of gross errors is split exactly.
"""

import numpy as np
import pytest
from scipy import sparse
from sklearn.base import clone
from sklearn.model_selection import GridSearchCV
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import FunctionTransformer
from sklearn.utils.estimator_checks import parametrize_with_checks

from eidecomp import RobustPCA, assemble, robust_pca
from eidecomp.datasets import make_planted
from eidecomp.params import default_lam

# No check is skipped. scikit-learn itself skips check_array_api_input unless
# SCIPY_ARRAY_API is set (RobustPCA does not claim array-API support; its
# tags leave array_api_support False).
EXPECTED_FAILED = {}


@parametrize_with_checks([RobustPCA()],
                         expected_failed_checks=lambda est: EXPECTED_FAILED)
def test_sklearn_estimator_checks(estimator, check):
    check(estimator)


def test_clone_keeps_parameters_and_drops_the_fit():
    est = RobustPCA(lam=0.1, tol=1e-8, random_state=3).fit(np.eye(5))
    twin = clone(est)
    assert twin.get_params() == est.get_params()
    assert not hasattr(twin, "low_rank_")
    assert repr(twin) == "RobustPCA(lam=0.1, random_state=3, tol=1e-08)"


def test_grid_search_over_lam_finds_the_planted_rank():
    W, L0, _ = make_planted(120, rank=5, seed=3)
    lam0 = default_lam(W.shape)
    grid = {"lam": [0.1 * lam0, lam0, 1.0]}
    # 0.1 lam0 puts everything in the sparse part (rank 0 on each fold,
    # measured), lam = 1 nothing (full rank); the standard weight, rank 5
    search = GridSearchCV(RobustPCA(), grid, cv=3).fit(W)
    assert search.best_params_["lam"] == pytest.approx(lam0)
    best = search.best_estimator_
    assert best.rank_ == 5
    assert np.linalg.norm(best.low_rank_ - L0) <= 1e-4 * np.linalg.norm(L0)


def test_score_prefers_the_true_subspace_on_new_rows():
    W, _, _ = make_planted(120, rank=5, seed=4)
    fit, new = W[:80], W[80:]
    right = RobustPCA().fit(fit)
    full = RobustPCA(lam=1.0).fit(fit)      # lam >= 1: no sparse part at all
    assert right.rank_ == 5 and full.rank_ > 60
    assert right.score(new) > full.score(new)


def test_transform_recovers_planted_rows_and_fit_transform_agrees():
    W, L0, _ = make_planted(100, rank=4, seed=5)
    est = RobustPCA()
    T = est.fit_transform(W)
    assert np.linalg.norm(T - L0) <= 1e-4 * np.linalg.norm(L0)
    assert np.allclose(T, est.transform(W))


def test_pipeline_runs_robust_pca_after_a_transformer():
    W, L0, _ = make_planted(90, rank=3, seed=6)
    pipe = make_pipeline(FunctionTransformer(lambda X: 2.0 * X), RobustPCA())
    T = pipe.fit_transform(W)
    assert pipe[-1].rank_ == 3
    assert np.linalg.norm(T - 2 * L0) <= 1e-4 * np.linalg.norm(2 * L0)


def test_sparse_input_gives_the_dense_answer():
    W, _, _ = make_planted(60, rank=2, seed=7)
    W[np.abs(W) < 0.5] = 0.0
    dense = robust_pca(W, seed=2)
    for M in (sparse.csr_matrix(W), sparse.coo_array(W)):
        assert np.array_equal(robust_pca(M, seed=2).low_rank, dense.low_rank)
    est = RobustPCA(random_state=2).fit(sparse.csc_matrix(W))
    assert np.array_equal(est.low_rank_, dense.low_rank)
    c_dense = assemble(W, ei_ratio="4:1", seed=2, baselines=False)
    c_sparse = assemble(sparse.csr_matrix(W), ei_ratio="4:1", seed=2,
                        baselines=False)
    assert np.array_equal(c_dense.J_EE, c_sparse.J_EE)


def test_random_state_kinds():
    W, _, _ = make_planted(40, rank=2, seed=8)
    a = RobustPCA(random_state=None).fit(W).low_rank_
    b = RobustPCA(random_state=0).fit(W).low_rank_
    assert np.array_equal(a, b)            # None is seed 0: reproducible
    RobustPCA(random_state=np.random.default_rng(1)).fit(W)
    RobustPCA(random_state=np.random.RandomState(1)).fit(W)
    with pytest.raises(ValueError, match="random_state"):
        RobustPCA(random_state="one").fit(W)
