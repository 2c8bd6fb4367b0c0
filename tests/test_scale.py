"""Memory discipline, float32 mode and progress of the fast solver.

References: the planted truth of Candes et al. (2011)'s setting and the
float64 solve of the same matrix (itself checked against cvxpy and
tensorly); /proc/meminfo for the available memory the estimate is held to.
"""

import io

import numpy as np
import pytest

from eidecomp import robust_pca
from eidecomp.cli import main
from eidecomp.datasets import make_planted
from eidecomp.decompose._api import memory_estimate
from eidecomp.errors import InputError
from eidecomp.progress import FIRST_AFTER, LOG_EVERY, Progress


def test_float32_mode_recovers_the_planted_part():
    W, L0, _ = make_planted(400, seed=3)
    d32 = robust_pca(W.astype(np.float32), dtype="float32")
    d64 = robust_pca(W)
    assert d32.low_rank.dtype == np.float32 and d32.sparse.dtype == np.float32
    assert d32.converged and d32.rank == d64.rank == 20
    err = np.linalg.norm(d32.low_rank - L0) / np.linalg.norm(L0)
    assert err < 1e-4  # the float32 figure
    # a float64 W in float32 mode is converted, not refused
    assert robust_pca(W, dtype="float32").low_rank.dtype == np.float32


def test_input_is_never_written_and_float64_is_the_default():
    W, _, _ = make_planted(200, seed=4)
    before = W.copy()
    dec = robust_pca(W)
    np.testing.assert_array_equal(W, before)
    assert dec.low_rank.dtype == np.float64
    assert robust_pca(W.astype(np.float32)).low_rank.dtype == np.float64
    with pytest.raises(ValueError):  # results are read-only
        dec.low_rank[0, 0] = 1.0


def test_memory_estimate_refuses_before_any_work():
    huge = np.broadcast_to(np.float64(1.0), (200_000, 200_000))  # no memory
    with pytest.raises(InputError, match=r"GiB.*float32 mode"):
        robust_pca(huge)
    assert memory_estimate((10_000, 10_000)) == 5 * 10_000 ** 2 * 8
    assert memory_estimate((10_000, 10_000), np.float32) == 5 * 10_000 ** 2 * 4
    with pytest.raises(InputError, match="dtype"):
        robust_pca(np.eye(3), dtype="float16")


class _Clock:
    """A clock the test moves by hand."""

    def __init__(self):
        self.t = 0.0

    def __call__(self):
        return self.t


def _residuals(p, clock, step):
    for it in range(1, 30):
        clock.t += step
        p.solver(it, 10.0 ** (-it / 3), 10.0 ** (-it / 3), 5, 1.0)


def test_progress_off_a_terminal_is_a_plain_line_every_few_seconds():
    log, clock = io.StringIO(), _Clock()   # StringIO is not a terminal
    p = Progress(log, tol=1e-8, clock=clock)
    _residuals(p, clock, 0.5)              # 14.5 s of iterations
    lines = log.getvalue().splitlines()
    assert "\r" not in log.getvalue()
    # one line at most every LOG_EVERY s, none before FIRST_AFTER
    assert len(lines) == int((14.5 - FIRST_AFTER) // LOG_EVERY) + 1
    assert "s left" in lines[-1] and "robust PCA" in lines[-1]


def test_progress_on_a_terminal_rewrites_one_line_and_ends_it():
    class Tty(io.StringIO):
        def isatty(self):
            return True

    screen, clock = Tty(), _Clock()
    with Progress(screen, clock=clock) as p:
        _residuals(p, clock, 0.5)
        clock.t += 1.0
        p.stage("baselines")
    out = screen.getvalue()
    assert out.count("\n") == 1 and out.endswith("\n")   # one line, ended
    assert out.count("\r") > 5 and "baselines" in out.split("\r")[-1]


def test_quiet_progress_shows_nothing():
    log, clock = io.StringIO(), _Clock()
    with Progress(log, clock=clock, quiet=True) as p:
        _residuals(p, clock, 5.0)
        p.stage("report")
    assert log.getvalue() == ""


def test_float32_command(tmp_path):
    W, _, _ = make_planted(120, seed=5)
    np.save(tmp_path / "w.npy", W)
    assert main(["decompose", str(tmp_path / "w.npy"), "-o", str(tmp_path / "o"),
                 "-q", "--float32"]) == 0
    assert np.load(tmp_path / "o" / "low_rank.npy").dtype == np.float32


def test_run_takes_float32_and_assembles_in_float64(tmp_path, capsys):
    # `run --float32` decomposes in float32 (the split's float32 figures
    # above) and assembles in float64: its circuit agrees with the float64
    # run's to the float32 split's accuracy, and the bundle records it
    import json

    from eidecomp.datasets import make_planted_circuit

    W, _, _ = make_planted_circuit(120, n_untuned=3, n_tuned=27, pool=6, seed=2)
    np.save(tmp_path / "w.npy", W)
    for name, extra in (("c32", ["--float32"]), ("c64", [])):
        assert main(["run", str(tmp_path / "w.npy"), "-o", str(tmp_path / name),
                     "-q"] + extra) == 0
    capsys.readouterr()
    J32 = np.load(tmp_path / "c32" / "J_EE.npy")
    J64 = np.load(tmp_path / "c64" / "J_EE.npy")
    assert J32.dtype == np.float64
    assert np.load(tmp_path / "c32" / "low_rank.npy").dtype == np.float32
    assert np.linalg.norm(J32 - J64) <= 1e-3 * np.linalg.norm(J64)
    m32 = json.loads((tmp_path / "c32" / "circuit.json").read_text())
    m64 = json.loads((tmp_path / "c64" / "circuit.json").read_text())
    assert m32["decomposition"]["dtype"] == "float32"
    assert m64["decomposition"]["dtype"] == "float64"
    assert m32["metrics"]["relative_error"] == pytest.approx(
        m64["metrics"]["relative_error"], abs=1e-4)
