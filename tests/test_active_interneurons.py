"""No interneuron wasted, and one rule for what counts as a connection.

References: the brute-force enumeration of every inhibitory path with numpy
(for the connection floor, params.CONNECTION_RTOL); planted Dale's-law
circuits in which every interneuron has a pool and targets by construction
(eidecomp.datasets.make_planted_circuit), their pools matched one to one
with scipy.optimize.linear_sum_assignment.
"""

import numpy as np
import pytest
from scipy.optimize import linear_sum_assignment

from eidecomp import assemble
from eidecomp.assemble._support import apply_floor, inactive, restart
from eidecomp.datasets import make_planted_circuit
from eidecomp.params import CONNECTION_RTOL


def _paths_brute_force(A, B):
    """P[i, t, j] = A[i, t] B[t, j]: every path E_j -> I_t -> E_i."""
    return A[:, :, None] * B[None, :, :]


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_floor_keeps_exactly_the_weights_on_a_path_above_it(seed):
    rng = np.random.default_rng(seed)
    # weights spread over 12 decades, some interneurons all tiny
    A = 10.0 ** rng.uniform(-12, 0, (15, 6)) * (rng.random((15, 6)) < 0.6)
    B = 10.0 ** rng.uniform(-12, 0, (6, 15)) * (rng.random((6, 15)) < 0.6)
    A[:, 2] *= 1e-5
    B[2] *= 1e-5
    J = 10.0 ** rng.uniform(-12, 0, (15, 15))
    P = _paths_brute_force(A, B)
    keep_a = P.max(axis=2) >= CONNECTION_RTOL   # numpy, over all targets j
    keep_b = P.max(axis=0) >= CONNECTION_RTOL   # over all posts i
    keep_j = J >= CONNECTION_RTOL
    n_before = np.count_nonzero(A) + np.count_nonzero(B) + np.count_nonzero(J)
    removed = apply_floor(J, A, B)
    assert np.array_equal(A > 0, keep_a & (P.max(axis=2) > 0))
    assert np.array_equal(B > 0, keep_b & (P.max(axis=0) > 0))
    assert np.array_equal(J > 0, keep_j)
    n_after = np.count_nonzero(A) + np.count_nonzero(B) + np.count_nonzero(J)
    assert removed == n_before - n_after > 0
    # the rule keeps both sides of an interneuron or neither
    assert np.array_equal(A.any(axis=0), B.any(axis=1))
    assert 2 in inactive(A, B)


def test_restart_takes_the_largest_rank_one_piece_first():
    # two disjoint nonnegative rank-one blocks; numpy's SVD of each block is
    # the reference for its best rank-one fit
    R = np.zeros((10, 10))
    R[:3, 5:8] = np.outer([1.0, 2.0, 1.5], [1.0, 1.0, 2.0])
    R[6:9, 0:2] = 0.1 * np.outer([1.0, 1.0, 1.0], [1.0, 2.0])
    A, B = np.zeros((10, 3)), np.zeros((3, 10))
    started = restart(R, A, B, [1, 2, 0])
    assert started == [1, 2]           # nothing is left for the third
    for t, (rows, cols) in zip([1, 2], [(slice(0, 3), slice(5, 8)),
                                        (slice(6, 9), slice(0, 2))],
                               strict=True):
        block = R[rows, cols]
        s = np.linalg.svd(block, compute_uv=False)
        fit = np.outer(A[rows, t], B[t, cols])
        assert np.linalg.norm(block - fit) <= 1e-8 * s[0]
        assert np.count_nonzero(A[:, t]) == block.shape[0]
    assert not A[:, 0].any() and not B[0].any()


