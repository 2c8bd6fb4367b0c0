"""The Dale's-law assembler.

References outside the project:
* scipy.optimize.nnls: each block update of the refinement is a nonnegative
  least-squares problem, and a converged HALS factor must be its solution;
* scipy.optimize.linear_sum_assignment: matches recovered tuned pools to the
  planted ones (the Jaccard criterion of the issue);
* numpy: the exact baselines reproduce W to rounding, and the global baseline's
  construction is the identity W = (W + e 1^T) - e 1^T (docs/assembly.md).
The planted circuits are synthetic ground truth (datasets.make_planted_circuit)
with disjoint J_EE and tuned supports, which makes them identifiable.
"""

import numpy as np
import pytest
from scipy.optimize import linear_sum_assignment, nnls

from eidecomp import assemble
from eidecomp.assemble import baselines, hals, nndsvd, parse_ratio
from eidecomp.assemble._baselines import global_interneuron, private_interneurons
from eidecomp.datasets import make_planted_circuit
from eidecomp.errors import InputError


def _f1(a, b):
    a, b = a > 0, b > 0
    return 2 * (a & b).sum() / (a.sum() + b.sum())


def _mean_jaccard(P, Q):
    P, Q = (P > 0).astype(float), (Q > 0).astype(float)
    inter = P @ Q.T
    union = P.sum(1)[:, None] + Q.sum(1)[None, :] - inter
    J = inter / np.maximum(union, 1)
    r, c = linear_sum_assignment(-J)
    return J[r, c].mean()


@pytest.fixture(scope="module")
def planted400():
    W, truth, features = make_planted_circuit(400, seed=0)
    return W, truth, features, assemble(W, ei_ratio="4:1", seed=0)


def test_dale_and_counts(planted400):
    W, truth, _, c = planted400
    full = c.signed_weights()
    n = c.n_excitatory
    assert (full[:, :n] >= 0).all() and (full[:, n:] <= 0).all()
    assert (c.n_excitatory, c.n_inhibitory) == (400, 100)
    assert (c.n_untuned, c.n_tuned) == (5, 95)  # auto: the rank of L


@pytest.mark.parametrize("ratio,share,expect", [
    ("4:1", 0.2, (15, 3, 12)), (5, "auto", (12, 2, 10)), ("3:2", 0.0, (40, 0, 40)),
    ("6", 1.0, (10, 10, 0))])
def test_counts_match_request(ratio, share, expect):
    W, _, _ = make_planted_circuit(60, n_untuned=2, n_tuned=13, pool=4, seed=5)
    c = assemble(W, ei_ratio=ratio, untuned_share=share, baselines=False)
    assert (c.n_inhibitory, c.n_untuned, c.n_tuned) == expect
    full = c.signed_weights()
    signs = np.sign(full)
    for j in range(full.shape[1]):  # one sign per presynaptic column
        col = signs[:, j][signs[:, j] != 0]
        assert col.size == 0 or (col == col[0]).all()


def test_planted_recovery(planted400):
    # the acceptance figures, on one seed (benchmarks/assemble.py
    # has the table over seeds and sizes)
    W, truth, _, c = planted400
    assert c.report.relative_error < 0.02
    assert _f1(c.J_EE, truth.J_EE) >= 0.9
    assert _mean_jaccard(c.J_TE, truth.J_TE) >= 0.7
    assert c.report.converged


def test_beats_baselines(planted400):
    W, _, _, c = planted400
    b = {x.name: x for x in c.report.baselines}
    # (d) at equal density: whichever of the two is denser is pruned
    if c.report.ee_density > b["nmf"].ee_density:
        assert b["circuit@density"].relative_error < b["nmf"].relative_error
    else:
        assert c.report.relative_error < b["nmf@density"].relative_error
    # (b) at equal error needs a far denser J_EE
    assert b["global@error"].relative_error == pytest.approx(
        c.report.relative_error)
    assert c.report.ee_density < 0.5 * b["global@error"].ee_density


