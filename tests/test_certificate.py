"""The certified stop, the reported rank and the verdict on the split.

Outside references: cvxpy with Clarabel (the optimum of PCP, Candes, Li, Ma,
Wright 2011, eq. 1.1) for the duality gap; numpy's SVD for the rank rule on
matrices built with known spectra; scikit-learn's sample photographs (an
open dataset the registry package ships) for natural-statistics matrices;
the planted problems of Candes et al. 2011, section 4.1 from memory
(datasets.make_planted).
"""

import json
import warnings

import numpy as np
import pytest

from eidecomp import robust_pca
from eidecomp.datasets import (
    gabor_covariance,
    make_planted,
    patch_partial_correlations,
    sparse_coding_lateral,
)
from eidecomp.decompose import judge_split, settled_lam, suggest_lam
from eidecomp.decompose._certificate import duality_gap
from eidecomp.decompose._svt import reported_rank
from eidecomp.errors import ConvergenceWarning
from eidecomp.params import GAP_TOL, REPORTED_RANK_RTOL


def _clarabel_optimum(W, lam, observed=None):
    cp = pytest.importorskip("cvxpy")
    L = cp.Variable(W.shape)
    S = cp.Variable(W.shape)
    obs = np.ones(W.shape) if observed is None else observed.astype(float)
    problem = cp.Problem(
        cp.Minimize(cp.normNuc(L) + lam * cp.sum(cp.abs(cp.multiply(obs, S)))),
        [cp.multiply(obs, L + S) == obs * W])
    problem.solve(solver="CLARABEL")
    assert problem.status == cp.OPTIMAL
    return problem.value


def _small_cases():
    rng = np.random.default_rng(3)
    planted, _, _ = make_planted(30, rank=2, corruption=0.1, seed=4)
    return {"gaussian 20x20": rng.standard_normal((20, 20)),
            "gaussian 18x24": rng.standard_normal((18, 24)),
            "planted 30": planted,
            "photo patches 5x5": patch_partial_correlations(5, 4000, seed=1)}


@pytest.mark.parametrize("name", list(_small_cases()))
@pytest.mark.parametrize("max_iter", [8, 25, 400])
def test_gap_bounds_the_distance_to_clarabels_optimum(name, max_iter):
    # weak duality (Boyd & Vandenberghe 2004, section 5.2, from memory):
    # dual <= f* <= primal of the feasible split, so the relative gap bounds
    # how far that split is from Clarabel's optimum, however early the
    # solver stopped
    W = _small_cases()[name]
    lam = 1 / np.sqrt(max(W.shape))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        dec = robust_pca(W, max_iter=max_iter)
    rep = dec.report
    best = _clarabel_optimum(W, lam)
    feasible = (np.linalg.norm(dec.low_rank, "nuc")
                + lam * np.abs(W - dec.low_rank).sum())
    assert rep.dual_objective <= best * (1 + 1e-7)
    assert feasible >= best * (1 - 1e-7)
    assert (feasible - best) / feasible <= rep.duality_gap + 1e-7


def test_gap_bounds_the_distance_with_an_unobserved_diagonal():
    W = patch_partial_correlations(5, 4000, seed=2)
    obs = ~np.eye(25, dtype=bool)
    lam = 1 / 5
    with pytest.warns(ConvergenceWarning, match="certified gap"):
        dec = robust_pca(W, ignore_diagonal=True, max_iter=15)
    best = _clarabel_optimum(W, lam, obs)
    feasible = (np.linalg.norm(dec.low_rank, "nuc")
                + lam * np.abs((W - dec.low_rank)[obs]).sum())
    assert (feasible - best) / feasible <= dec.report.duality_gap + 1e-7


@pytest.mark.parametrize("diagonal_observed", [True, False])
def test_a_finish_is_feasible_and_lower_than_where_it_started(diagonal_observed):
    # _ialm._finish from an early step: the objective it reports is that of
    # the feasible split (L, P_Omega(W - L)) by numpy's nuclear norm, at
    # least Clarabel's optimum (weak duality) and below the objective of the
    # step it started from; its state (S, T) stands in for (S, Y) exactly
    from eidecomp.decompose._ialm import _apply_mask, _finish, _Workspace, ialm

    W = patch_partial_correlations(5, 4000, seed=1)
    lam = 0.2
    obs = None if diagonal_observed else ~np.eye(25, dtype=bool)
    L0, S0, Y0, info = ialm(W, lam, max_iter=12, observed=obs)
    ws = _Workspace(*_apply_mask(W, obs), lam, np.random.default_rng(0))
    p, s, Us, Vt, S, steps = _finish(ws, S0, Y0, info["mu"], 1.5, GAP_TOL["float64"])
    weight = np.ones(W.shape) if obs is None else obs

    def feasible(L):
        return np.linalg.norm(L, "nuc") + lam * np.abs((W - L) * weight).sum()

    assert 1 <= steps
    assert p == pytest.approx(feasible(Us @ Vt), rel=1e-9)
    assert _clarabel_optimum(W, lam, obs) * (1 - 1e-7) <= p < feasible(L0)


