"""Where excitation goes, the swap search, the baselines and the stability
line (docs/assembly.md, issue 27), each against a reference outside the
project:

* cvxpy (Clarabel): given the interneurons' paths, J_EE under the default
  rule is the exact minimiser of the refinement's objective with J_EE zero
  where W <= 0, a convex quadratic program solved independently here;
* brute force: on a 3-unit W every J_EE entry's optimum is checked on a
  grid;
* scikit-learn's NMF: the swap search ends at an objective no worse than
  scikit-learn's coordinate-descent NMF of the same matrix and rank, and
  the nmf baseline is scikit-learn's NMF, reproduced here;
* scipy.linalg.eigvals: the stability line's figures are the eigenvalues
  of the Jacobian T^-1 (-I + W_full), computed here;
* the registry package cect (through eidecomp.datasets.signed_connectome):
  on a real connectome no autapse is made and no excitation where W <= 0.
"""

import warnings
from importlib import import_module

import cvxpy as cp
import numpy as np
import pytest
import scipy.linalg
from sklearn.decomposition import NMF

from eidecomp import assemble
from eidecomp.assemble import excitation_audit
from eidecomp.datasets import make_planted_circuit
from eidecomp.dynamics import (
    effective_from_full,
    instability_line,
    jacobian,
    stability_summary,
)
from eidecomp.errors import InputError
from eidecomp.params import TAU_E_MS, TAU_I_MS, excitation_line
from eidecomp.types import Circuit

asm = import_module("eidecomp.assemble._assemble")
sup = import_module("eidecomp.assemble._support")
sh = import_module("eidecomp.assemble._mixed_hals")


def _cancelling_w(seed, n=30):
    """W = J_EE - A B with dense random inhibition: the unconstrained
    construction cancels here, the default one may not."""
    rng = np.random.default_rng(seed)
    A = rng.random((n, 4)) * (rng.random((n, 4)) < 0.5)
    B = rng.random((4, n)) * (rng.random((4, n)) < 0.5)
    J = rng.random((n, n)) * (rng.random((n, n)) < 0.15)
    np.fill_diagonal(J, 0.0)
    W = J - A @ B
    np.fill_diagonal(W, 0.0)
    return W


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_the_default_circuit_has_excitation_only_where_w_is_positive(seed):
    W = _cancelling_w(seed)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        c = assemble(W, ei_ratio="4:1", baselines=False)
        wide = assemble(W, ei_ratio="4:1", baselines=False, ee_support="any")
    assert not (c.J_EE[W <= 0] > 0).any()
    assert not np.diag(c.J_EE).any()
    assert c.report.autapses == 0 and c.report.cancelling_share == 0.0
    assert c.params["ee_support"] == "positive"
    # the unconstrained construction is still there, and audited by numpy
    aut = int(np.count_nonzero(np.diag(wide.J_EE)))
    share = wide.J_EE[W <= 0].sum() / wide.J_EE.sum()
    assert (wide.report.autapses, wide.report.cancelling_share) == (
        aut, pytest.approx(share, rel=1e-12))
    assert excitation_line(wide.report.as_dict()).startswith(
        "excitation: J_EE anywhere")


def test_an_unknown_support_rule_is_refused():
    with pytest.raises(InputError, match="ee_support must be one of"):
        assemble(np.eye(3), ee_support="everywhere")


def test_j_ee_is_the_exact_minimiser_under_the_rule_cvxpy():
    # given the paths P = A B, the J_EE step minimises
    # 0.5 ||W - J + P||^2 + alpha sum(J) over J >= 0, J = 0 where W <= 0
    rng = np.random.default_rng(5)
    n = 12
    W = rng.normal(size=(n, n))
    A, B = rng.random((n, 3)), rng.random((3, n))
    alpha = 0.05
    allowed = asm._allowed(W, None, "positive")
    J = asm._excitation(W, A, B, 3, alpha, allowed)
    X = cp.Variable((n, n))
    P = A @ B
    problem = cp.Problem(cp.Minimize(0.5 * cp.sum_squares(W - X + P)
                                     + alpha * cp.sum(X)),
                         [X >= 0, cp.multiply(~allowed, X) == 0])
    problem.solve(solver=cp.CLARABEL)
    np.testing.assert_allclose(J, X.value, atol=1e-7)


