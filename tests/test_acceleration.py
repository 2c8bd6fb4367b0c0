"""The accelerated ALM: Anderson acceleration, the penalty schedule, the
numerical-rank rule, the multiplier bound and the BLAS thread limit.

References, named test by test: numpy (linear solves, SVDs, norms, a
textbook type-II Anderson step written out with numpy's least squares after
Walker and Ni 2011, SIAM J. Numer. Anal. 49(4)), cvxpy with the Clarabel
interior-point solver (PCP optima and ranks), the KKT conditions of PCP
(Candes, Li, Ma, Wright 2011; written out in docs/robust_pca.md, "When a
solution is optimal") and threadpoolctl's ``threadpool_info`` (BLAS thread
counts).

Clarabel costs about 2 s at 30 x 30 here and over a minute at 60 x 60, so
the live convex comparisons are at n <= 30; the 60 x 60 Gaussian is checked
against Clarabel's optimum recorded once (see that test).
"""

import numpy as np
import pytest

from eidecomp import default_lam, pcp_objective, robust_pca, robust_pca_kernel
from eidecomp.datasets import make_planted
from eidecomp.decompose._anderson import DEPTH, Anderson, depth_for
from eidecomp.decompose._ialm import GROW_STEPS, ialm, split_point
from eidecomp.decompose._norms import spectral_norm_bound
from eidecomp.decompose._threads import ONE_THREAD_BELOW, threads_for
from eidecomp.kernels import expand_full
from eidecomp.params import RANK_RTOL

RTOL = RANK_RTOL["float64"]
N_LINEAR = 50


# --- Anderson acceleration on a linear map -------------------------------------


def _symmetric_contraction(seed):
    """A = Q diag(ev) Q^T, ev uniform in [-0.95, 0.95] with one at 0.95:
    ||A||_2 = spectral radius = 0.95, a contraction."""
    rng = np.random.default_rng(seed)
    Q, _ = np.linalg.qr(rng.standard_normal((N_LINEAR, N_LINEAR)))
    ev = rng.uniform(-0.95, 0.95, N_LINEAR)
    ev[0] = 0.95
    return (Q * ev) @ Q.T, rng.standard_normal(N_LINEAR)


def _gaussian_radius(seed):
    """A Gaussian matrix scaled to spectral radius 0.95 (non-normal: its
    2-norm is above 1, so the plain iteration converges only asymptotically)."""
    rng = np.random.default_rng(seed)
    A = rng.standard_normal((N_LINEAR, N_LINEAR))
    A *= 0.95 / np.abs(np.linalg.eigvals(A)).max()
    return A, rng.standard_normal(N_LINEAR)


def _steps_to(A, b, x_ref, accel, rtol=1e-10, max_steps=5000):
    """Steps until ||x - x_ref|| <= rtol ||x_ref|| (None if never), and x."""
    x = np.zeros(b.size)
    for k in range(1, max_steps + 1):
        fx = A @ x + b
        x = fx if accel is None else accel.step(x, fx)
        if np.linalg.norm(x - x_ref) <= rtol * np.linalg.norm(x_ref):
            return k, x
    return None, x


def test_anderson_solves_a_contraction_in_a_fifth_of_the_steps():
    # Reference: numpy.linalg.solve(I - A, b), the fixed point of x -> A x + b.
    A, b = _symmetric_contraction(0)
    assert np.abs(np.linalg.eigvals(A)).max() == pytest.approx(0.95, rel=1e-12)
    x_ref = np.linalg.solve(np.eye(N_LINEAR) - A, b)
    plain, _ = _steps_to(A, b, x_ref, None)
    fast, x = _steps_to(A, b, x_ref, Anderson())
    assert plain is not None and fast is not None
    assert fast <= plain / 5, (fast, plain)
    np.testing.assert_allclose(x, x_ref, rtol=0, atol=1e-10 * np.linalg.norm(x_ref))