def test_the_worked_example_of_the_certificate():
    # one nonzero entry: the optimum is L = 0, S = W, objective lam
    # (an example worked by hand in the docstring of _certificate)
    W = np.zeros((3, 3))
    W[1, 2] = 2.0
    Y = np.zeros((3, 3))
    Y[1, 2] = 0.25
    cert = duality_gap(W, 0.25, np.zeros((3, 3)), 0.0, [Y])
    assert cert.primal == pytest.approx(0.5) and cert.dual == pytest.approx(0.5)
    assert cert.gap == 0.0


def test_default_stop_is_certified():
    # a natural-statistics matrix whose residuals fall slowly: the gap ends
    # the solve, and the report says which test did
    dec = robust_pca(gabor_covariance(8, 5))
    assert dec.converged and dec.report.stop == "gap"
    assert dec.report.duality_gap <= GAP_TOL["float64"]
    # the finish leaves the returned split nearly feasible (measured 6e-7)
    assert dec.report.primal_residual <= 1e-5
    W = patch_partial_correlations(8, 8000, seed=0)
    strict = robust_pca(W, stop="residuals")
    assert strict.report.primal_residual <= 1e-8
    assert strict.report.dual_residual <= 1e-8


@pytest.mark.parametrize("seed", [0, 1])
def test_planted_recovery_keeps_its_accuracy_under_the_default_stop(seed):
    # inside the region where PCP recovers L0 (Candes et al. 2011, section
    # 4.1), the default stop keeps L to 1e-5 relative
    W, L0, _ = make_planted(200, rank=20, corruption=0.1, seed=seed)
    dec = robust_pca(W)
    assert np.linalg.norm(dec.low_rank - L0) <= 1e-5 * np.linalg.norm(L0)


@pytest.mark.parametrize("spectrum, rank, band", [
    ([3.0, 1.0, 0.5], 3, 0),
    ([1.0, 0.5, 2e-3, 5e-4, 1e-4, 1e-7], 3, 2),
    ([1.0] + [0.9 * REPORTED_RANK_RTOL] * 4, 1, 4),
    ([], 0, 0),
])
def test_rank_rule_on_known_spectra(spectrum, rank, band):
    # a matrix built with these singular values: numpy's SVD gives them back
    n = 8
    rng = np.random.default_rng(0)
    U, _ = np.linalg.qr(rng.standard_normal((n, n)))
    V, _ = np.linalg.qr(rng.standard_normal((n, n)))
    s = np.zeros(n)
    s[:len(spectrum)] = spectrum
    L = (U * s) @ V.T
    assert reported_rank(np.linalg.svd(L, compute_uv=False)) == (rank, band)


def test_reported_rank_does_not_move_with_the_tolerance():
    W = patch_partial_correlations(10, 20000, seed=3)
    ranks = {robust_pca(W, gap_tol=g).rank for g in (1e-3, 1e-4)}
    ranks.add(robust_pca(W, stop="residuals").rank)
    assert len(ranks) == 1


@pytest.mark.parametrize("seed", [0, 1, 2])
@pytest.mark.parametrize("rank, corruption", [(5, 0.05), (15, 0.1), (8, 0.2)])
def test_planted_low_rank_plus_sparse_fits(seed, rank, corruption):
    W, _, _ = make_planted(150, rank=rank, corruption=corruption, seed=seed)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        dec = robust_pca(W)
    assert dec.verdict.fits, dec.verdict.line
    assert dec.verdict.line.startswith("W is low-rank plus sparse")


def test_gaussian_and_natural_statistics_do_not_fit():
    cases = {"gaussian": np.random.default_rng(5).standard_normal((120, 120)),
             "patch partial correlations": patch_partial_correlations(10, 20000),
             "gabor covariance": gabor_covariance(8, 4),
             "sparse coding": sparse_coding_lateral(96, 6, 6000, n_epochs=3)}
    for name, W in cases.items():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            dec = robust_pca(W)
        assert not dec.verdict.fits, name
        assert dec.verdict.line.startswith("W is not low-rank plus sparse"), name
        assert "not two kinds of interneuron" in dec.verdict.line


def test_verdict_rules_one_at_a_time():
    assert judge_split(33, (100, 100), 0.1, 0, 0.1).fits
    assert judge_split(34, (100, 100), 0.1, 0, 0.1).reasons[0].startswith(
        "L is not low-rank")
    assert judge_split(5, (100, 100), 0.41, 0, 0.1).reasons[0].startswith(
        "S is not sparse")
    assert judge_split(5, (100, 100), 0.1, 4, 0.1).reasons[0].startswith(
        "L's spectrum has no edge")
    assert judge_split(50, (200, 200), 0.1, 5, 0.1).fits