def test_j_ee_brute_force_on_three_units():
    # every entry's optimum on a grid of 2,001 values in [0, 3]
    W = np.array([[0.0, 0.8, -0.5], [0.3, 0.0, 0.2], [-0.4, 0.6, -0.1]])
    A = np.array([[0.5], [0.2], [0.7]])
    B = np.array([[0.4, 0.9, 0.1]])
    alpha = 0.01
    J = asm._excitation(W, A, B, 1, alpha, asm._allowed(W, None, "positive"))
    grid = np.linspace(0.0, 3.0, 2001)
    P = A @ B
    for i in range(3):
        for j in range(3):
            if W[i, j] <= 0:
                assert J[i, j] == 0.0
                continue
            f = 0.5 * (W[i, j] - grid + P[i, j]) ** 2 + alpha * grid
            assert J[i, j] == pytest.approx(grid[np.argmin(f)], abs=2e-3)


def test_the_audit_counts_what_numpy_counts():
    W = np.array([[0.0, 1.0, -1.0], [2.0, -1.0, 0.0], [0.5, 0.5, 3.0]])
    J = np.array([[0.2, 1.0, 0.5], [2.0, 0.0, 0.3], [0.5, 0.5, 3.0]])
    aut, share = excitation_audit(W, J)
    assert aut == 1                       # J[0, 0] where W[0, 0] = 0
    assert share == pytest.approx((0.2 + 0.5 + 0.3) / J.sum())


def test_the_swap_search_beats_scikit_learns_nmf_on_merged_pools():
    # the tuned side of a planted circuit (400 units, seed 0), where NNDSVD
    # + HALS merges two pools; scikit-learn's NMF (cd, nndsvd, tol 1e-6) of
    # the same matrix and rank is the reference objective
    from eidecomp import robust_pca

    W, _, _ = make_planted_circuit(400, n_untuned=5, n_tuned=95, seed=0)
    dec = robust_pca(W, seed=0)
    M = asm._inhibitory_side(dec.sparse, float(np.abs(W).max()))
    A, B = asm.nndsvd(M, 95)
    A, B, _ = sh.hals_mixed(M, A, B, 0, max_iter=500, tol=1e-6)

    def objective(a, b):
        return 0.5 * float(np.linalg.norm(M - a @ b) ** 2)

    before = objective(A, B)
    A2, B2, kept = sup.swap_search(
        M, A, B, lambda a, b: sh.hals_mixed(M, a, b, 0, max_iter=50,
                                            tol=1e-6)[:2], objective)
    after = objective(A2, B2)
    assert kept >= 1 and after < before
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model = NMF(95, solver="cd", init="nndsvd", tol=1e-6, max_iter=3000,
                    random_state=0)
        P = model.fit_transform(M)
    assert after <= objective(P, model.components_)


