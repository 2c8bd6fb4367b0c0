"""`eidecomp simulate` on a network whose linear dynamics are unstable: the
largest stable gain in the refusal, --gain, and the threshold-linear model.

References: numpy.linalg.eigvals (the eigenvalues of -I + g W are
-1 + g lambda, so g W is stable iff g max Re lambda < 1), numpy.linalg.solve
(the fixed point of the scaled network) and scipy.integrate.solve_ivp (an
independent RK45 run of the threshold-linear networks, written here).
"""

import re
import shlex

import numpy as np
import pytest
from conftest import write_planted_bundle
from scipy.integrate import solve_ivp

from eidecomp.cli import main
from eidecomp.datasets import make_planted_circuit
from eidecomp.dynamics import largest_stable_gain, scaled_circuit
from eidecomp.errors import InputError
from eidecomp.io import bundles
from eidecomp.pipeline import run_simulate
from eidecomp.simulation import Unstable, compare_with_original

G_STAR = 0.9737  # the planted network is scaled to max Re eig(W) = 1 / G_STAR


def _rightmost(A):
    return float(np.max(np.linalg.eigvals(A).real))


@pytest.fixture(scope="module")
def unstable():
    """A planted circuit (60 E, 15 I) and an original W = W_eff + noise,
    scaled so that dr/dt = -r + W r grows."""
    W_eff, truth, _ = make_planted_circuit(60, n_untuned=2, n_tuned=13, pool=4,
                                           seed=0)
    c = scaled_circuit(truth, 1.0 / (G_STAR * _rightmost(W_eff)))
    noise = np.random.default_rng(0).normal(0.0, 1e-3, W_eff.shape)
    W = c.effective_weights() + noise
    return c, W / (G_STAR * _rightmost(W))


@pytest.fixture(scope="module")
def bundle(tmp_path_factory, unstable):
    c, W = unstable
    return write_planted_bundle(tmp_path_factory.mktemp("gain") / "c", c, W)


def test_largest_stable_gain_is_numpy_threshold(unstable):
    _, W = unstable
    g = largest_stable_gain(W)
    # numpy.linalg.eigvals: max Re eig(W) = 1 / g, so g W sits on the boundary
    assert g == pytest.approx(1.0 / _rightmost(W), rel=1e-10)
    assert g == pytest.approx(G_STAR, rel=1e-9)
    n = W.shape[0]
    assert _rightmost(-np.eye(n) + 0.999 * g * W) < 0
    assert _rightmost(-np.eye(n) + 1.001 * g * W) > 0
    # a network with max Re eig(W) <= 0 is stable at every gain
    assert largest_stable_gain(-np.eye(3)) == np.inf


def test_scaled_circuit_scales_w_eff_and_keeps_dale(unstable):
    c, _ = unstable
    s = scaled_circuit(c, 0.37)
    # W_eff = J_EE - J_EI J_IE: g J_EE - sqrt(g)^2 J_EI J_IE (numpy products)
    np.testing.assert_allclose(s.effective_weights(), 0.37 * c.effective_weights(),
                               atol=1e-13)
    for name in ("J_EE", "J_EU", "J_UE", "J_ET", "J_TE"):
        assert (getattr(s, name) >= 0).all()
    with pytest.raises(InputError, match="gain must be a positive number"):
        scaled_circuit(c, -1.0)


def _circuit_gain(c, tau_e=10.0, tau_i=5.0):
    """The circuit's largest stable gain, bisected here on numpy's
    eigenvalues of its Jacobian T^-1 (-I + W_full(g))."""
    tau = np.r_[np.full(c.n_excitatory, tau_e), np.full(c.n_inhibitory, tau_i)]

    def stable(g):
        s = scaled_circuit(c, g)
        n = len(tau)
        return _rightmost((s.signed_weights() - np.eye(n)) / tau[:, None]) < 0

    lo, hi = (0.0, 1.0) if not stable(1.0) else (1.0, 64.0)
    for _ in range(60):
        mid = (lo + hi) / 2
        lo, hi = (mid, hi) if stable(mid) else (lo, mid)
    return hi


def test_refusal_names_the_largest_stable_gain(unstable):
    c, W = unstable
    h = np.random.default_rng(1).uniform(0.5, 1.5, 60)
    g = 1.0 / _rightmost(W)  # numpy.linalg.eigvals
    with pytest.raises(Unstable) as err:
        compare_with_original(c, W, h, tau_e=10.0, tau_i=5.0)
    exc, msg = err.value, str(err.value)
    assert exc.network == "original" and "--" not in msg   # no flag: data
    # growth rate of dr/dt = (-r + W r) / tau_E: (max Re eig(W) - 1) / tau_E
    assert exc.growth == pytest.approx((1 / g - 1) / 10.0, rel=1e-9)
    growth = float(re.search(r"growth rate ([0-9.e-]+) per ms", msg).group(1))
    assert growth == pytest.approx(exc.growth, rel=1e-2)
    # both networks stable below the smaller of the two gains
    assert exc.stable_gain == pytest.approx(min(g, _circuit_gain(c)), rel=1e-3)


