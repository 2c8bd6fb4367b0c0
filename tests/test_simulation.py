"""eidecomp.simulation: the drive in every shape, both rate models on every
simulator and in every exported script, the export's stability check, and
the advice of every refusal run as printed (issue 29).

References: numpy.linalg.solve (the linear fixed point (I - W)^-1 h of each
drive segment), scipy.integrate.solve_ivp with RK45 written here (the
threshold-linear runs, independent of eidecomp's LSODA runner),
numpy.linalg.eigvals (stability), and NEST and Brian2 themselves (the
simulator extra, installed by .ci/run).
"""

import json
import os
import re
import shlex
import subprocess
import sys

import numpy as np
import pytest
from conftest import require, write_planted_bundle
from scipy.integrate import solve_ivp

from eidecomp.cli import main
from eidecomp.datasets import make_planted_circuit
from eidecomp.dynamics import scaled_circuit
from eidecomp.errors import InputError
from eidecomp.io import bundles
from eidecomp.pipeline import run_simulate
from eidecomp.simulation import (
    SIMULATORS,
    drive_of,
    get_simulator,
    random_drive,
    read_drive,
)

N = 40


def _rightmost(A):
    return float(np.max(np.linalg.eigvals(A).real))


def _planted(seed, scale):
    """A planted circuit scaled so that max Re eig(W_eff) = ``scale``, and
    its W_eff as the original network."""
    W_eff, truth, _ = make_planted_circuit(N, n_untuned=2, n_tuned=8, pool=3,
                                           seed=seed)
    c = scaled_circuit(truth, scale / _rightmost(W_eff))
    return c, c.effective_weights()


@pytest.fixture(scope="module")
def stable(tmp_path_factory):
    c, W = _planted(5, 0.6)
    return write_planted_bundle(tmp_path_factory.mktemp("stable") / "c", c, W), c, W


@pytest.fixture(scope="module")
def unstable(tmp_path_factory):
    c, W = _planted(6, 1.3)
    return write_planted_bundle(tmp_path_factory.mktemp("unstable") / "c", c, W), c, W


def _rel(a, b):
    return float(np.linalg.norm(a - b) / np.linalg.norm(b))


def _relu_rk45(W_full, H, tau, n_rect, segment_ms):
    """tau dr/dt = -r + f(W_full r + h), f = [.]_+ on the first n_rect
    units, each column of H held for segment_ms, from rest (RK45)."""
    r, out = np.zeros(len(tau)), []
    for h in H.T:
        def rhs(_, r, h=h):
            x = W_full @ r + h
            x[:n_rect] = np.maximum(x[:n_rect], 0.0)
            return (x - r) / tau
        sol = solve_ivp(rhs, (0.0, segment_ms), r, method="RK45", rtol=1e-11,
                        atol=1e-13)
        r = sol.y[:, -1]
        out.append(r)
    return np.array(out).T


# --- the drive: one reader, every shape -------------------------------------------

@pytest.mark.parametrize("shape", ["flat", "column", "row", "segments"])
@pytest.mark.parametrize("suffix", [".npy", ".csv", ".txt"])
def test_every_drive_shape_reaches_each_segments_fixed_point(stable, tmp_path,
                                                             shape, suffix):
    bundle, c, W = stable
    rng = np.random.default_rng(3)
    H = rng.uniform(0.5, 1.5, (N, 3)) if shape == "segments" else rng.uniform(
        0.5, 1.5, (N, 1))
    stored = {"flat": H[:, 0], "column": H, "row": H.T, "segments": H}[shape]
    path = tmp_path / f"drive{suffix}"
    if suffix == ".npy":
        np.save(path, stored)
    else:
        np.savetxt(path, np.atleast_2d(stored) if shape != "flat" else stored,
                   delimiter="," if suffix == ".csv" else " ")
    d = read_drive(str(path), N)
    np.testing.assert_array_equal(d.values, H)
    r = run_simulate(bundle, drive=str(path))
    assert r["n_segments"] == H.shape[1]
    # each segment's end is its own fixed point (numpy.linalg.solve)
    assert r["original_vs_fixed_point_W"] < 1e-6
    assert r["circuit_vs_fixed_point_W_eff"] < 1e-6
    W_eff = c.effective_weights()
    run = get_simulator("internal").load()
    tau = np.r_[np.full(N, 10.0), np.full(c.n_inhibitory, 5.0)]
    H_full = np.vstack([H, np.zeros((c.n_inhibitory, H.shape[1]))])
    rates = run(c.signed_weights(), H_full, tau, r["segment_ms"], 0)
    for k in range(H.shape[1]):
        target = np.linalg.solve(np.eye(N) - W_eff, H[:, k])
        assert _rel(rates[:N, k], target) < 1e-6


