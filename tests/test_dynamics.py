"""Rate dynamics of assembled circuits.

References: scipy.integrate.solve_ivp (the integrator), numpy.linalg.solve
and det (fixed points; det(I - W_full) = det(I + J_II) det(I - W_eff), the
Schur complement), and the Routh-Hurwitz criterion for a 2 x 2 Jacobian
(stable iff trace < 0 and det > 0), which gives an analytic stability limit.
"""

import numpy as np
import pytest

from eidecomp import assemble
from eidecomp.datasets import make_planted_circuit
from eidecomp.dynamics import (
    effective_from_full,
    fixed_point,
    jacobian,
    max_stable_tau_ratio,
    simulate,
    spectral_abscissa,
)
from eidecomp.types import Circuit


@pytest.fixture(scope="module")
def circuit100():
    # a 100 E / 25 I circuit from the assembler; W scaled so that the
    # original network dr/dt = -r + W r is stable
    W, _, _ = make_planted_circuit(100, n_untuned=3, n_tuned=22, pool=6, seed=2)
    W = 0.6 * W / max(1.0, spectral_abscissa(W))
    return W, assemble(W, ei_ratio="4:1", baselines=False)


@pytest.mark.parametrize("tau_ratio", [0.25, 1.0, 2.0])
def test_linear_simulation_reaches_fixed_point(circuit100, tau_ratio, rng):
    W, c = circuit100
    W_full = c.signed_weights()
    if spectral_abscissa(jacobian(W_full, 100, 1.0, tau_ratio)) >= 0:
        pytest.skip("circuit unstable at this ratio")
    h = rng.uniform(0.5, 1.5, 100)
    target = np.linalg.solve(np.eye(100) - c.effective_weights(), h)
    _, r = simulate(W_full, h, n_e=100, tau_e=1.0, tau_i=tau_ratio)
    np.testing.assert_allclose(r[:100, -1], target,
                               rtol=1e-6, atol=1e-6 * np.abs(target).max())
    # the full fixed point is the same, whatever the time constants
    full = fixed_point(W_full, np.r_[h, np.zeros(25)])
    np.testing.assert_allclose(full[:100], target, rtol=1e-9)


def test_threshold_linear_equivalence(circuit100, rng):
    # E units threshold-linear, interneurons linear: the circuit's E rates
    # match the original network's threshold-linear rates, silent units too
    W, c = circuit100
    W_eff = c.effective_weights()
    h = rng.uniform(-1.0, 1.5, 100)
    _, r_orig = simulate(W_eff, h, nonlinearity="relu", t_max=200.0)
    _, r_circ = simulate(c.signed_weights(), h, n_e=100, tau_i=0.5,
                         nonlinearity="relu", t_max=200.0)
    r0, r1 = r_orig[:, -1], r_circ[:100, -1]
    assert (r0 == 0).any() or (r0 < 1e-9).any()  # some units are silent
    np.testing.assert_allclose(r1, r0, atol=1e-6 * np.abs(r0).max())
    # and it is a fixed point of r = [W_eff r + h]_+
    np.testing.assert_allclose(np.maximum(W_eff @ r0 + h, 0), r0,
                               atol=1e-6 * np.abs(r0).max())


def test_effective_with_inhibitory_coupling(rng):
    n, m = 12, 4
    J_EE, J_EI = rng.random((n, n)) * 0.1, rng.random((n, m)) * 0.3
    J_IE, J_II = rng.random((m, n)) * 0.3, rng.random((m, m)) * 0.2
    W_full = np.block([[J_EE, -J_EI], [J_IE, -J_II]])
    W_eff = effective_from_full(W_full, n)
    np.testing.assert_allclose(
        W_eff, J_EE - J_EI @ np.linalg.solve(np.eye(m) + J_II, J_IE))
    h = rng.random(n)
    full = fixed_point(W_full, np.r_[h, np.zeros(m)])
    np.testing.assert_allclose(full[:n], np.linalg.solve(np.eye(n) - W_eff, h))
    np.testing.assert_allclose(
        np.linalg.det(np.eye(n + m) - W_full),
        np.linalg.det(np.eye(m) + J_II) * np.linalg.det(np.eye(n) - W_eff))


def _isn():
    # inhibition-stabilised pair: J_EE = 2, J_EI J_IE = 2, so W_eff = 0.
    # Jacobian [[1, -1], [2/t, -1/t]]: det 1/t > 0, trace 1 - 1/t < 0 iff t < 1
    return Circuit(J_EE=np.array([[2.0]]), J_EU=np.array([[1.0]]),
                   J_UE=np.array([[2.0]]), J_ET=np.zeros((1, 0)),
                   J_TE=np.zeros((0, 1)))


def test_stability_limit_is_routh_hurwitz():
    assert max_stable_tau_ratio(_isn()) == pytest.approx(1.0, rel=1e-3)


@pytest.mark.parametrize("ratio,grows", [(0.8, False), (1.25, True)])
def test_stability_limit_agrees_with_simulation(ratio, grows):
    W_full = _isn().signed_weights()
    t, r = simulate(W_full, np.array([0.0]), n_e=1, tau_i=ratio, t_max=60.0,
                    r0=np.array([1e-3, 0.0]))
    late, early = np.abs(r[:, -1]).max(), 1e-3
    assert (late > 10 * early) == grows
    assert (late < 0.1 * early) == (not grows)


def test_simulate_keeps_only_the_asked_times_and_bounds_its_work():
    # reference: the fixed point (I - W)^-1 h by numpy.linalg.solve. A run
    # asked for its end state returns one column (its memory does not grow
    # with the integrator's steps), and a run that would need more steps
    # than max_evaluations stops with one clear error instead of running on
    from eidecomp.dynamics import simulate
    from eidecomp.errors import InputError

    rng = np.random.default_rng(4)
    W = 0.3 * rng.standard_normal((20, 20)) / np.sqrt(20)
    h = rng.uniform(0.5, 1.5, 20)
    t, r = simulate(W, h, t_max=60.0, t_eval=(60.0,))
    assert t.shape == (1,) and r.shape == (20, 1)
    np.testing.assert_allclose(r[:, 0], np.linalg.solve(np.eye(20) - W, h),
                               rtol=1e-8)
    with pytest.raises(InputError, match="had not settled .* after 50 steps"):
        simulate(W, h, t_max=60.0, t_eval=(60.0,), max_evaluations=50)


def test_a_diverging_run_stops_at_the_bound():
    # dr/dt = -r + 2 r + 1 grows as e^t: the run ends where |r| passes
    # DIVERGED (about t = ln(1e100) = 230), long before t_max
    from eidecomp.dynamics import DIVERGED, simulate

    t, r = simulate(np.array([[2.0]]), np.array([1.0]), t_max=1e6,
                    t_eval=(1e6,))
    assert abs(r[0, -1]) >= DIVERGED * (1 - 1e-6)
    assert t[-1] == pytest.approx(np.log(DIVERGED), rel=1e-3)
