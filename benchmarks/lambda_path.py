"""The cost of eidecomp.lambda_path, in full SVDs of W, measured side by side.

For each matrix the script times numpy's full SVD of W (``np.linalg.svd``,
the reference: one ALM iteration at full rank costs about one) and then
``lambda_path(W)`` at its defaults (12 lams from a quarter to four times
1/sqrt(n), warm-started along the path), and prints per point its rank,
iterations, seconds and seconds / SVD, then the path's mean per point.

Target (issue 16): under 20 full-SVD times per point on average at 300 units.

Matrices: a planted low-rank + sparse problem (Candes, Li, Ma and Wright 2011,
section 4.1; :func:`eidecomp.datasets.make_planted`), a planted circuit
(:func:`eidecomp.datasets.make_planted_circuit`), and a Gaussian matrix with
no low-rank structure (numpy's ``default_rng(1).standard_normal``).

    OPENBLAS_NUM_THREADS=2 python benchmarks/lambda_path.py [--n 300]
"""

import argparse
import time
import warnings

import numpy as np

from eidecomp import lambda_path
from eidecomp.datasets import make_planted, make_planted_circuit

TARGET_SVDS_PER_POINT = 20.0


def _matrices(n):
    yield "planted rank 0.05n, 5 % gross errors", make_planted(n, seed=0)[0]
    yield "planted circuit (4:1)", make_planted_circuit(
        n, n_untuned=5, n_tuned=n // 4 - 5, seed=0)[0]
    yield "Gaussian, no structure", np.random.default_rng(1).standard_normal((n, n))


def _svd_seconds(W, repeats=5):
    np.linalg.svd(W)                     # warm
    t = time.perf_counter()
    for _ in range(repeats):
        np.linalg.svd(W)
    return (time.perf_counter() - t) / repeats


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=300)
    args = ap.parse_args()
    worst = 0.0
    for name, W in _matrices(args.n):
        svd = _svd_seconds(W)
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            t = time.perf_counter()
            points, _ = lambda_path(W)
            total = time.perf_counter() - t
        print(f"\n{name}, {args.n} x {args.n}: full SVD {svd * 1e3:.1f} ms")
        print(f"{'lam':>9} {'rank':>5} {'iter':>6} {'s':>7} {'SVDs':>7}  conv")
        for p in points:
            print(f"{p.lam:9.4g} {p.rank:5d} {p.n_iter:6d} {p.seconds:7.2f} "
                  f"{p.seconds / svd:7.1f}  {'yes' if p.converged else 'NO'}")
        per_point = total / len(points) / svd
        worst = max(worst, per_point)
        print(f"path: {total:.1f} s for {len(points)} points = {per_point:.1f} "
              f"full SVDs per point; {len(caught)} warnings")
    verdict = "PASS" if worst < TARGET_SVDS_PER_POINT else "FAIL"
    print(f"\n{verdict}  mean cost per point < {TARGET_SVDS_PER_POINT:g} full "
          f"SVDs on every matrix: worst {worst:.1f}")


if __name__ == "__main__":
    main()