@pytest.mark.parametrize(("values", "message"), [
    (np.ones(N + 1), "drive has 41 values per segment; it needs one per unit "
                     "of W, 40"),
    (np.ones((N, 2, 2)), "drive must be 1-D or 2-D, got 3-D shape (40, 2, 2)"),
    (np.ones((3, N + 1)), "drive has 3 values per segment"),
])
def test_a_drive_of_another_shape_is_one_line(stable, tmp_path, capsys, values,
                                              message):
    bundle, _, _ = stable
    np.save(tmp_path / "d.npy", values)
    assert main(["simulate", str(bundle), "--input", str(tmp_path / "d.npy")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and message in err and "Traceback" not in err


def test_the_random_drive_is_seeded_and_in_range():
    a, b = random_drive(500, seed=9), random_drive(500, seed=9)
    np.testing.assert_array_equal(a.values, b.values)
    assert 0.5 <= a.values.min() and a.values.max() <= 1.5 and a.n_segments == 1
    assert not np.array_equal(a.values, random_drive(500, seed=10).values)
    with pytest.raises(InputError, match="holds NaN"):
        drive_of([1.0, np.nan], 2)


# --- both models on every simulator ---------------------------------------------

@pytest.mark.parametrize("simulator", [s.name for s in SIMULATORS])
@pytest.mark.parametrize("rectified", [0, N])
def test_every_runner_runs_both_models_alike(simulator, rectified):
    """Each runner against an independent RK45 run, on a drive that pushes
    some units below threshold, over two segments."""
    sim = get_simulator(simulator)
    if sim.requires:
        require(sim.requires)
    c, _ = _planted(7, 0.6)
    rng = np.random.default_rng(7)
    W_full = c.signed_weights()
    n = W_full.shape[0]
    H = np.vstack([rng.uniform(-1.0, 1.5, (N, 2)),
                   np.zeros((c.n_inhibitory, 2))])
    tau = np.r_[np.full(N, 10.0), np.full(c.n_inhibitory, 5.0)]
    rates = sim.load()(W_full, H, tau, 300.0, rectified)
    ref = _relu_rk45(W_full, H, tau, rectified, 300.0)
    assert _rel(rates, ref) < 1e-6
    if rectified:
        assert (rates[:rectified] >= -1e-12).all() and (H[:N] < 0).any()
    assert rates.shape == (n, 2)


# --- the exported scripts: either model, their own verdict ---------------------

@pytest.mark.parametrize("simulator", ["nest", "brian2"])
@pytest.mark.parametrize("model", ["linear", "threshold-linear"])
def test_exported_scripts_run_either_model_and_say_so(stable, tmp_path, simulator,
                                                      model):
    require(simulator)
    bundle, c, _ = stable
    H = np.random.default_rng(2).uniform(-1.0, 1.5, (N, 2))
    np.save(tmp_path / "h.npy", H)
    out = tmp_path / "x"
    assert main(["export", str(bundle), "--format", simulator, "-o", str(out), "-q",
                 "--input", str(tmp_path / "h.npy")]) == 0
    env = {k: v for k, v in os.environ.items() if k != "PYNEST_QUIET"}
    run = subprocess.run([sys.executable, str(out / f"circuit_{simulator}.py"),
                          "--model", model], capture_output=True, text=True,
                         timeout=600, env=env)
    assert run.returncode == 0, run.stderr[-2000:]
    doc = json.loads(run.stdout)                 # the JSON alone on stdout
    rates = np.array(doc["rates_by_segment"]).T
    verdict = doc["verdict"]
    assert verdict["holds"] and verdict["finite"] and np.isfinite(rates).all()
    assert verdict["relative_difference_from_eidecomp"] <= 1e-6
    with np.load(out / "circuit_rate_data.npz") as d:
        segment, n_rect = float(d["segment_ms"]), int(d["n_rect"])
    tau = np.r_[np.full(N, 10.0), np.full(c.n_inhibitory, 5.0)]
    H_full = np.vstack([H, np.zeros((c.n_inhibitory, 2))])
    k = n_rect if model == "threshold-linear" else 0
    ref = _relu_rk45(c.signed_weights(), H_full, tau, k, segment)
    assert _rel(rates, ref) < 1e-6                 # the independent RK45 run
    if k:
        assert verdict["nonnegative"] and (rates[:k] >= 0).all()


# --- an unstable circuit: refused by export, with what to run -------------------

def _suggestion(err, command):
    return shlex.split(re.search(rf"run `eidecomp ({command} [^`]+)`",
                                 err).group(1))


def test_export_refuses_an_unstable_circuit_and_its_advice_works(unstable,
                                                                 tmp_path, capsys):
    bundle, c, _ = unstable
    out = tmp_path / "n"
    assert main(["export", str(bundle), "--format", "nest", "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and not out.exists()
    assert "the circuit is unstable at gain 1" in err
    argv = _suggestion(err, "export")
    gain = float(argv[argv.index("--gain") + 1])
    # the circuit scaled by the advised gain is stable (numpy's eigenvalues)
    s = scaled_circuit(c, gain)
    tau = np.r_[np.full(N, 10.0), np.full(c.n_inhibitory, 5.0)]
    M = s.signed_weights()
    assert _rightmost((M - np.eye(len(M))) / tau[:, None]) < 0
    assert main(argv) == 0 and out.is_dir()          # run as printed
    # --allow-unstable writes the unstable one, with one warning line
    assert main(["export", str(bundle), "--format", "brian2", "-o",
                 str(tmp_path / "b"), "--allow-unstable"]) == 0
    err = capsys.readouterr().err
    assert err.startswith("eidecomp: warning: ") and err.count("\n") == 1
    assert "unstable at gain 1" in err and (tmp_path / "b").is_dir()


def test_every_simulate_suggestion_runs_as_printed(unstable, tmp_path, capsys):
    """Each refusal's command, run as printed on the same bundle, succeeds
    or stops with another line (never the same one again)."""
    bundle, _, _ = unstable
    asked = [[], ["--tau-i", "20"], ["--model", "threshold-linear", "--gain", "4"],
             ["--simulator", "internal", "--gain", "3", "--seed", "2"]]
    for extra in asked:
        capsys.readouterr()
        code = main(["simulate", str(bundle), *extra])
        out, err = capsys.readouterr()
        if code == 0:
            if "run `eidecomp simulate" not in out:     # nothing advised
                continue
            err = out.splitlines()[-1]     # a verdict that advises a run
            assert "had not settled" in err, err
        assert code in (0, 2) and "run `eidecomp simulate" in err, (extra, err)
        argv = _suggestion(err, "simulate")
        for flag in ("--model", "--seed", "--simulator"):   # kept as asked
            if flag in extra and extra[extra.index(flag) + 1] != "internal":
                assert argv[argv.index(flag) + 1] == extra[extra.index(flag) + 1]
        code = main(argv)
        again_out, again = capsys.readouterr()
        assert code == 0 or (code == 2 and again != err), (argv, again)
        assert "had not settled" not in again_out, (argv, again_out)
    assert seen_settle_advice(asked, bundle)


def seen_settle_advice(asked, bundle):
    """The table above reaches the unsettled threshold-linear verdict at
    least once (gain 4: the runs grow; numpy's eigenvalues of 4 W)."""
    W = bundles.read_circuit_bundle(bundle).original_weights()
    return any("threshold-linear" in a for a in asked) and _rightmost(4 * W) > 1


# --- tiled circuits: what to run instead, and an ordinary bundle after ------

def _tiled(tmp_path):
    from eidecomp.kernels import to_local

    rng = np.random.default_rng(2)
    F, grid = 4, (6, 6)
    G = np.outer(rng.standard_normal(F), rng.standard_normal(F))[:, :, None,
                                                                 None] * 0.1
    G = G * np.ones((1, 1, *grid))
    G += (rng.random(G.shape) < 0.05) * rng.choice([-0.3, 0.3], G.shape)
    np.save(tmp_path / "k.npy", to_local(G, radius=2))
    assert main(["assemble", "--kernel", str(tmp_path / "k.npy"), "--grid",
                 "6x6", "-o", str(tmp_path / "t"), "-q"]) == 0
    return tmp_path / "t"


@pytest.mark.filterwarnings("ignore::eidecomp.errors.ConvergenceWarning")
def test_a_tiled_bundle_says_what_to_run_and_the_run_gives_an_ordinary_one(
        tmp_path, capsys, monkeypatch):
    t = _tiled(tmp_path)
    monkeypatch.chdir(tmp_path)
    commands = set()
    for argv in (["report", str(t), "-o", "r.html"], ["simulate", str(t)],
                 ["export", str(t), "--format", "graphml", "-o", "g.graphml"]):
        capsys.readouterr()
        assert main(argv) == 2
        err = capsys.readouterr().err
        assert "a tiled circuit bundle, not a circuit bundle" in err
        commands.add(re.search(r"run `eidecomp ([^`]+)`", err).group(1))
    assert len(commands) == 1                  # one way on, the same for all
    argv = shlex.split(commands.pop())
    assert "--expand" in argv
    assert main(argv) == 0
    expanded = tmp_path / argv[argv.index("-o") + 1]
    doc = json.loads((expanded / "circuit.json").read_text())
    st = doc["stability"]
    # W's stability from the expanded L + S (numpy's eigenvalues), recorded
    L, S = np.load(expanded / "low_rank.npy"), np.load(expanded / "sparse.npy")
    assert st["original_spectral_abscissa"] == pytest.approx(
        _rightmost(L + S) - 1.0, rel=1e-9)
    assert st["circuit_spectral_abscissa_equal_taus"] is not None
    # every command reads it: it runs, or stops with another, specific line
    for argv in (["report", str(expanded), "-o", "r.html"],
                 ["export", str(expanded), "--format", "graphml", "-o",
                  "g.graphml"], ["simulate", str(expanded)]):
        capsys.readouterr()
        code = main(argv)
        err = capsys.readouterr().err
        if code == 0:
            continue
        assert "a tiled circuit bundle" not in err, (argv, err)
        again = _suggestion(err, argv[0])           # and its advice works
        assert main(again) == 0 or capsys.readouterr().err != err


def test_the_tiled_bundle_records_its_loops_own_convergence(tmp_path):
    from eidecomp.assemble import assemble_tiled
    from eidecomp.decompose import robust_pca_kernel
    from eidecomp.errors import ConvergenceWarning
    from eidecomp.kernels import full_grid, to_local

    rng = np.random.default_rng(3)
    G = full_grid(to_local(rng.normal(0, 0.1, (3, 3, 5, 5)), radius=1), (5, 5))
    dec = robust_pca_kernel(G, (5, 5), offsets=True)
    with pytest.warns(ConvergenceWarning, match="tiled circuit refinement"):
        stopped = assemble_tiled(dec, G, max_iter=1)
    assert stopped.converged is False
    done = assemble_tiled(dec, G, max_iter=5000)
    assert done.converged is True and done.n_iter < 10000
    doc = bundles.tiled_doc(stopped, dec, source={"path": "k", "grid": [5, 5]},
                            expanded_bytes=0)
    assert doc["metrics"]["converged"] is False


def test_the_command_and_the_report_say_the_same_of_stability(tmp_path, capsys):
    """The largest stable tau_I/tau_E in the same words in the run's summary
    and in the report (issue 29: '0' in one, 'unstable at every' in the
    other), on partial correlations of photograph patches (scikit-learn's
    sample images) assembled without the stability guard; the words
    against numpy's eigenvalues of the circuit's Jacobian at both ends of
    the scanned range."""
    import html

    from eidecomp.datasets import patch_partial_correlations
    from eidecomp.params import STABILITY_SCAN, tau_ratio_text

    np.save(tmp_path / "w.npy", patch_partial_correlations(6, n_patches=5000))
    assert main(["run", str(tmp_path / "w.npy"), "-o", str(tmp_path / "c"),
                 "--report", "--no-stability-guard"]) == 0
    out = capsys.readouterr().out
    st = json.loads((tmp_path / "c" / "circuit.json").read_text())["stability"]
    words = tau_ratio_text(st)
    assert words in out
    page = html.unescape((tmp_path / "c" / "report.html").read_text("utf-8"))
    assert words in " ".join(page.split())
    assert words.startswith("unstable at every")
    b = bundles.read_circuit_bundle(tmp_path / "c").circuit
    M = b.signed_weights()
    for r in STABILITY_SCAN[:2]:
        tau = np.r_[np.full(b.n_excitatory, 1.0), np.full(b.n_inhibitory, r)]
        assert _rightmost((M - np.eye(len(M))) / tau[:, None]) > 0


# --- advice at the edges the second adversarial pass found (issue 29) ------

def test_a_barely_stable_run_is_refused_with_a_gain_that_settles(stable, capsys):
    """At 0.9999 of the largest stable gain the slowest mode decays at 1e-5
    per ms: a run to its fixed point would last 4e6 ms. Refused, with a gain
    at most 0.9 of the boundary (numpy's eigenvalues), which runs as printed."""
    bundle, c, W = stable
    g_star = min(1.0 / _rightmost(W), 1.0 / _rightmost(c.effective_weights()))
    g = 0.9999 * g_star
    assert main(["simulate", str(bundle), "--gain", repr(g)]) == 2
    err = capsys.readouterr().err
    assert "a run to the fixed point would last" in err
    argv = _suggestion(err, "simulate")
    advised = float(argv[argv.index("--gain") + 1])
    assert advised <= 0.9 * g_star
    assert main(argv) == 0


@pytest.mark.parametrize("model", ["linear", "threshold-linear"])
def test_a_run_too_short_to_settle_says_so_and_advises_the_default(stable, capsys,
                                                                    model):
    bundle, _, _ = stable
    assert main(["simulate", str(bundle), "--model", model, "--duration",
                 "0.5"]) == 0
    last = capsys.readouterr().out.splitlines()[-1]
    assert last.startswith("verdict: none: the runs had not settled")
    argv = _suggestion(last, "simulate")
    assert "--duration" not in argv and argv[argv.index("--model") + 1] == model \
        if model != "linear" else "--duration" not in argv
    assert main(argv) == 0
    assert "agrees" in capsys.readouterr().out.splitlines()[-1]


def test_the_expand_command_keeps_every_option_and_works_from_elsewhere(
        tmp_path, capsys, monkeypatch):
    """Three features at 4:1 give one interneuron per site (16 on a 4x4
    grid, where 48 / 4 would be 12); the kernel stored under a key, an
    untuned share asked for: the printed command, run from another folder,
    writes the expanded circuit every command reads."""
    from eidecomp.kernels import to_local

    rng = np.random.default_rng(4)
    G = np.outer(rng.standard_normal(3), rng.standard_normal(3))[:, :, None,
                                                                 None] * 0.1
    G = G * np.ones((1, 1, 4, 4))
    G += (rng.random(G.shape) < 0.1) * rng.choice([-0.3, 0.3], G.shape)
    np.savez(tmp_path / "k.npz", other=np.zeros(3), kern=to_local(G, radius=1))
    assert main(["assemble", "--kernel", str(tmp_path / "k.npz"), "--key", "kern",
                 "--grid", "4x4", "--untuned-share", "1", "-o",
                 str(tmp_path / "t"), "-q"]) == 0
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)
    capsys.readouterr()
    assert main(["simulate", "../t"]) == 2
    argv = shlex.split(re.search(r"run `eidecomp ([^`]+)`",
                                 capsys.readouterr().err).group(1))
    assert argv[argv.index("--key") + 1] == "kern" and "--untuned-share" in argv
    assert main(argv + ["-q"]) == 0
    expanded = tmp_path / "t-expanded"
    doc = json.loads((expanded / "circuit.json").read_text())
    assert doc["counts"] == {"excitatory": 48, "untuned": 16, "tuned": 0}
    for command in (["report", str(expanded), "-o", "r.html"],
                    ["export", str(expanded), "--format", "csv", "-o", "e.csv"]):
        assert main(command + ["-q"]) == 0, command