def test_a_widened_pool_is_divided_to_cover_the_one_left_out(monkeypatch):
    """Ring pools (40 of 8 inputs and 8 targets, 160 units) under uniform
    noise, fitted from a start that leaves pool 10 out, fits pool 20 with
    two components and widens pools 9 and 11 over pool 10: HALS keeps it,
    and the residual there is too small against the noise to seed a piece,
    so swaps of pieces alone keep nothing. Dividing a wide component
    (_division_trials) does, and ends below scikit-learn's NMF (cd, NNDSVD and
    NNDSVDa starts, tol 1e-6) on the same matrix and rank, the reference
    objective."""
    rng = np.random.default_rng(0)
    m, k, l1 = 160, 40, 1e-3
    A0, B0 = np.zeros((m, k)), np.zeros((k, m))
    for t in range(k):
        A0[(4 * t + np.arange(8)) % m, t] = rng.uniform(0.5, 1.5, 8)
        B0[t, (4 * t + 80 + np.arange(8)) % m] = rng.uniform(0.5, 1.5, 8)
    M = A0 @ B0 + 0.1 * np.random.default_rng(1).random((m, m))
    A, B = A0.copy(), B0.copy()
    A[:, 10], B[10] = A0[:, 20] * (np.arange(m) % 8 < 4), B0[20]
    A[:, 20] *= np.arange(m) % 8 >= 4
    A[40 + np.arange(4), 9], A[44 + np.arange(4), 11] = 0.5, 0.5
    B[9, 120 + np.arange(4)], B[11, 124 + np.arange(4)] = 0.5, 0.5
    A, B, _ = sh.hals_mixed(M, A, B, 0, l1=l1, max_iter=2000, tol=1e-9)

    def fit(a, b):
        return sh.hals_mixed(M, a, b, 0, l1=l1, max_iter=50, tol=1e-6)[:2]

    def objective(a, b):
        return 0.5 * float(np.linalg.norm(M - a @ b) ** 2)

    A2, B2, kept = sup.swap_search(M, A, B, fit, objective, l1=l1)
    after = objective(A2, B2)
    with monkeypatch.context() as patch:
        patch.setattr(sup, "_division_trials", lambda *args: None)
        pieces_only = sup.swap_search(M, A, B, fit, objective, l1=l1)
    assert pieces_only[2] == 0 and kept >= 1
    assert after < objective(A, B)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for init in ("nndsvd", "nndsvda"):
            model = NMF(k, solver="cd", init=init, tol=1e-6, max_iter=3000,
                        random_state=0)
            P = model.fit_transform(M)
            assert after < objective(P, model.components_)


def test_a_pool_fitted_twice_is_a_swap_candidate_scipy():
    """Ring pools of 8 inputs and 8 targets, one of them fitted by two
    components that divide its inputs and share its targets: those two
    share the most of their pools (cosines written out with
    scipy.spatial.distance.cosine, a brute-force loop over the pairs) and
    come first among the shared-pool candidates."""
    from scipy.spatial.distance import cosine

    m, k = 80, 10
    A, B = np.zeros((m, k)), np.zeros((k, m))
    for t in range(k - 1):
        A[4 * t + np.arange(8), t] = 1.0
        B[t, (4 * t + 40 + np.arange(8)) % m] = 1.0
    A[[4, 5, 6, 7], 1], A[[8, 9, 10, 11], 1] = 1.0, 0.0   # pool 1: half its
    A[[8, 9, 10, 11], 9], B[9] = 1.0, B[1]               # inputs, twice
    twins = sup._twins(A, B)
    reference = [max(1 - min(cosine(A[:, i], A[:, j]),
                             cosine(B[i], B[j])) for j in range(k) if j != i)
                 for i in range(k)]
    np.testing.assert_allclose(twins, reference, atol=1e-12)
    assert set(np.argsort(-twins, kind="stable")[:2]) == {1, 9}


def test_baseline_d_is_scikit_learns_nmf_with_its_kkt_residual():
    rng = np.random.default_rng(2)
    M = rng.random((40, 6)) @ rng.random((6, 40))
    bl = import_module("eidecomp.assemble._baselines")
    A, B, converged, kkt, sweeps = bl.plain_factorisation(M, 6)
    # the chunks are one scikit-learn run: the same product as NMF run
    # continuously for as many sweeps with its own stop switched off
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model = NMF(6, solver="cd", init="nndsvda", tol=0.0, max_iter=sweeps,
                    random_state=0)
        P = model.fit_transform(M)
    np.testing.assert_allclose(A @ B, P @ model.components_, atol=1e-12)
    # the projected gradient (Lin 2007, eq. 8, from memory) written out here
    R = A @ B - M
    gA = R @ B.T
    pg = np.where(A > 0, gA, np.minimum(gA, 0))
    assert kkt >= np.linalg.norm(pg) / np.linalg.norm(M @ B.T) - 1e-15
    assert converged == (kkt <= bl.NMF_KKT_TOL)