def test_anderson_is_the_textbook_type_ii_step():
    # Reference: type-II Anderson acceleration (Walker and Ni 2011, the
    # least-squares form: gamma = argmin ||g_k - dG gamma||, x_{k+1} = x_k +
    # g_k - (dX + dG) gamma over the last DEPTH differences), written out
    # here with numpy.linalg.lstsq; and numpy.linalg.solve for the limit.
    A, b = _gaussian_radius(0)
    x_ref = np.linalg.solve(np.eye(N_LINEAR) - A, b)
    xs, gs, x = [np.zeros(N_LINEAR)], [], np.zeros(N_LINEAR)
    aa, lib = Anderson(), np.zeros(N_LINEAR)
    for _ in range(30):
        g = A @ xs[-1] + b - xs[-1]
        gs.append(g)
        m = min(DEPTH, len(gs) - 1)
        x = xs[-1] + g
        if m:
            dX = np.diff(np.array(xs[-m - 1:]), axis=0).T
            dG = np.diff(np.array(gs[-m - 1:]), axis=0).T
            x = x - (dX + dG) @ np.linalg.lstsq(dG, g, rcond=None)[0]
        xs.append(x)
        lib = aa.step(lib, A @ lib + b)
        assert np.linalg.norm(lib - x) <= 1e-8 * np.linalg.norm(x_ref)
    assert aa.restarts == 0  # the safeguard never fired: a pure comparison
    plain, _ = _steps_to(A, b, x_ref, None)
    fast, x = _steps_to(A, b, x_ref, Anderson())
    assert fast is not None and plain is not None and fast <= plain / 3
    np.testing.assert_allclose(x, x_ref, rtol=0, atol=1e-10 * np.linalg.norm(x_ref))


def test_anderson_reset_and_restart_safeguard():
    # Reference: numpy arithmetic of the maps themselves: after reset() (and
    # after a restart) the step is the plain one, x -> f(x), exactly.
    A, b = _symmetric_contraction(1)
    aa, x = Anderson(), np.zeros(N_LINEAR)
    aa.reset()
    assert aa.restarts == 0  # nothing to forget yet
    for _ in range(5):
        x = aa.step(x, A @ x + b)
    fx = A @ x + b
    assert not np.array_equal(aa.step(x.copy(), fx), fx)  # extrapolates
    aa.reset()
    assert aa.restarts == 1
    np.testing.assert_array_equal(aa.step(x, fx), fx)  # history gone

    # x -> 2 x + b: the residual g = x + b grows every step, so every step
    # after the first restarts and is the plain step.
    grow, x = Anderson(), np.zeros(N_LINEAR)
    for k in range(1, 9):
        fx = 2 * x + b
        x = grow.step(x, fx)
        np.testing.assert_array_equal(x, fx)
        assert grow.restarts == k - 1


@pytest.mark.parametrize("size", [1, 1000, 123_457])
def test_depth_for_fits_the_budget(size):
    # Reference: numpy's ndarray.nbytes of the history Anderson actually
    # keeps (2 * depth arrays of ``size`` float64 numbers).
    two_steps = 2 * 2 * size * 8
    assert depth_for(size, 8, budget=two_steps - 1) == 0
    assert depth_for(size, 8, budget=two_steps) == 2
    assert depth_for(size, 8, budget=10**15) == DEPTH
    assert 0 <= depth_for(size, 8) <= DEPTH
    budget = 3 * 2 * size * 8 + 7
    depth = depth_for(size, 8, budget=budget)
    assert depth == 3
    aa, x = Anderson(depth), np.zeros(size)
    rng = np.random.default_rng(size)
    c = rng.uniform(0.1, 0.9, size)
    longest = 0
    for _ in range(depth + 4):
        x = aa.step(x, c * x + 1.0)
        kept = aa._dH + aa._dG
        longest = max(longest, len(kept))
        assert sum(a.nbytes for a in kept) <= budget
    assert longest == 2 * depth