@pytest.mark.parametrize("n, n_u, seed", [(160, 3, 3), (200, 4, 5), (240, 6, 6)])
def test_planted_circuits_end_with_no_silent_interneuron(n, n_u, seed):
    # before new starts, these three left 1, 1 and 1 interneurons silent
    # and found pools with mean Jaccard 0.92, 0.88 and 0.85
    W, truth, _ = make_planted_circuit(n, n_untuned=n_u, n_tuned=n // 4 - n_u,
                                       seed=seed)
    c = assemble(W, ei_ratio="4:1", seed=seed, baselines=False)
    assert c.n_inhibitory == truth.n_inhibitory
    assert inactive(c.J_EI, c.J_IE).size == 0
    assert not any("active interneurons" in note for note in c.report.notes)
    # the tuned pools are found: mean Jaccard of the one-to-one matching
    P, Q = (c.J_TE > 0).astype(float), (truth.J_TE > 0).astype(float)
    inter = P @ Q.T
    jac = inter / np.maximum(P.sum(1)[:, None] + Q.sum(1)[None] - inter, 1)
    r, k = linear_sum_assignment(-jac)
    assert jac[r, k].mean() >= 0.95
    # and every weight of the circuit is on a path above the floor
    P = _paths_brute_force(c.J_EI, c.J_IE) / np.abs(W).max()
    on = P.max(axis=2)
    assert (on[c.J_EI > 0] >= CONNECTION_RTOL).all()
    assert (c.J_EE[c.J_EE > 0] >= CONNECTION_RTOL * np.abs(W).max()).all()


def test_a_matrix_that_supports_fewer_interneurons_says_so():
    # one inhibitory rank-one block: ten tuned interneurons are more than
    # W can use (numpy counts which ones carry anything)
    rng = np.random.default_rng(0)
    n = 40
    J = np.where(rng.random((n, n)) < 0.1, rng.uniform(0.5, 1.5, (n, n)), 0.0)
    a, b = np.zeros(n), np.zeros(n)
    a[:6], b[20:26] = rng.uniform(0.5, 1.5, 6), rng.uniform(0.5, 1.5, 6)
    W = J - np.outer(a, b)
    c = assemble(W, ei_ratio="4:1", baselines=False, untuned_share=0.0)
    n_active = int((c.J_EI.any(axis=0) & c.J_IE.any(axis=1)).sum())
    assert n_active < c.n_inhibitory == 10
    (note,) = [x for x in c.report.notes if "interneurons asked are active" in x]
    assert note.startswith(f"{n_active} of the 10 interneurons asked are active")
    # and it claims no more than it shows: W_eff without the silent ones is
    # the same, which says nothing of what W needs (issue 27)
    assert "W supports" not in note
    assert c.report.relative_error < 0.01


def test_the_report_counts_the_positive_entries_alpha_left_out():
    # W = J_EE - J_EI J_IE with nonnegative blocks, so every positive W_ij
    # needs J_EE_ij >= W_ij: those left out are what alpha cost (numpy
    # counts them); a larger alpha leaves out more
    W, _, _ = make_planted_circuit(120, n_untuned=3, n_tuned=27, seed=21)
    counts = []
    for alpha in (0.0, 0.2 * np.abs(W).max()):
        c = assemble(W, ei_ratio="4:1", alpha=alpha, baselines=False)
        W_eff = c.effective_weights()
        assert (c.J_EE >= W_eff - 1e-12).all()
        left = (W > 0) & (c.J_EE == 0)
        assert c.report.dropped == (int(left.sum()), int((W > 0).sum()),
                                    float(W[left].max()) if left.any() else 0.0)
        counts.append(c.report.dropped[0])
    assert counts[1] > counts[0]


def test_pool_counts_follow_the_floor():
    # the report's and circuit.json's pool sizes are the connections the
    # floor kept: numpy's count of nonzero weights, row by row
    from eidecomp.analysis import interneuron_pools

    W, _, _ = make_planted_circuit(120, n_untuned=3, n_tuned=27, seed=22)
    c = assemble(W, ei_ratio="4:1", baselines=False)
    pools = interneuron_pools(c)
    assert [p["n_inputs"] for p in pools] == np.count_nonzero(c.J_IE, 1).tolist()
    assert [p["n_targets"] for p in pools] == np.count_nonzero(c.J_EI, 0).tolist()
