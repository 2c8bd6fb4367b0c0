"""Stability at any size: ARPACK on the Jacobian operator, the search for
the largest stable tau_I / tau_E, and the summary above 800 units.

References: numpy.linalg.eigvals (the dense spectrum, the reference of every
ARPACK value here), numpy products (the dense Jacobian T^-1 (-I + W_full)),
and the Routh-Hurwitz criterion for 2 x 2 blocks (stable iff trace < 0 and
det > 0), which gives the limit of a circuit of uncoupled E-I pairs in closed
form.
"""

import warnings

import numpy as np
import pytest
from scipy import sparse

from eidecomp import assemble, dynamics
from eidecomp.analysis import interneuron_pools
from eidecomp.datasets import make_planted_circuit
from eidecomp.dynamics import (
    circuit_abscissa,
    jacobian,
    jacobian_operator,
    max_stable_tau_ratio,
    scaled_circuit,
    spectral_abscissa,
    stability_summary,
)
from eidecomp.errors import ConvergenceWarning, InputError, SolverFallbackWarning
from eidecomp.io import bundles
from eidecomp.types import AssemblyReport, Circuit


def _rightmost(A):
    """The reference: max Re of numpy.linalg.eigvals."""
    return float(np.max(np.linalg.eigvals(A).real))


def _dense_jacobian(c, tau_e, tau_i):
    return jacobian(c.signed_weights(), c.n_excitatory, tau_e, tau_i)


def _planted(n_e, gain_share, seed):
    """make_planted_circuit's truth, scaled to gain_share / max Re eig(W)."""
    W, c, _ = make_planted_circuit(n_e, n_untuned=3, n_tuned=n_e // 4 - 3,
                                   pool=8, seed=seed)
    g = gain_share / _rightmost(W)
    return scaled_circuit(c, g), g * W


def _pairs(n, *, coupling=0.0, seed=0):
    """n E-I pairs: J_EE = a_k (plus a sparse random coupling), each E unit
    inhibited by its own interneuron (1) which it drives with b_k = a_k + 0.5.
    Uncoupled, pair k's Jacobian [[a-1, -1], [b/t, -1/t]] (tau_E = 1,
    tau_I = t) has det (b - a + 1)/t > 0 and trace a - 1 - 1/t, so the
    circuit is stable iff t < 1 / (max a - 1) (Routh-Hurwitz)."""
    rng = np.random.default_rng(seed)
    a = rng.uniform(1.1, 1.5, n)
    J_EE = np.diag(a)
    if coupling:
        J_EE = J_EE + coupling * sparse.random(
            n, n, density=0.05, random_state=rng, format="csr").toarray()
    return Circuit(J_EE=J_EE, J_EU=np.eye(n), J_UE=np.diag(a + 0.5),
                   J_ET=np.zeros((n, 0)), J_TE=np.zeros((0, n))), a


@pytest.fixture(scope="module")
def assembled():
    # the assembler's own circuit of a planted 80-unit W (stable original)
    W, _, _ = make_planted_circuit(80, n_untuned=3, n_tuned=17, pool=6, seed=4)
    return assemble(0.6 * W / _rightmost(W), ei_ratio="4:1", baselines=False)


def test_operator_is_the_dense_jacobian(rng):
    _, c, _ = make_planted_circuit(40, n_untuned=2, n_tuned=8, pool=4, seed=3)
    for tau_e, tau_i in ((1.0, 1.0), (10.0, 5.0), (2.0, 30.0)):
        A = jacobian_operator(c.J_EE, c.J_EI, c.J_IE, tau_e=tau_e, tau_i=tau_i)
        ref = _dense_jacobian(c, tau_e, tau_i)  # numpy: (W_full - I) / tau
        np.testing.assert_allclose(A @ np.eye(50), ref, rtol=1e-14, atol=1e-15)
        x = rng.standard_normal(50)
        np.testing.assert_allclose(A @ x, ref @ x, rtol=1e-12, atol=1e-13)
    # sparse blocks give the same operator
    S = jacobian_operator(sparse.csr_array(c.J_EE), sparse.csc_array(c.J_EI),
                          c.J_IE, tau_e=10.0, tau_i=5.0)
    np.testing.assert_allclose(S @ np.eye(50), _dense_jacobian(c, 10.0, 5.0),
                               rtol=1e-14, atol=1e-15)
    with pytest.raises(InputError, match="do not fit"):
        jacobian_operator(c.J_EE, c.J_EI, c.J_IE.T)
    with pytest.raises(InputError, match="time constants must be positive"):
        jacobian_operator(c.J_EE, c.J_EI, c.J_IE, tau_i=0.0)