def test_baseline_d_stops_where_its_error_stalls_scikit_learn():
    """The measured stop: on a matrix with no exact factorisation the chunks
    end once the error falls by less than NMF_STALL of itself over one (the
    error one chunk earlier, from scikit-learn's NMF run continuously for
    that many sweeps), with the KKT residual at most NMF_KKT_TOL."""
    bl = import_module("eidecomp.assemble._baselines")
    M = np.random.default_rng(5).random((60, 60))
    fit = bl.plain_factorisation(M, 8)
    assert fit.sweeps < bl.NMF_MAX_ITER and fit.converged

    def error(sweeps):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            model = NMF(8, solver="cd", init="nndsvda", tol=0.0,
                        max_iter=sweeps, random_state=0)
            P = model.fit_transform(M)
        return np.linalg.norm(M - P @ model.components_)

    last, before = error(fit.sweeps), error(fit.sweeps - bl.NMF_CHUNK)
    assert last == pytest.approx(np.linalg.norm(M - fit.A @ fit.B), rel=1e-12)
    assert before - last <= bl.NMF_STALL * before
    assert fit.kkt <= bl.NMF_KKT_TOL


def _two_unit_circuit(j_ee, j_ei, j_ie):
    return Circuit(J_EE=np.array([[j_ee]]), J_EU=np.array([[j_ei]]),
                   J_UE=np.array([[j_ie]]), J_ET=np.zeros((1, 0)),
                   J_TE=np.zeros((0, 1)))


def test_the_stability_line_names_slow_interneurons_scipy():
    # one E and one I unit: J_EE = 3.5 > 1 + tau_E / tau_I = 3 at the
    # default ratio 0.5; W_eff = 3.5 - 3 = 0.5 is stable, and so is W
    c = _two_unit_circuit(3.5, 1.5, 2.0)
    W = c.effective_weights()
    s = stability_summary(c, W, tau_ratio=TAU_I_MS / TAU_E_MS)
    full = c.signed_weights()
    assert np.allclose(effective_from_full(full, 1), W)
    growth = scipy.linalg.eigvals(jacobian(full, 1, tau_e=TAU_E_MS,
                                           tau_i=TAU_I_MS)).real.max()
    assert growth > 0                      # unstable at the default ratio
    r = s["max_stable_tau_ratio"]
    below = scipy.linalg.eigvals(jacobian(full, 1, tau_e=1.0,
                                          tau_i=0.99 * r)).real.max()
    assert below < 0 < scipy.linalg.eigvals(
        jacobian(full, 1, tau_e=1.0, tau_i=1.01 * r)).real.max()
    assert s["why"].startswith("W and W_eff are stable but the circuit is "
                               f"stable only up to tau_I/tau_E = {r:.3g}")
    assert "Perron root 3.5" in s["why"]


def test_the_stability_line_names_a_misfit_scipy():
    # W stable (eigenvalue 0.9), W_eff not (1.2): no ratio helps
    c = _two_unit_circuit(1.2, 0.0, 0.0)
    W = np.array([[0.9]])
    s = stability_summary(c, W, tau_ratio=0.5)
    assert scipy.linalg.eigvals(c.effective_weights()).real.max() > 1
    assert s["why"].startswith("W is stable (margin 0.1) but W_eff is not")
    assert instability_line(-0.1, -0.5, 2.0, 0.5, c) is None  # stable there


def test_a_real_connectome_gets_no_invented_synapse():
    pytest.importorskip("cect")
    from eidecomp.datasets import signed_connectome

    W, _ = signed_connectome("WitvlietDataReader8")
    # the assembler's own rule on a real matrix: asked to treat every unit
    # as excitatory (by default W's own neurons are the circuit, which
    # tests/test_own_neurons.py checks)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        c = assemble(W, ei_ratio="4:1", baselines=False, own_neurons=False)
    assert not (c.J_EE[W <= 0] > 0).any()
    assert c.report.autapses == 0
    # recognised as a Dale's-law matrix: its inhibitory neurons are the
    # columns cect's GABA classes signed negative (counted here by numpy)
    k = int((W < 0).any(axis=0).sum())
    assert not ((W < 0).any(axis=0) & (W > 0).any(axis=0)).any()
    (note,) = [x for x in c.report.notes if "obeys Dale's law" in x]
    assert f"with {k} inhibitory neurons of {W.shape[0]}" in note