def test_exact_baselines(rng):
    W = rng.standard_normal((30, 30))
    J, EI, IE = private_interneurons(W)
    np.testing.assert_allclose(J - EI @ IE, W, atol=1e-13)
    Jg, e, one = global_interneuron(W)
    np.testing.assert_allclose(Jg - e @ one, W, atol=1e-13)
    assert (Jg >= -1e-15).all() and (e >= 0).all()
    table = {b.name: b for b in baselines(W, 8)}
    assert table["private"].relative_error < 1e-14
    assert table["global"].relative_error < 1e-14
    assert table["drop"].relative_error == pytest.approx(
        np.linalg.norm(np.minimum(W, 0)) / np.linalg.norm(W))


def test_hals_factor_solves_nnls(rng):
    # after convergence each row of A is the NNLS solution for fixed B
    M = rng.random((25, 4)) @ rng.random((4, 30)) + 0.05 * rng.random((25, 30))
    A, B, info = hals(M, *nndsvd(M, 4), max_iter=5000, tol=1e-15)
    for i in range(M.shape[0]):
        ref, _ = nnls(B.T, M[i])
        np.testing.assert_allclose(A[i], ref, atol=1e-6 * np.abs(ref).max())
    h = np.array(info["history"])
    assert (np.diff(h) <= 1e-12 * h[0]).all()  # never increases


def test_refinement_never_increases(planted400):
    h = np.array(planted400[3].report.history)
    # two descents (with alpha, then debiasing); each is monotone
    breaks = np.flatnonzero(np.diff(h) > 1e-9 * h[0])
    assert len(breaks) <= 1


def test_deterministic():
    W, _, _ = make_planted_circuit(80, n_untuned=3, n_tuned=17, pool=4, seed=9)
    a = assemble(W, seed=4, baselines=False)
    b = assemble(W, seed=4, baselines=False)
    for name in ("J_EE", "J_EU", "J_UE", "J_ET", "J_TE"):
        np.testing.assert_array_equal(getattr(a, name), getattr(b, name))


@pytest.mark.parametrize("ratio,share,message", [
    (0, "auto", "must be positive"), (-1, "auto", "must be positive"),
    ("abc", "auto", "not a ratio"), (200, "auto", "leaves no interneuron"),
    (0.5, "auto", "more than the"), (4, 1.5, "outside [0, 1]"),
    (4, "most", "neither 'auto'")])
def test_impossible_requests(ratio, share, message):
    W, _, _ = make_planted_circuit(40, n_untuned=2, n_tuned=8, pool=4, seed=1)
    with pytest.raises(InputError, match=message.replace("[", r"\[")):
        assemble(W, ei_ratio=ratio, untuned_share=share)


def test_parse_ratio():
    assert parse_ratio("4:1") == 4.0 and parse_ratio("9:2") == 4.5
    with pytest.raises(InputError):
        parse_ratio("4:0")


def test_tuned_pools_are_tuned(planted400):
    from eidecomp.analysis import interneuron_pools

    _, _, features, c = planted400
    pools = interneuron_pools(c, features, 180.0)
    cv_u = [p["circular_variance"] for p in pools if p["kind"] == "untuned"]
    cv_t = [p["circular_variance"] for p in pools if p["kind"] == "tuned"]
    # dense random pools are broadly tuned; 8 neighbouring units are not
    assert np.median(cv_t) < 0.1 < np.min(cv_u)


def test_progress_reports_every_stage():
    W, _, _ = make_planted_circuit(60, n_untuned=2, n_tuned=13, pool=4, seed=3)
    seen = []
    c = assemble(W, progress=lambda stage, step, obj: seen.append((stage, step)))
    stages = [s for s, _ in seen]
    for stage in ("untuned factorisation", "tuned factorisation", "refinement",
                  "debiasing", "baselines"):
        assert stage in stages
    sweeps = sum(1 for s, k in seen if s in ("refinement", "debiasing") and k)
    assert sweeps == c.report.n_iter


def test_a_stopped_refinement_says_so():
    # the rule of the brief: a solver stopped before its tolerance warns and
    # records converged: false (errors.warn_stopped); planted circuit from
    # make_planted_circuit, two sweeps are far too few
    from eidecomp.errors import ConvergenceWarning

    W, _, _ = make_planted_circuit(60, n_untuned=2, n_tuned=13, pool=4, seed=3)
    with pytest.warns(ConvergenceWarning, match="circuit refinement stopped"):
        c = assemble(W, ei_ratio="4:1", baselines=False, max_iter=2)
    assert c.report.converged is False