@pytest.mark.parametrize("n_e,share,seed,ratio", [
    (160, 0.9, 0, 0.2),     # 200 units, stable
    (160, 1.3, 1, 5.0),     # unstable: positive abscissa
    (400, 0.99, 2, 1.0),    # 500 units
    (640, 0.9, 0, 3.0),     # 800 units
])
def test_arpack_agrees_with_dense_on_planted_circuits(n_e, share, seed, ratio):
    c, W = _planted(n_e, share, seed)
    a = circuit_abscissa(c, tau_i=ratio, method="arpack", seed=seed)
    ref = _rightmost(_dense_jacobian(c, 1.0, ratio))  # numpy.linalg.eigvals
    assert a == pytest.approx(ref, rel=1e-9, abs=1e-10)
    assert (a > 0) == (share > 1)
    # the original network too (a dense W, as an operator)
    assert spectral_abscissa(W, method="arpack") == pytest.approx(share, rel=1e-9)


def test_arpack_agrees_with_dense_on_an_assembled_circuit(assembled):
    for ratio in (0.5, 2.0, 8.0):
        a = circuit_abscissa(assembled, tau_i=ratio, method="arpack")
        ref = _rightmost(_dense_jacobian(assembled, 1.0, ratio))  # numpy
        assert a == pytest.approx(ref, rel=1e-9, abs=1e-10)


def _ginibre(n, seed):
    # circular law (Girko 1984; Tao and Vu 2010 for general i.i.d. entries,
    # from memory): eigenvalues fill the unit disc, the rightmost near its rim
    return np.random.default_rng(seed).standard_normal((n, n)) / np.sqrt(n)


def _ei_random(n, seed):
    # 80 % E columns >= 0, 20 % I columns <= 0 (Rajan and Abbott 2006 style,
    # from memory): a bulk and a real outlier; unstable as -I + A
    rng = np.random.default_rng(seed)
    A = np.abs(rng.standard_normal((n, n))) * (rng.random((n, n)) < 0.2)
    A[:, int(0.8 * n):] *= -3.0
    return 1.3 * A / _rightmost(A)


def _shear(n, seed):
    # strongly non-normal: an upper triangle on a spread diagonal
    rng = np.random.default_rng(seed)
    return np.triu(rng.standard_normal((n, n)), 1) / np.sqrt(n) \
        + np.diag(rng.uniform(-2.0, -0.5, n))


@pytest.mark.parametrize("make,n", [(_ginibre, 600), (_ei_random, 600),
                                    (_shear, 500)])
def test_arpack_agrees_with_dense_on_random_matrices(make, n):
    A = make(n, seed=5)
    ref = _rightmost(A)  # numpy.linalg.eigvals
    a = spectral_abscissa(A, method="arpack", seed=1)
    assert a == pytest.approx(ref, rel=1e-9, abs=1e-10)
    if make is _ei_random:
        assert a > 1.0  # -I + A grows
        # the same as a sparse matrix
        assert spectral_abscissa(sparse.csr_array(A), method="arpack") == \
            pytest.approx(ref, rel=1e-9, abs=1e-10)


def _dense_scan_limit(c, lo, hi):
    """First unstable tau_I / tau_E by numpy.linalg.eigvals on a log grid of
    21 ratios (5 a decade), refined twice by a grid of 21 in the crossing
    interval: bracketed to a factor 1.0012."""
    def unstable(t):
        return _rightmost(_dense_jacobian(c, 1.0, t)) >= 0

    for _ in range(3):
        grid = np.geomspace(lo, hi, 21)
        j = next(j for j, t in enumerate(grid) if unstable(t))
        assert j > 0
        lo, hi = grid[j - 1], grid[j]
    return lo, hi


def test_bisection_agrees_with_a_dense_fine_scan():
    c, _ = _pairs(80, coupling=0.05, seed=2)  # 160 units, coupled pairs
    lo, hi = _dense_scan_limit(c, 1e-2, 1e2)
    assert hi / lo < 1.0012
    for method in ("arpack", "dense"):
        r = max_stable_tau_ratio(c, lo=1e-2, hi=1e2, n_grid=9, rtol=1e-5,
                                 method=method)
        assert lo * (1 - 1e-5) <= r <= hi
    # and the limit is a real crossing: stable below, unstable above
    assert _rightmost(_dense_jacobian(c, 1.0, r * (1 - 1e-4))) < 0
    assert _rightmost(_dense_jacobian(c, 1.0, r * (1 + 1e-4))) > 0