def test_depth_for_refuses_a_history_that_does_not_fit():
    # Reference: the byte count 2 * 2 * size * itemsize of two steps (numpy
    # itemsize of float64 and float32).
    huge = 10**9  # elements: two float64 steps are 32 GB, over the default budget
    assert depth_for(huge, np.dtype(np.float64).itemsize) == 0
    assert depth_for(huge // 8, np.dtype(np.float32).itemsize) == 0
    assert depth_for(10, 8) == DEPTH


# --- the split of the fixed-point variable q = S + Y/mu ---------------------------


@pytest.mark.parametrize("masked", [False, True])
def test_split_point_inverts_q(masked):
    # Reference: the soft threshold sign(q) max(|q| - thr, 0) computed here
    # with numpy (the shrinkage operator of the ALM, Lin, Chen and Ma 2010),
    # and the identity q = S + Y/mu on the observed entries.
    rng = np.random.default_rng(7 + masked)
    q = 3 * rng.standard_normal((40, 30))
    mu, lam = 2.5, 0.4
    thr = lam / mu
    mask = (rng.random(q.shape) < 0.8).astype(float) if masked else None
    S, Y = np.empty_like(q), np.empty_like(q)
    split_point(q, S, Y, mu, thr, mask)
    obs = np.ones(q.shape, bool) if mask is None else mask.astype(bool)
    np.testing.assert_allclose((S + Y / mu)[obs], q[obs], rtol=1e-15, atol=1e-15)
    assert (np.abs(Y) <= mu * thr * (1 + 1e-15)).all()
    shrink = np.sign(q) * np.maximum(np.abs(q) - thr, 0.0)
    np.testing.assert_allclose(S[obs], shrink[obs], rtol=0, atol=1e-15)
    assert (np.abs(q[obs]) > thr).any() and (np.abs(q[obs]) < thr).any()
    if masked:
        assert (Y[~obs] == 0).all()
        np.testing.assert_array_equal(S[~obs], q[~obs])  # unpenalised there


# --- the numerical-rank rule ------------------------------------------------------


def _check_truncated(W, dec):
    """numpy's view of an ALM result: rank, truncation, objective, residual."""
    s = np.linalg.svd(dec.low_rank, compute_uv=False)
    assert int(np.count_nonzero(s > RTOL * s[0])) == dec.rank
    between = (s > 1e-12 * s[0]) & (s <= RTOL * s[0])
    assert not between.any(), s[between] / s[0]  # L was truncated
    assert dec.objective == pytest.approx(
        pcp_objective(dec.low_rank, dec.sparse, dec.lam), rel=1e-9)
    primal = np.linalg.norm(W - dec.low_rank - dec.sparse) / np.linalg.norm(W)
    assert dec.report.primal_residual == pytest.approx(primal, rel=1e-9, abs=1e-15)


# corruption 0.05: the brief's cases (the rule does not bite there); 0.30:
# without the rule the ALM's L keeps 4 to 14 spurious singular values of
# 1e-8 to 1e-6 times the largest on these seeds (measured by removing it).
@pytest.mark.parametrize(("corruption", "seed"),
                         [(0.05, 0), (0.05, 1), (0.05, 2),
                          (0.30, 0), (0.30, 1), (0.30, 2), (0.30, 3)])
def test_planted_200_rank_is_the_planted_rank(corruption, seed):
    # Reference: the planted rank-10 L0 (numpy.linalg.matrix_rank), which
    # the solve recovers (Candes et al. 2011, Theorem 1.1 and their
    # experiments, section 4.1 from memory; recovery checked here with numpy
    # norms), so the
    # optimum's rank is 10; and numpy's SVD of the returned L. Clarabel is
    # too slow at 200 x 200 (the convex comparison is the n = 30 test below).
    W, L0, _ = make_planted(200, rank=10, corruption=corruption, seed=seed)
    dec = robust_pca(W)
    assert dec.converged
    assert np.linalg.norm(dec.low_rank - L0) <= 1e-5 * np.linalg.norm(L0)
    assert dec.rank == np.linalg.matrix_rank(L0) == 10
    _check_truncated(W, dec)


@pytest.mark.parametrize("case", ["planted-0", "planted-1", "gaussian"])
def test_rank_matches_clarabel(case):
    # Reference: cvxpy/Clarabel (robust_pca(method="convex"), whose L is cut
    # by the same rule) on a 30 x 30 matrix: the rank and the optimum.
    pytest.importorskip("cvxpy")
    if case == "gaussian":
        W = np.random.default_rng(1).standard_normal((30, 30))
    else:
        W = make_planted(30, rank=3, corruption=0.05, seed=int(case[-1]))[0]
    dec = robust_pca(W)
    exact = robust_pca(W, method="convex")
    assert dec.converged and exact.converged
    assert dec.rank == exact.rank
    assert dec.objective == pytest.approx(exact.objective, rel=1e-6)
    _check_truncated(W, dec)


def test_unplanted_60_rank_matches_recorded_clarabel():
    # Reference: Clarabel's solution of this problem (default_rng(1) 60 x 60
    # Gaussian, lam = 1/sqrt(60)), recorded because it takes over a minute:
    # robust_pca(W, method="convex") with cvxpy 1.9.3 and Clarabel 0.11.1
    # gave rank 34 and objective 329.775774; SCS 3.3.1 (solver="SCS") gave
    # rank 34 and 329.775777.
    W = np.random.default_rng(1).standard_normal((60, 60))
    dec = robust_pca(W)
    assert dec.converged
    assert dec.rank == 34
    assert dec.objective == pytest.approx(329.775774, abs=1e-5)
    _check_truncated(W, dec)


# --- the multiplier: bound and KKT -----------------------------------------------


@pytest.mark.parametrize(("n", "method"), [(400, "lanczos"), (100, "svd")])
def test_multiplier_bound_and_kkt(n, method):
    # Reference: numpy.linalg.norm(Y, 2) for the bound; the KKT conditions of
    # PCP (Candes et al. 2011; written out in docs/robust_pca.md, "When a
    # solution is optimal"): ||Y||_2 <= 1 and
    # ||Y||_max <= lam at the optimum.
    W = make_planted(n, seed=0)[0]
    lam = default_lam(W.shape)
    L, S, Y, info = ialm(W, lam, rng=np.random.default_rng(0))
    assert info["converged"]
    bound = spectral_norm_bound(Y)
    assert bound.method == method
    exact = np.linalg.norm(Y, 2)
    assert bound.upper >= exact
    assert exact <= 1 + 1e-6
    assert np.abs(Y).max() <= lam * (1 + 1e-6)
    # the report quotes the bound, never less than numpy's norm
    dec = robust_pca(W)
    assert dec.report.multiplier_spectral_norm >= exact * (1 - 1e-9)
    assert dec.report.multiplier_spectral_norm <= 1 + 1e-6
    assert dec.report.multiplier_max_norm_over_lam <= 1 + 1e-6


# --- BLAS threads ---------------------------------------------------------------


def _blas_threads():
    """{library path: its BLAS thread count} from threadpoolctl."""
    from threadpoolctl import threadpool_info

    return {i["filepath"]: i["num_threads"] for i in threadpool_info()
            if i["user_api"] == "blas"}


def test_blas_thread_limit_inside_robust_pca():
    # Reference: threadpoolctl.threadpool_info(), read inside the progress
    # callback (robust_pca calls it every iteration), against its value
    # outside under an enclosing limit of 2 threads. A BLAS built without
    # threads (SCS's, when cvxpy is loaded) stays at 1 throughout.
    threadpoolctl = pytest.importorskip("threadpoolctl")
    assert threads_for((ONE_THREAD_BELOW - 1, 10 * ONE_THREAD_BELOW)) == 1
    assert threads_for((ONE_THREAD_BELOW, ONE_THREAD_BELOW)) is None
    with threadpoolctl.threadpool_limits(limits=2, user_api="blas"):
        outside = _blas_threads()
        if 2 not in outside.values():
            pytest.skip(f"no BLAS here can run 2 threads ({outside})")
        seen = {}

        def first(it, *_):
            if it == 1:
                seen["threads"] = _blas_threads()

        small = np.random.default_rng(0).standard_normal((100, 100))
        assert robust_pca(small, progress=first).converged
        assert seen["threads"] == dict.fromkeys(outside, 1)
        large = make_planted(ONE_THREAD_BELOW, rank=5, seed=0)[0]
        seen.clear()
        assert robust_pca(large, progress=first).converged
        assert seen["threads"] == outside
        assert _blas_threads() == outside  # and nothing leaks out


# --- the kernel solver -------------------------------------------------------------


def _kernel_and_dense(F, grid, seed):
    """Kernel solve of a full-grid Gaussian kernel, the dense solve of its
    tiled matrix, and whether the schedule left phase 1 (mu not x rho)."""
    G = np.random.default_rng(seed).standard_normal((F, F, *grid))
    mus = []
    kdec = robust_pca_kernel(G, grid, offsets=True,
                             progress=lambda it, p, d, r, mu: mus.append(mu))
    M = expand_full(G)
    dense = robust_pca(M)
    growth = np.array(mus[1:]) / np.array(mus[:-1])
    balanced = bool((np.abs(growth - 1.5) > 1e-12).any())
    return kdec, dense, M, balanced


def test_kernel_solver_equals_dense_on_a_balancing_problem():
    # Reference: the dense ALM on the tiled 90 x 90 matrix (itself checked
    # against Clarabel in the next test and in test_against_cvxpy.py) and
    # numpy's norms of that matrix (pcp_objective).
    kdec, dense, M, balanced = _kernel_and_dense(3, (6, 5), 0)
    assert balanced and kdec.n_iter > GROW_STEPS + 1
    assert kdec.converged and dense.converged
    assert kdec.objective == pytest.approx(dense.objective, rel=1e-6)
    assert dense.objective == pytest.approx(
        pcp_objective(dense.low_rank, dense.sparse, dense.lam), rel=1e-9)
    assert int(kdec.ranks.sum()) == dense.rank


def test_kernel_solver_and_dense_match_clarabel():
    # Reference: cvxpy/Clarabel (robust_pca(method="convex")) on the tiled
    # 24 x 24 matrix of a Gaussian kernel, F = 2 on a 4 x 3 torus (a 6 x 5
    # grid gives 90 x 90, beyond Clarabel's time here).
    pytest.importorskip("cvxpy")
    kdec, dense, M, balanced = _kernel_and_dense(2, (4, 3), 0)
    assert balanced and kdec.converged and dense.converged
    exact = robust_pca(M, method="convex")
    assert exact.converged
    assert dense.objective == pytest.approx(exact.objective, rel=1e-6)
    assert kdec.objective == pytest.approx(exact.objective, rel=1e-6)
    assert int(kdec.ranks.sum()) == dense.rank == exact.rank


# --- the schedule: acceleration closes the gap --------------------------------------


def test_acceleration_closes_the_balancing_gap():
    # Reference: cvxpy/Clarabel's optimum of the same problem (25 x 25
    # Gaussian, default_rng(2), lam = 0.12); the plain balancing phase is
    # slower (here: not converged in 5000 iterations).
    pytest.importorskip("cvxpy")
    W = np.random.default_rng(2).standard_normal((25, 25))
    lam = 0.12
    runs = {}
    for accelerate in (False, True):
        L, S, _, info = ialm(W, lam, tol=1e-7, max_iter=5000, accelerate=accelerate)
        runs[accelerate] = (info, pcp_objective(L, S, lam))
    (plain, plain_obj), (fast, fast_obj) = runs[False], runs[True]
    assert fast["converged"]
    assert fast["acceleration"]["depth"] == DEPTH
    assert plain["acceleration"]["depth"] == 0
    assert plain["n_iter"] > fast["n_iter"]
    if plain["converged"]:
        assert plain_obj == pytest.approx(fast_obj, rel=1e-6)
    exact = robust_pca(W, lam=lam, method="convex")
    assert fast_obj == pytest.approx(exact.objective, rel=1e-6)
