"""Convolutional kernels on a grid: the structured solver against the dense
one on the expanded matrix.

References: numpy's SVD and norms of the expanded matrix (the norm
identities of docs/kernels.md), and eidecomp's dense ALM on the expanded
matrix, itself checked against cvxpy/Clarabel and tensorly in
test_against_cvxpy.py and test_tensorly.py. The planted kernels (a rank-one
feature coupling constant over space, one at a single spatial frequency, and
5 % sparse +-1 entries) are drawn here with a seed.
"""

import json

import numpy as np
import pytest

from eidecomp import robust_pca, robust_pca_kernel
from eidecomp.cli import main
from eidecomp.errors import InputError
from eidecomp.kernels import expand, expand_full, full_grid, kernel_norms


def _planted_full(F, grid, seed):
    """A full-grid kernel (F, F, H, W): low rank at two frequencies + sparse."""
    rng = np.random.default_rng(seed)
    h, w = grid
    G = np.outer(rng.standard_normal(F), rng.standard_normal(F))[:, :, None, None] \
        * 0.3 * np.ones((1, 1, h, w))
    wave = np.cos(2 * np.pi * np.arange(h) / h)[:, None] * np.ones(w)
    G = G + np.outer(rng.standard_normal(F), rng.standard_normal(F))[:, :, None,
                                                                      None] * 0.3 * wave
    G += (rng.random(G.shape) < 0.05) * rng.choice([-1.0, 1.0], G.shape)
    return G


def test_norm_identities(rng):
    K = rng.standard_normal((3, 3, 3, 3))
    M = expand(K, (6, 5))
    nuc, l1, fro = kernel_norms(full_grid(K, (6, 5)))
    assert nuc == pytest.approx(np.linalg.svd(M, compute_uv=False).sum(), rel=1e-12)
    assert l1 == pytest.approx(np.abs(M).sum(), rel=1e-12)
    assert fro == pytest.approx(np.linalg.norm(M), rel=1e-12)


def test_expansion_convention(rng):
    K = rng.standard_normal((2, 2, 3, 3))
    h, w = 5, 4
    M, Mz = expand(K, (h, w)), expand(K, (h, w), "zero")

    def unit(k, y, x):
        return k * h * w + y * w + x

    # onto (feature 1, row 2, col 1) from (feature 0, row 3, col 0): offset (1, -1)
    assert M[unit(1, 2, 1), unit(0, 3, 0)] == K[1, 0, 2, 0]
    # across the edge: periodic wraps, zero does not
    assert M[unit(1, 0, 0), unit(0, 4, 0)] == K[1, 0, 0, 1]
    assert Mz[unit(1, 0, 0), unit(0, 4, 0)] == 0.0
    np.testing.assert_array_equal(expand_full(full_grid(K, (h, w))), M)


@pytest.mark.parametrize("F,grid", [(4, (8, 8)), (6, (12, 12))])
def test_structured_equals_dense_full_grid(F, grid):
    G = _planted_full(F, grid, seed=F)
    dec = robust_pca_kernel(G, grid, offsets=True)
    dense = robust_pca(expand_full(G), lam=dec.lam)
    assert dec.converged and dense.converged
    L = expand_full(dec.low_rank)
    assert np.linalg.norm(L - dense.low_rank) / np.linalg.norm(dense.low_rank) < 1e-5
    assert dec.objective == pytest.approx(dense.objective, rel=1e-8)
    assert dec.rank == dense.rank  # per-frequency ranks add up


@pytest.mark.parametrize("F,n", [(4, 9), (6, 13)])
def test_structured_equals_dense_centred_kernel(F, n):
    G = _planted_full(F, (n, n), seed=F + 1)
    from eidecomp.kernels import to_local

    K = to_local(G)  # odd grid: the centred kernel covers every offset
    dec = robust_pca_kernel(K, (n, n))
    dense = robust_pca(expand(K, (n, n)), lam=dec.lam)
    L = expand_full(dec.low_rank)
    assert np.linalg.norm(L - dense.low_rank) / np.linalg.norm(dense.low_rank) < 1e-5
    assert dec.objective == pytest.approx(dense.objective, rel=1e-8)


def test_dense_optimum_is_translation_invariant():
    # the argument of docs/kernels.md: the dense solver, which knows nothing
    # of the grid, returns an L that commutes with grid translations
    F, h, w = 3, 6, 6
    G = _planted_full(F, (h, w), seed=3)
    L = robust_pca(expand_full(G)).low_rank.reshape(F, h, w, F, h, w)
    shifted = np.roll(np.roll(L, 1, axis=(1, 4)), 2, axis=(2, 5))
    np.testing.assert_allclose(shifted, L, atol=1e-7 * np.abs(L).max())


def test_zero_boundary_goes_dense_and_refuses_what_does_not_fit(rng):
    K = rng.standard_normal((2, 2, 3, 3))
    dec = robust_pca_kernel(K, (4, 4), boundary="zero")
    assert dec.low_rank.shape == (32, 32)
    with pytest.raises(InputError, match="GiB"):
        expand(K, (64, 64), "zero", max_bytes=2**20)