def test_bisection_is_routh_hurwitz_on_uncoupled_pairs():
    c, a = _pairs(60)
    r = max_stable_tau_ratio(c, lo=1e-2, hi=1e2, n_grid=9, rtol=1e-6,
                             method="arpack")
    assert r == pytest.approx(1.0 / (a.max() - 1.0), rel=2e-6)


def test_summary_above_800_units_is_not_skipped(tmp_path):
    # 450 E-I pairs: 900 units, ARPACK throughout
    c, a = _pairs(450, seed=7)
    c = Circuit(J_EE=c.J_EE, J_EU=c.J_EU, J_UE=c.J_UE, J_ET=c.J_ET, J_TE=c.J_TE,
                report=AssemblyReport(relative_error=0.0, ee_density=0.0,
                                      share_rule="pairs"))
    W = c.effective_weights()  # diag(a - b) = -0.5 I
    s = stability_summary(c, W)
    assert s["eigenvalue_method"].startswith("ARPACK")
    assert "skipped" not in s["note"]
    assert s["original_spectral_abscissa"] == pytest.approx(-1.5, rel=1e-9)
    # equal taus: trace a - 2 and det 1.5 > (a - 2)^2 / 4, so Re = (a - 2) / 2
    assert s["circuit_spectral_abscissa_equal_taus"] == pytest.approx(
        (a.max() - 2.0) / 2.0, rel=1e-9)
    # Routh-Hurwitz limit, to the summary's bisection tolerance (1e-3)
    assert s["max_stable_tau_ratio"] == pytest.approx(1.0 / (a.max() - 1.0),
                                                      rel=1.5e-3)
    # circuit.json takes it and reads it back
    doc = bundles.circuit_doc(c, source={"path": "pairs"}, decomposition={},
                              stability=s, pools=interneuron_pools(c),
                              parameters={})
    bundles.write_circuit(tmp_path / "c", c, doc)
    back = bundles.read_circuit_bundle(tmp_path / "c").doc["stability"]
    assert back["max_stable_tau_ratio"] == s["max_stable_tau_ratio"]


def test_planted_circuit_above_800_units_against_dense():
    c, W = _planted(660, 0.99, 1)  # 825 units
    s = stability_summary(c, W)
    assert s["original_spectral_abscissa"] == pytest.approx(0.99 - 1.0, rel=1e-8)
    assert s["circuit_spectral_abscissa_equal_taus"] == pytest.approx(
        _rightmost(_dense_jacobian(c, 1.0, 1.0)), rel=1e-9)  # numpy
    r = s["max_stable_tau_ratio"]
    assert r is not None
    assert _rightmost(_dense_jacobian(c, 1.0, r * (1 - 1e-3))) < 0
    assert _rightmost(_dense_jacobian(c, 1.0, r * (1 + 2e-3))) > 0


def test_arpack_that_does_not_converge_falls_back(monkeypatch):
    A = _ginibre(300, seed=3)
    ref = _rightmost(A)  # numpy.linalg.eigvals
    monkeypatch.setattr(dynamics, "_ARPACK_TRIES", ((6, 14, 1),))
    with pytest.warns(SolverFallbackWarning, match="solved it densely"):
        assert spectral_abscissa(A, method="arpack") == ref
    # too large for the dense fallback: a ConvergenceWarning and a lower bound
    monkeypatch.setattr(dynamics, "DENSE_FALLBACK_UNITS", 100)
    with pytest.warns(ConvergenceWarning, match="lower bound"):
        a = spectral_abscissa(A, method="arpack")
    assert np.isnan(a) or a <= ref + 1e-9


def test_seeded_and_quiet():
    c, _ = _planted(640, 0.9, 0)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        a = circuit_abscissa(c, tau_i=2.0, method="arpack", seed=3)
    assert circuit_abscissa(c, tau_i=2.0, method="arpack", seed=3) == a
    with pytest.raises(InputError, match="unknown eigenvalue method"):
        spectral_abscissa(np.eye(3), method="lanczos")
