"""The large-matrix path of the assembler, forced at small sizes.

Above EXACT_SVD_MAX units (and, for the sweeps, SPARSE_MIN_UNITS) the
assembler takes a randomized SVD for NNDSVD
(checked against numpy.linalg.svd), a greedy sparse start for the tuned
factorisation and accelerated HALS for the untuned one (checked against
the Karush-Kuhn-Tucker conditions of nonnegative least squares, Gillis
2014, section 3.1 from memory, with numpy); above NMF_MAX_UNITS the nmf baseline is left
out with a note. The planted circuits (eidecomp.datasets) have a pool and
targets for every interneuron by construction; pools are matched with
scipy.optimize.linear_sum_assignment.
"""

from importlib import import_module

import numpy as np
import pytest
from scipy.optimize import linear_sum_assignment

from eidecomp import assemble
from eidecomp.datasets import make_planted_circuit

# eidecomp.assemble is also the name of the function the package exports
asm = import_module("eidecomp.assemble._assemble")
bl = import_module("eidecomp.assemble._baselines")
nmf = import_module("eidecomp.assemble._nmf")
mixed = import_module("eidecomp.assemble._mixed_hals")


@pytest.fixture
def large_path(monkeypatch):
    monkeypatch.setattr(nmf, "EXACT_SVD_MAX", 50)
    monkeypatch.setattr(asm, "EXACT_SVD_MAX", 50)
    monkeypatch.setattr(mixed, "SPARSE_MIN_UNITS", 0)   # sparse sweeps too


def test_randomized_nndsvd_matches_the_exact_one(large_path):
    rng = np.random.default_rng(0)
    U = np.abs(rng.standard_normal((120, 4)))
    V = np.abs(rng.standard_normal((4, 90)))
    M = U @ np.diag([8.0, 4.0, 2.0, 1.0]) @ V     # rank 4, a clear gap
    A, B = nmf.nndsvd(M, 4, seed=1)
    s = np.linalg.svd(M, compute_uv=False)          # numpy, exact
    # NNDSVD's first component is the positive leading singular pair
    assert np.linalg.norm(A[:, 0]) * np.linalg.norm(B[0]) == pytest.approx(
        s[0], rel=1e-8)
    _, s40, _ = nmf._leading_svd(M[:40, :40], 4, 0)    # below: exact branch
    assert np.allclose(s40[:4], np.linalg.svd(M[:40, :40], compute_uv=False)[:4])
    _, s_r, _ = nmf._leading_svd(M, 4, 0)                # above: randomized
    assert np.allclose(s_r, s[:4], rtol=1e-8)


def test_accelerated_hals_meets_the_kkt_conditions():
    rng = np.random.default_rng(2)
    M = np.abs(rng.standard_normal((60, 50)))
    A0, B0 = nmf.nndsvd(M, 3)
    inner = nmf.inner_passes(60, 50, 3)
    assert inner > 1
    A, B, info = nmf.hals(M, A0, B0, max_iter=5000, tol=1e-14, inner=inner)
    h = np.asarray(info["history"])
    assert (np.diff(h) <= 1e-12 * h[0]).all()          # never increases
    R = A @ B - M
    gA, gB = R @ B.T, A.T @ R                           # numpy gradient
    scale = np.abs(M).max() * max(np.abs(A).max(), np.abs(B).max())
    assert np.abs(gA[A > 0]).max() <= 1e-5 * scale
    assert gA[A == 0].min(initial=0.0) >= -1e-5 * scale
    assert np.abs(gB[B > 0]).max() <= 1e-5 * scale
    # and it reaches plain HALS's objective (same problem, same start)
    _, _, plain = nmf.hals(M, A0, B0, max_iter=5000, tol=1e-14)
    assert h[-1] <= plain["history"][-1] * (1 + 1e-6)


@pytest.mark.parametrize("n, n_u, seed", [(160, 4, 11), (200, 5, 12)])
def test_the_large_path_builds_a_planted_circuit(large_path, monkeypatch, n,
                                                 n_u, seed):
    monkeypatch.setattr(bl, "NMF_MAX_UNITS", 100)
    W, truth, _ = make_planted_circuit(n, n_untuned=n_u, n_tuned=n // 4 - n_u,
                                       seed=seed)
    c = assemble(W, ei_ratio="4:1", seed=seed)
    assert (c.n_untuned, c.n_tuned) == (truth.n_untuned, truth.n_tuned)
    assert bool((c.signed_weights()[:, n:] <= 0).all())     # Dale's law
    assert (c.J_EI.any(axis=0) & c.J_IE.any(axis=1)).all()  # none silent
    assert c.report.relative_error < 0.02
    P, Q = (c.J_TE > 0).astype(float), (truth.J_TE > 0).astype(float)
    inter = P @ Q.T
    jac = inter / np.maximum(P.sum(1)[:, None] + Q.sum(1)[None] - inter, 1)
    r, k = linear_sum_assignment(-jac)
    assert jac[r, k].mean() >= 0.85
    names = {b.name for b in c.report.baselines}
    assert "nmf" not in names and {"private", "global", "drop"} <= names
    assert any("the nmf baseline" in note for note in c.report.notes)


def test_an_assembly_that_will_not_fit_is_refused_before_it_starts():
    # the estimate is checked before any N x N array is made: with a budget
    # below it, one InputError names the sizes and the memory figures
    from eidecomp.errors import InputError

    W, _, _ = make_planted_circuit(60, n_untuned=2, n_tuned=13, pool=4, seed=0)
    need = asm.assembly_bytes(60, 15)
    assert need == int(6.1 * 60 * 60 * 8) + 2 * 60 * 15 * (4 * 8 + 1)
    with pytest.raises(InputError, match="assembling 60 excitatory units and "
                                         "15 interneurons needs about"):
        assemble(W, max_bytes=need - 1, baselines=False)
    assert assemble(W, max_bytes=need, baselines=False).n_inhibitory == 15


@pytest.mark.filterwarnings("ignore::eidecomp.errors.ConvergenceWarning")
@pytest.mark.parametrize("n", [400, 2400])
def test_the_memory_estimate_bounds_what_assembly_allocates(n, monkeypatch):
    # Python's tracemalloc, which numpy reports its buffers to, measures the
    # peak of what assemble allocates beside its input (the decomposition);
    # it must stay within assembly_bytes, which the refusal above uses.
    # At 2,400 units the large path (greedy start) runs; 60 sweeps keep the
    # test short (the refinement may stop before its tolerance: ignored).
    import tracemalloc

    from eidecomp.decompose import robust_pca

    W, _, _ = make_planted_circuit(n, n_untuned=4, n_tuned=n // 4 - 4,
                                   pool=8, seed=1)
    dec = robust_pca(W, seed=0)
    del W
    tracemalloc.start()
    try:
        c = assemble(dec, baselines=False, max_iter=60)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak <= asm.assembly_bytes(n, c.n_inhibitory)
    assert peak >= 3 * n * n * 8          # W, J_EE and a residual: it is tight
    if n > nmf.EXACT_SVD_MAX:
        assert peak >= 0.8 * asm.assembly_bytes(n, c.n_inhibitory)
