"""Progress off a terminal, and the verdict of simulate, as a batch user
sees them: the commands run in a subprocess whose standard error is a pipe.

Reference: the original network's own fixed point, (I - W)^{-1} h, which
``simulate`` checks the circuit against (the linear rate model tau dr/dt =
-r + W r + h, common practice), and scipy's solve_ivp behind it.
"""

import subprocess
import sys

import pytest

from eidecomp.cli import main
from eidecomp.params import AGREEMENT_RTOL


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
    assert "report" in proc.stderr          # the report's stages are named


def test_simulate_ends_with_a_verdict_and_q_silences_it(piped_demo, capsys):
    _, out = piped_demo
    assert main(["simulate", str(out), "-q"]) == 0
    captured = capsys.readouterr()
    assert captured.err == ""
    last = captured.out.strip().splitlines()[-1]
    assert last.startswith("verdict: the circuit agrees with the original")
    assert f"<= {AGREEMENT_RTOL:g}" in last
