"""The stability guard (docs/assembly.md, "Stability guard"; issue 27), each
check against a reference outside the project:

* scipy.linalg.eigvals: the eigenvalues of the circuit's Jacobian
  T^-1 (-I + W_full) at the default time constants, computed here, decide
  stability; W's own, the same way;
* finite differences of scipy.linalg.eigvals: the guard's gradient of the
  rightmost eigenvalues is the first-order perturbation formula (Wilkinson
  1965, The Algebraic Eigenvalue Problem, ch. 2; from memory);
* scikit-learn's sample photographs (shipped with scikit-learn, through
  eidecomp.datasets.patch_partial_correlations): partial correlations of
  6x6 and 8x8 patches are stable W (rightmost eigenvalue 0.9992 and
  0.9996) whose closest circuit is not stable.
"""

import warnings
from importlib import import_module

import numpy as np
import pytest
import scipy.linalg

from eidecomp import assemble
from eidecomp.datasets import make_planted_circuit, patch_partial_correlations
from eidecomp.params import TAU_E_MS, TAU_I_MS, guard_line

_stab = import_module("eidecomp.assemble._stability")


def _jacobian_abscissa(c):
    """The rightmost real part of T^-1 (-I + W_full) by scipy."""
    M = c.signed_weights()
    n = c.n_excitatory
    tau = np.r_[np.full(n, TAU_E_MS), np.full(c.n_inhibitory, TAU_I_MS)]
    J = (M - np.eye(M.shape[0])) / tau[:, None]
    return float(scipy.linalg.eigvals(J).real.max())


def _assembled(W, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        # a sweep budget the free refinement converges within on these
        # patches (about 650 sweeps), so that its error is a local optimum
        return assemble(W, ei_ratio="4:1", baselines=False, max_iter=5000, **kw)


@pytest.fixture(scope="module", params=[6, 8])
def photo(request):
    W = patch_partial_correlations(request.param)
    return W, _assembled(W, stability_guard=False), _assembled(W)


def test_photograph_matrices_are_stable_and_their_closest_circuit_is_not(photo):
    W, free, _ = photo
    assert scipy.linalg.eigvals(W).real.max() < 1.0
    assert _jacobian_abscissa(free) > 0
    assert free.report.guard is None


def test_the_guard_makes_the_circuit_stable_and_reports_its_cost(photo):
    W, free, guarded = photo
    g = guarded.report.guard
    assert g is not None and g.stable
    assert _jacobian_abscissa(guarded) < 0
    assert g.abscissa_after == pytest.approx(_jacobian_abscissa(guarded),
                                             abs=1e-9)
    assert g.abscissa_before == pytest.approx(_jacobian_abscissa(free),
                                              abs=1e-9)
    err = np.linalg.norm(W - guarded.effective_weights()) / np.linalg.norm(W)
    assert guarded.report.relative_error == pytest.approx(err, rel=1e-9)
    assert g.error_after == pytest.approx(err, rel=1e-9)
    assert g.error_before == pytest.approx(free.report.relative_error,
                                           rel=1e-9)
    # stability is paid for: the free fit stopped at a local optimum (its
    # refinement converged), and the guard can only move away from it
    assert free.report.converged
    assert g.error_after >= g.error_before
    assert "stability guard: relative error" in guard_line(
        guarded.report.as_dict())


def test_the_guard_keeps_the_excitation_rules(photo):
    W, free, guarded = photo
    assert not guarded.J_EE[W <= 0].any()            # J_EE only where W > 0
    assert not np.diag(guarded.J_EE).any()           # W's diagonal is 0
    assert not (guarded.J_EE > 0)[free.J_EE == 0].any()  # no new E -> E
    assert (guarded.n_untuned, guarded.n_tuned) == (free.n_untuned,
                                                    free.n_tuned)


def test_a_stable_circuit_is_left_alone():
    W, _, _ = make_planted_circuit(60, n_untuned=2, n_tuned=13, pool=4, seed=3)
    with_guard, without = _assembled(W), _assembled(W, stability_guard=False)
    assert with_guard.report.guard is None
    assert guard_line(with_guard.report.as_dict()) == ""
    np.testing.assert_array_equal(with_guard.J_EE, without.J_EE)
    np.testing.assert_array_equal(with_guard.J_EI, without.J_EI)


def test_penalty_gradient_matches_finite_differences_of_scipy_eigvals():
    rng = np.random.default_rng(0)
    n = 12
    M = rng.normal(0.0, 0.5, (n, n))
    tau = np.r_[np.full(8, TAU_E_MS), np.full(4, TAU_I_MS)]
    margin = 0.5                                     # several terms active

    def penalty(M):
        lam = scipy.linalg.eigvals((M - np.eye(n)) / tau[:, None])
        hit = np.maximum(lam.real + margin, 0.0)
        return 0.5 * float(hit @ hit)

    p, G, top = _stab.penalty_gradient(M, tau, margin)
    assert p == pytest.approx(penalty(M), rel=1e-10)
    assert top == pytest.approx(
        scipy.linalg.eigvals((M - np.eye(n)) / tau[:, None]).real.max())
    h = 1e-6
    for i, j in rng.integers(0, n, (10, 2)):
        E = np.zeros((n, n))
        E[i, j] = h
        fd = (penalty(M + E) - penalty(M - E)) / (2 * h)
        assert G[i, j] == pytest.approx(fd, rel=1e-4, abs=1e-9)


def test_a_larger_circuit_runs_from_the_capped_start_alone(monkeypatch):
    """Above GUARD_REFINED_START_MAX_UNITS only the capped start runs
    (docs/assembly.md, "Stability guard"); the circuit still ends stable by
    scipy's eigenvalues. 6x6 patches (45 units) stand in for a large
    circuit by lowering the limit below their size."""
    W = patch_partial_correlations(6)

    def starts(**kw):
        told = []
        c = _assembled(W, progress=lambda stage, *a: told.append(stage), **kw)
        return c, [s for s in told if s.startswith("stability guard")]

    both, told_both = starts()
    assert len(told_both) == 2
    monkeypatch.setattr(_stab, "GUARD_REFINED_START_MAX_UNITS", 40)
    capped, told = starts()
    assert told == ["stability guard from J_EE at most W's positive side"]
    assert _jacobian_abscissa(capped) < 0
    assert capped.report.guard.stable
    # the capped start alone can only be as good as the better of two
    assert (capped.report.relative_error
            >= both.report.relative_error - 1e-12)


def test_a_circuit_too_large_for_the_guard_says_so(monkeypatch):
    """Above GUARD_MAX_UNITS the guard does not run; the stability line
    names the limit and the circuit's size. Stability is judged by scipy's
    eigenvalues; 6x6 patches (45 units) stand in for a large circuit."""
    from eidecomp.dynamics import stability_summary

    W = patch_partial_correlations(6)
    monkeypatch.setattr(_stab, "GUARD_MAX_UNITS", 40)
    c = _assembled(W)
    assert c.report.guard is None and c.report.guard_limit == 40
    assert _jacobian_abscissa(c) > 0           # left unstable, as W's fit is
    why = stability_summary(c, W, tau_ratio=TAU_I_MS / TAU_E_MS)["why"]
    assert why.endswith("the stability guard runs on circuits of up to 40 "
                        "units and this one has 45, so it did not run")
    off = _assembled(W, stability_guard=False)
    assert off.report.guard_limit is None      # off: nothing to explain
    monkeypatch.undo()                         # within the limit: it runs
    assert _assembled(W).report.guard is not None
