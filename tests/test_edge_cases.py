"""Edge cases that must work: zeros, no inhibition, tiny sizes, rank one,
extreme scales, a UTF-8 byte-order mark.

References: positive homogeneity of PCP (Candes et al. 2011, eq. 1.1) for
the scales; exact answers known in closed form for each case (the
definition of the circuit, W_eff = J_EE - J_EI J_IE, and of a nonnegative
rank-one factorisation: -a b^T with a, b > 0 is one interneuron with input
weights b and output weights a); the UTF-8 signature as Python's "utf-8-sig"
codec defines it.
"""

import numpy as np
import pytest

from eidecomp import robust_pca
from eidecomp.assemble import assemble
from eidecomp.cli import main
from eidecomp.datasets import make_planted_circuit
from eidecomp.io import read_matrix


def test_all_zeros_gives_an_empty_circuit_and_says_so(tmp_path, capsys):
    W = np.zeros((12, 12))
    c = assemble(W, ei_ratio=4, baselines=False)
    assert (c.n_excitatory, c.n_inhibitory) == (12, 3)
    assert not np.any(c.signed_weights())
    assert c.report.relative_error == 0.0 and c.report.ee_density == 0.0
    assert c.report.notes == ("W is all zeros: the circuit has no connection",)
    np.save(tmp_path / "w.npy", W)
    assert main(["run", str(tmp_path / "w.npy"), "-o", str(tmp_path / "c")]) == 0
    assert "note: W is all zeros: the circuit has no connection" in \
        capsys.readouterr().out


def test_nonnegative_w_needs_no_interneuron(tmp_path, capsys):
    W = np.abs(np.random.default_rng(0).standard_normal((20, 20))) * 0.01
    c = assemble(W, ei_ratio=4, baselines=False)
    assert np.array_equal(c.J_EE, W)  # exact: J_EE = W
    assert not np.any(c.J_EI) and not np.any(c.J_IE)
    assert c.report.relative_error == 0.0
    assert c.report.notes == (
        "W has no negative entry, so no inhibition is needed: J_EE = W, and the "
        "5 interneurons of E:I 4:1 are kept but silent",)
    np.save(tmp_path / "w.npy", W)
    assert main(["run", str(tmp_path / "w.npy"), "-o", str(tmp_path / "c")]) == 0
    assert "no inhibition is needed" in capsys.readouterr().out


@pytest.mark.parametrize(("W", "ratio"), [
    (np.array([[-0.5]]), 1),
    (np.array([[0.5]]), 1),
    (np.array([[0.0, -0.3], [0.2, 0.0]]), 1),
    (np.array([[0.0, -0.3], [0.2, 0.0]]), 2),
])
def test_one_and_two_units(W, ratio):
    # the assembler itself on the smallest W; the 2-unit W obeys Dale's law,
    # whose own-neuron circuit tests/test_own_neurons.py checks
    c = assemble(W, ei_ratio=ratio, baselines=False, own_neurons=False)
    n = W.shape[0]
    assert (c.n_excitatory, c.n_inhibitory) == (n, round(n / ratio))
    signed = c.signed_weights()
    assert (signed[:, :n] >= 0).all() and (signed[:, n:] <= 0).all()
    assert np.allclose(c.J_EE - c.J_EI @ c.J_IE, W, atol=1e-6)


def test_one_and_two_units_on_the_command_line(tmp_path):
    for k, W in enumerate((np.array([[-0.5]]), np.array([[0.0, -0.3], [0.2, 0.0]]))):
        np.save(tmp_path / f"w{k}.npy", W)
        assert main(["run", str(tmp_path / f"w{k}.npy"), "-o",
                     str(tmp_path / f"c{k}"), "--ei-ratio", "1", "-q"]) == 0


def test_rank_one_inhibition_is_one_untuned_interneuron():
    rng = np.random.default_rng(1)
    a, b = rng.random(20) + 0.1, rng.random(20) + 0.1
    W = -0.1 * np.outer(a, b)
    dec = robust_pca(W)
    assert dec.rank == 1 and np.abs(dec.sparse).max() < 1e-8
    c = assemble(dec, ei_ratio=4, baselines=False)
    assert c.n_untuned == 1
    assert c.report.relative_error < 1e-8
    # the one interneuron's weights are a and b up to a scale
    u, v = c.J_EU[:, 0], c.J_UE[0]
    assert np.allclose(u / u.sum(), a / a.sum())
    assert np.allclose(v / v.sum(), b / b.sum())


@pytest.mark.parametrize("scale", [1e-12, 1e12])
def test_extreme_scales_give_the_same_circuit_scaled(scale):
    W, _, _ = make_planted_circuit(60, n_untuned=2, n_tuned=13, pool=4, seed=3)
    ref = assemble(W, baselines=False)
    c = assemble(scale * W, baselines=False)
    assert c.report.relative_error == pytest.approx(ref.report.relative_error,
                                                    rel=1e-6)
    assert np.allclose(c.J_EE, scale * ref.J_EE, rtol=1e-6, atol=1e-9 * scale)
    assert np.allclose(c.J_EI @ c.J_IE, scale * (ref.J_EI @ ref.J_IE),
                       rtol=1e-6, atol=1e-9 * scale)


def test_utf8_byte_order_mark_is_accepted(tmp_path):
    p = tmp_path / "w.csv"
    p.write_text("0,-0.5\n0.25,0\n", encoding="utf-8-sig")
    assert p.read_bytes()[:3] == b"\xef\xbb\xbf"
    assert np.array_equal(read_matrix(p), [[0.0, -0.5], [0.25, 0.0]])


def test_the_callers_mask_of_observed_entries_is_left_as_it_was():
    """The result keeps its own frozen copy of ``observed``: the caller's
    array stays writeable and shares no memory with it (numpy's flags and
    numpy.shares_memory)."""
    import numpy as np

    from eidecomp import robust_pca

    W = np.random.default_rng(0).normal(size=(20, 20))
    mask = np.ones((20, 20), bool)
    mask[0, 1] = False
    dec = robust_pca(W, observed=mask)
    assert mask.flags.writeable and not np.shares_memory(mask, dec.observed)
    assert not dec.observed.flags.writeable
    assert (dec.observed == mask).all()