def test_suggested_lam_sits_on_the_planted_plateau():
    W, _, _ = make_planted(120, rank=6, corruption=0.05, seed=2)
    verdict, points = suggest_lam(W)
    assert verdict.path_checked and verdict.suggested_lam is not None
    at = robust_pca(W, lam=verdict.suggested_lam)
    assert at.rank == 6 and at.verdict.fits
    assert settled_lam(points[:2], W.shape) is None  # fewer than three points


def test_decompose_command_states_the_verdict_first(tmp_path, capsys):
    from eidecomp.cli import main

    W = patch_partial_correlations(8, 8000, seed=0)
    np.save(tmp_path / "w.npy", W)
    assert main(["decompose", str(tmp_path / "w.npy"), "-o",
                 str(tmp_path / "out")]) == 0
    first = capsys.readouterr().out.splitlines()[0]
    assert first.startswith("W is not low-rank plus sparse")
    doc = json.loads((tmp_path / "out" / "summary.json").read_text())
    assert doc["verdict"]["fits"] is False and doc["verdict"]["path_checked"]
    assert doc["duality_gap"] <= GAP_TOL["float64"]
    assert doc["optimality"]["stop"] in ("gap", "residuals")


def test_gap_tol_needs_the_gap_stop(tmp_path, capsys):
    from eidecomp.cli import main

    np.save(tmp_path / "w.npy", np.eye(5))
    code = main(["decompose", str(tmp_path / "w.npy"), "-o",
                 str(tmp_path / "out"), "--stop", "residuals", "--gap-tol",
                 "1e-3"])
    assert code == 2
    assert "gap tolerance needs the stop rule 'gap'" in capsys.readouterr().err
    assert not (tmp_path / "out").exists()


def test_a_stop_on_the_residuals_returns_its_own_step():
    # the residual test ends the solve at its last step: the split, its
    # certificate and its history are of that step, never of an earlier one
    W = gabor_covariance(8, 4)
    dec = robust_pca(W, gap_tol=1e-7, tol=1e-5)
    rep = dec.report
    if rep.stop == "residuals":
        assert rep.primal_residual <= 1e-5 * (1 + 1e-6)
        assert dec.history[-1][0] < 1e-5 and dec.history[-1][1] < 1e-5
    else:
        assert rep.duality_gap <= 1e-7 or not dec.converged


def test_gap_tolerance_is_a_fraction_below_one(tmp_path, capsys):
    from eidecomp.cli import main

    np.save(tmp_path / "w.npy", np.eye(5))
    assert main(["decompose", str(tmp_path / "w.npy"), "-o",
                 str(tmp_path / "out"), "--gap-tol", "5"]) == 2
    assert "below 1" in capsys.readouterr().err
    with pytest.raises(Exception, match="method 'ialm'"):
        robust_pca(np.eye(5), method="convex", gap_tol=1e-3)


def test_a_folder_read_back_keeps_the_split_fields(tmp_path):
    from eidecomp.cli import main
    from eidecomp.io.bundles import read_decomposition

    np.save(tmp_path / "w.npy", gabor_covariance(4, 4))
    assert main(["decompose", str(tmp_path / "w.npy"), "-o",
                 str(tmp_path / "out"), "-q"]) == 0
    dec, doc = read_decomposition(tmp_path / "out")
    assert dec.rank_band == doc["rank_band"]
    assert dec.support_density == doc["support_density"]
    assert dec.report.duality_gap == doc["duality_gap"]
    assert dec.verdict.line == doc["verdict"]["line"]


def test_a_summary_written_before_the_verdict_still_reads(tmp_path):
    # a decomposition folder of the earlier format: summary.json without
    # rank_band, support_density, verdict or the gap (its manifest digest
    # recomputed as the format's own writer does)
    from eidecomp.cli import main
    from eidecomp.io.bundles import DECOMPOSITION, read_decomposition, write_bundle

    np.save(tmp_path / "w.npy", gabor_covariance(4, 4))
    assert main(["decompose", str(tmp_path / "w.npy"), "-o",
                 str(tmp_path / "out"), "-q"]) == 0
    dec, doc = read_decomposition(tmp_path / "out")
    old = {k: v for k, v in doc.items()
           if k not in ("rank_band", "support_density", "verdict",
                        "duality_gap", "format", "version", "files",
                        "eidecomp_version", "sha256")}
    old["optimality"] = {k: v for k, v in doc["optimality"].items()
                         if k not in ("duality_gap", "dual_objective", "stop")}
    write_bundle(tmp_path / "old", DECOMPOSITION,
                 {"low_rank.npy": np.asarray(dec.low_rank),
                  "sparse.npy": np.asarray(dec.sparse)}, old)
    back, _ = read_decomposition(tmp_path / "old")
    assert back.verdict is None and back.rank_band == 0
    assert back.report.duality_gap is None