def test_the_advised_gain_runs_to_the_scaled_fixed_point(unstable):
    c, W = unstable
    h = np.random.default_rng(1).uniform(0.5, 1.5, 60)
    r = compare_with_original(c, W, h, tau_e=10.0, tau_i=5.0, gain=0.97)
    assert r["gain"] == 0.97 and r["model"] == "linear"
    assert r["original_growth_rate"] < 0 and r["circuit_growth_rate"] < 0
    assert r["original_growth_rate"] == pytest.approx(
        (0.97 * _rightmost(W) - 1) / 10.0, rel=1e-8)  # numpy.linalg.eigvals
    # the run reaches (I - 0.97 W)^-1 h (numpy.linalg.solve); the circuit
    # reproduces it as well as W_eff reproduces W (noise of 1e-3)
    assert r["original_vs_fixed_point_W"] < 1e-6
    assert r["circuit_vs_fixed_point_W_eff"] < 1e-6
    fp = np.linalg.solve(np.eye(60) - 0.97 * W, h)
    fp_eff = np.linalg.solve(np.eye(60) - 0.97 * c.effective_weights(), h)
    ref = np.linalg.norm(fp_eff - fp) / np.linalg.norm(fp)
    assert r["circuit_vs_fixed_point_W"] == pytest.approx(ref, rel=1e-3, abs=1e-6)


def _relu_final(W_full, h, n_e, tau, t_ms):
    """tau dr/dt = -r + [W_full r + H]_+ (E units), linear interneurons,
    integrated with scipy's RK45 from rest."""
    H = np.zeros(len(tau))
    H[:n_e] = h

    def rhs(_, r):
        drive = W_full @ r + H
        drive[:n_e] = np.maximum(drive[:n_e], 0.0)
        return (drive - r) / tau

    sol = solve_ivp(rhs, (0.0, t_ms), np.zeros(len(tau)), method="RK45",
                    rtol=1e-10, atol=1e-12)
    assert sol.success
    return sol.y[:, -1]


def test_threshold_linear_bounded_run_matches_solve_ivp(unstable):
    c, W = unstable
    h = np.random.default_rng(1).uniform(-0.5, 1.5, 60)
    r = compare_with_original(c, W, h, tau_e=10.0, tau_i=5.0,
                              model="threshold-linear")
    assert r["original_growth_rate"] > 0  # linear dynamics unstable: no refusal
    assert r["t_ms"] == 400.0  # 40 x the slower time constant (10 ms)
    tau = np.r_[np.full(60, 10.0), np.full(15, 5.0)]
    circ = _relu_final(c.signed_weights(), h, 60, tau, 400.0)
    orig = _relu_final(W, h, 60, np.full(60, 10.0), 400.0)
    ref = np.linalg.norm(circ[:60] - orig) / np.linalg.norm(orig)
    assert r["circuit_vs_original"] == pytest.approx(ref, rel=1e-3, abs=1e-8)
    # with a gain and a duration of our own, the same independent run
    r = compare_with_original(c, W, h, tau_e=10.0, tau_i=5.0, gain=1.5,
                              model="threshold-linear", t_ms=120.0)
    s = scaled_circuit(c, 1.5)
    circ = _relu_final(s.signed_weights(), h, 60, tau, 120.0)
    orig = _relu_final(1.5 * W, h, 60, np.full(60, 10.0), 120.0)
    ref = np.linalg.norm(circ[:60] - orig) / np.linalg.norm(orig)
    assert (r["gain"], r["t_ms"]) == (1.5, 120.0)
    assert r["circuit_vs_original"] == pytest.approx(ref, rel=1e-3, abs=1e-8)


def test_cli_refuses_with_the_gain_then_runs_with_it(bundle, capsys):
    assert main(["simulate", str(bundle)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "Traceback" not in err
    assert "the original network is unstable at gain 1" in err
    command = re.search(r"run `eidecomp (simulate [^`]+)`", err).group(1)
    argv = shlex.split(command)
    g = float(argv[argv.index("--gain") + 1])
    c, W = unstable_pair(bundle)
    assert g < min(1.0 / _rightmost(W), _circuit_gain(c))   # numpy's
    assert main(argv) == 0                                  # run as printed
    out = capsys.readouterr().out
    assert re.search(rf"gain\s+{g:g} \(the original is stable below 0\.9737\)",
                     out)
    assert re.search(r"model\s+linear", out)
    assert "vs fixed point of W_eff" in out


def test_cli_threshold_linear(bundle, capsys):
    assert main(["simulate", str(bundle), "--model", "threshold-linear",
                 "--duration", "200"]) == 0
    out = capsys.readouterr().out
    assert re.search(r"model\s+threshold-linear", out)
    assert re.search(r"simulated\s+200 ms", out)
    assert "final E rates" in out and "fixed point" not in out
    r = run_simulate(bundle, model="threshold-linear", duration=200.0)
    assert r["model"] == "threshold-linear" and r["gain"] == 1.0


@pytest.mark.parametrize("argv,message", [
    (["--simulator", "neuron"], "argument --simulator: invalid choice: 'neuron'"),
    (["--gain", "0"], "argument --gain: must be a positive number: '0'"),
    (["--duration", "-1"], "argument --duration: must be a positive number"),
    (["--model", "cubic"], "argument --model: invalid choice: 'cubic'"),
])
def test_cli_bad_simulate_options(bundle, capsys, argv, message):
    assert main(["simulate", str(bundle), *argv]) == 2
    assert message in capsys.readouterr().err


def unstable_pair(bundle):
    """The circuit and W = L + S as the bundle holds them."""
    b = bundles.read_circuit_bundle(bundle)
    return b.circuit, b.original_weights()