def test_kernel_command(tmp_path, capsys):
    G = _planted_full(4, (8, 8), seed=4)
    from eidecomp.kernels import to_local

    np.save(tmp_path / "k.npy", to_local(G, radius=3))
    out = tmp_path / "o"
    assert main(["decompose", "--kernel", str(tmp_path / "k.npy"), "--grid",
                 "8x8", "-o", str(out)]) == 0
    summary = json.loads((out / "summary.json").read_text())
    assert summary["format"] == "eidecomp-kernel-decomposition"
    assert np.load(out / "low_rank_kernel.npy").shape == (4, 4, 8, 8)
    assert np.load(out / "ranks.npy").sum() == summary["rank"]
    np.save(tmp_path / "bad3d.npy", np.zeros((4, 4, 3)))
    np.save(tmp_path / "even.npy", np.zeros((4, 4, 2, 2)))
    for args, msg in [
        (["--kernel", str(tmp_path / "k.npy")], "needs --grid"),
        (["--kernel", str(tmp_path / "k.npy"), "--grid", "4x4"], "larger than"),
        (["--kernel", str(tmp_path / "k.npy"), "--grid", "axb"], "HxW"),
        (["--kernel", str(tmp_path / "bad3d.npy"), "--grid", "8x8"], "4-D"),
        (["--kernel", str(tmp_path / "even.npy"), "--grid", "8x8"], "odd"),
        (["--kernel", str(tmp_path / "none.npy"), "--grid", "8x8"], "no such file"),
    ]:
        capsys.readouterr()
        assert main(["decompose", *args, "-o", str(tmp_path / "x")]) == 2
        err = capsys.readouterr().err
        assert msg in err and "Traceback" not in err
        assert not (tmp_path / "x").exists()


# the refinement may stop at its sweep limit here, and says so (a
# ConvergenceWarning, tested in test_simulation.py); these tests check the
# circuit it gives, not its stop
@pytest.mark.filterwarnings("ignore::eidecomp.errors.ConvergenceWarning")
@pytest.mark.parametrize("F,grid", [(4, (8, 8)), (8, (6, 6))])
def test_tiled_circuit_matches_the_dense_assembler(F, grid):
    # reference: the dense assembler (test_assemble.py) on the expanded matrix
    from eidecomp import assemble
    from eidecomp.assemble import assemble_tiled

    G = _planted_full(F, grid, seed=F)
    tiled = assemble_tiled(robust_pca_kernel(G, grid, offsets=True), G)
    c = tiled.expand()
    n_e = F * grid[0] * grid[1]
    assert c.n_excitatory == n_e
    assert c.n_inhibitory == round(F / 4) * grid[0] * grid[1]
    full = c.signed_weights()
    assert (full[:, :n_e] >= 0).all() and (full[:, n_e:] <= 0).all()
    # the expanded circuit is exactly the tiled one
    np.testing.assert_allclose(c.effective_weights(),
                               expand_full(tiled.effective_kernel()), atol=1e-12)
    M = expand_full(G)
    err = np.linalg.norm(M - c.effective_weights()) / np.linalg.norm(M)
    assert err == pytest.approx(tiled.relative_error, rel=1e-9)
    # the tiled assembler is the unconstrained construction (ee_support
    # "any"): "the same error as the dense assembler" of that construction,
    # no worse than it, to 10 %
    dense = assemble(M, baselines=False, ee_support="any")
    assert err <= 1.1 * dense.report.relative_error


@pytest.mark.filterwarnings("ignore::eidecomp.errors.ConvergenceWarning")
def test_tiled_expansion_checks_memory():
    from eidecomp.assemble import assemble_tiled

    G = _planted_full(4, (6, 6), seed=1)
    tiled = assemble_tiled(robust_pca_kernel(G, (6, 6), offsets=True), G,
                           max_iter=5)
    with pytest.raises(InputError, match="GiB"):
        tiled.expand(max_bytes=1000)


def test_tiled_assemble_command(tmp_path, capsys):
    from eidecomp.io import read_circuit
    from eidecomp.kernels import to_local

    G = _planted_full(8, (7, 7), seed=2)
    np.save(tmp_path / "k.npy", to_local(G))
    assert main(["assemble", "--kernel", str(tmp_path / "k.npy"), "--grid",
                 "7x7", "-o", str(tmp_path / "t")]) == 0
    doc = json.loads((tmp_path / "t" / "tiled.json").read_text())
    assert doc["per_site"] == {"excitatory": 8, "untuned": 1, "tuned": 1}
    assert np.load(tmp_path / "t" / "J_EU_kernel.npy").shape == (8, 1, 7, 7)
    assert main(["assemble", "--kernel", str(tmp_path / "k.npy"), "--grid",
                 "7x7", "-o", str(tmp_path / "x"), "--expand"]) == 0
    c, meta = read_circuit(tmp_path / "x")  # a regular, checksummed bundle
    assert (c.n_excitatory, c.n_inhibitory) == (392, 98)
    assert "expanded it is 490 units" in capsys.readouterr().out
    assert main(["assemble", "--kernel", str(tmp_path / "k.npy"), "--grid",
                 "7x7", "-o", str(tmp_path / "y"), "--ei-ratio", "20"]) == 2
    assert "no interneuron per site" in capsys.readouterr().err
