"""Progress off a terminal, and the verdict of simulate, as a batch user
sees them: the commands run in a subprocess whose standard error is a pipe.

Reference: the original network's own fixed point, (I - W)^{-1} h, which
``simulate`` checks the circuit against (the linear rate model tau dr/dt =
-r + W r + h, common practice), and scipy's solve_ivp behind it.
"""

import io
import itertools
import subprocess
import sys

import pytest

from eidecomp.cli import main
from eidecomp.params import AGREEMENT_RTOL
from eidecomp.pipeline import run_demo
from eidecomp.progress import LOG_EVERY, Progress

# every stage the demo reports, in the words of its progress lines
DEMO_STAGES = ("robust PCA: iteration", "untuned factorisation",
               "tuned factorisation", "refinement", "debiasing", "baselines",
               "stability", "writing the bundle", "report: lambda path",
               "report: connection profiles", "report figure: matrix W",
               "report figure: interneuron tuning")


@pytest.fixture(scope="module")
def piped_demo(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo") / "d"
    proc = subprocess.run([sys.executable, "-m", "eidecomp.cli", "demo", "-o",
                           str(out)], capture_output=True, text=True,
                          timeout=600)
    return proc, out


def test_a_piped_demo_prints_plain_progress_lines(piped_demo):
    proc, _ = piped_demo
    assert proc.returncode == 0, proc.stderr
    lines = proc.stderr.splitlines()
    assert lines, "a piped demo printed no progress"
    assert all(line.startswith("  [") and " s] " in line for line in lines)
    assert "\r" not in proc.stderr          # no live line off a terminal
    # which stages show depends on how long each takes on this machine (one
    # line per LOG_EVERY at most); each line names one of the demo's stages
    named = DEMO_STAGES + ("report figure: ",)   # any of the figures
    assert all(any(stage in line for stage in named) for line in lines), lines


def test_each_stage_of_the_demo_is_named_when_it_outlasts_the_interval(
        tmp_path):
    # a clock that moves on LOG_EVERY + 1 s at every reading: every call of
    # the progress callbacks is then shown, so each stage that reports is
    # seen, whatever the speed of the machine
    ticks = itertools.count(step=LOG_EVERY + 1)
    out = io.StringIO()
    run_demo(tmp_path / "d", progress=Progress(
        out, live=False, clock=lambda: float(next(ticks))))
    text = out.getvalue()
    for stage in DEMO_STAGES:
        assert stage in text, stage


def test_simulate_ends_with_a_verdict_and_q_silences_it(piped_demo, capsys):
    _, out = piped_demo
    assert main(["simulate", str(out), "-q"]) == 0
    captured = capsys.readouterr()
    assert captured.err == ""
    last = captured.out.strip().splitlines()[-1]
    assert last.startswith("verdict: the circuit agrees with the original")
    assert f"<= {AGREEMENT_RTOL:g}" in last



def test_a_target_rank_search_names_the_lam_of_each_iteration_line():
    """--target-rank: every iteration line names the target and the lam being
    tried (and the rank the previous lam gave); the lam of the last line is
    the one returned, whose L has rank 3 by numpy's own count
    (numpy.linalg.matrix_rank at the reported rank's tolerance) on a planted
    rank-3 matrix. A clock that moves 10 s a call shows every line."""
    import re

    import numpy as np

    from eidecomp import robust_pca
    from eidecomp.datasets import make_planted
    from eidecomp.params import REPORTED_RANK_RTOL

    W = make_planted(60, rank=3, seed=11)[0]
    ticks = itertools.count(0.0, 10.0)
    out = io.StringIO()
    lines = Progress(out, live=False, clock=lambda: next(ticks))
    dec = robust_pca(W, target_rank=3, lam=0.02, progress=lines.solver)
    text = out.getvalue().splitlines()
    solver_lines = [t for t in text if "robust PCA" in t]
    assert solver_lines and all("target rank 3, lam " in t for t in solver_lines)
    lams = [float(x) for x in re.findall(r"target rank 3, lam ([\d.e+-]+)",
                                          out.getvalue())]
    assert len(set(lams)) >= 2 and "gave rank" in solver_lines[-1]
    assert lams[-1] == pytest.approx(dec.lam, rel=1e-3)
    L = np.asarray(dec.low_rank)
    s = np.linalg.svd(L, compute_uv=False)
    assert dec.rank == 3
    assert np.linalg.matrix_rank(L, tol=REPORTED_RANK_RTOL * s[0]) == 3
    # a later plain solve on the same lines is not labelled as the search
    out.truncate(0)
    out.seek(0)
    robust_pca(W, lam=0.2, progress=lines.solver)
    later = [t for t in out.getvalue().splitlines() if "robust PCA" in t]
    assert later and not any("target rank" in t for t in later)
