"""The stability guard on partial correlations of photograph patches: what
stability costs in error, and in time against the dense eigenproblem each
evaluation solves (docs/assembly.md, "Stability guard").

W: eidecomp.datasets.patch_partial_correlations(size) for each patch size
(stable W, rightmost eigenvalue 0.9992 to 0.9999, whose closest circuit is
not stable at the default time constants), assembled at 4:1 without
baselines. Per size: the units in the circuit (E and I), the refined
circuit's error and the guarded one's, whether it ended stable, the starts
the guard ran, its evaluations, its time (from its first progress line to
the end of the call, the capped start's refinement included), the time of
one scipy.linalg.eig with both vector sets on a matrix of the circuit's
size, and the guard's time over evaluations x that (near 1: the
eigenproblem is the cost).

Usage: OPENBLAS_NUM_THREADS=1 python benchmarks/guard.py [--sizes 6 8 ... 23]
"""

import argparse
import time
import warnings

import numpy as np
import scipy.linalg

from eidecomp import assemble
from eidecomp.datasets import patch_partial_correlations


def _eig_time(n, seed=0):
    M = np.random.default_rng(seed).standard_normal((n, n)) / np.sqrt(n)
    best = float("inf")
    for _ in range(3):
        t = time.perf_counter()
        scipy.linalg.eig(M - np.eye(n), left=True, right=True)
        best = min(best, time.perf_counter() - t)
    return best


def row(size):
    W = patch_partial_correlations(size)
    marks = []
    t0 = time.perf_counter()

    def progress(stage, *_):
        if str(stage).startswith("stability guard"):
            marks.append((str(stage), time.perf_counter()))

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        c = assemble(W, ei_ratio="4:1", baselines=False, progress=progress)
    end = time.perf_counter()
    g = c.report.guard
    units = c.n_excitatory + c.n_inhibitory
    if g is None:
        return (f"{size}x{size}", units, c.report.relative_error, None, "-",
                "-", 0, 0.0, None, end - t0)
    spent = end - marks[0][1]
    eig = _eig_time(units)
    return (f"{size}x{size}", units, g.error_before, g.error_after,
            "yes" if g.stable else "NO", len(marks), g.evaluations, spent,
            eig, spent / (g.evaluations * eig))


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+",
                    default=[6, 8, 10, 12, 14, 16, 18, 20, 23])
    args = ap.parse_args()
    print(f"{'patches':>8} {'units':>6} {'before':>7} {'after':>7} "
          f"{'stable':>6} {'starts':>6} {'evals':>6} {'guard s':>8} "
          f"{'eig s':>7} {'guard/(evals x eig)':>20}")
    for size in args.sizes:
        r = row(size)
        if r[3] is None:
            print(f"{r[0]:>8} {r[1]:>6} {r[2]:>7.4f} {'guard did not run':>32}"
                  f" (call {r[-1]:.1f} s)")
            continue
        print(f"{r[0]:>8} {r[1]:>6} {r[2]:>7.4f} {r[3]:>7.4f} {r[4]:>6} "
              f"{r[5]:>6} {r[6]:>6} {r[7]:>8.1f} {r[8]:>7.3f} {r[9]:>20.2f}",
              flush=True)


if __name__ == "__main__":
    main()
