"""Structured robust PCA of kernels on periodic grids: time and peak memory.

For each case (features F on an H x W torus, N = F H W units) a planted
kernel (a rank-one feature coupling constant over space, one at a single
spatial frequency, and 20 % sparse +-1 entries within a 9 x 9
neighbourhood) is decomposed by eidecomp.robust_pca_kernel in a fresh
process, which reports its own time and peak resident memory. Beside it,
the dense solver's cost on the expanded N x N matrix is extrapolated: the
same number of ALM iterations (the structured iterates are the dense ones),
each costing at least one full SVD, timed here at n = 2000 and scaled by
(N / 2000)^3; and its memory, six N x N float64 arrays.

Targets: 16 features on 64 x 64 (65,536 units) under 20 s and 2 GB; 32
features on 128 x 128 (524,288 units) under 5 minutes.

Usage: python benchmarks/kernels.py [--cases 16x64,32x128]
"""

import argparse
import json
import subprocess
import sys
import time

import numpy as np
from _peak import PEAK

CHILD = PEAK + r"""
import json, sys, time
import numpy as np
from eidecomp import robust_pca_kernel
F, n = int(sys.argv[1]), int(sys.argv[2])
rng = np.random.default_rng(0)
G = np.outer(rng.standard_normal(F), rng.standard_normal(F))[:, :, None, None] \
    * 0.3 * np.ones((1, 1, n, n))
wave = np.cos(2 * np.pi * np.arange(n) / n)[:, None] * np.ones(n)
G = G + np.outer(rng.standard_normal(F), rng.standard_normal(F))[:, :, None, None] \
    * 0.3 * wave
near = np.zeros((n, n), bool)
idx = np.r_[0:5, n - 4:n]
near[np.ix_(idx, idx)] = True
G += (rng.random(G.shape) < 0.2) * near * rng.choice([-1.0, 1.0], G.shape)
t = time.perf_counter()
dec = robust_pca_kernel(G, (n, n), offsets=True)
t = time.perf_counter() - t
peak = peak_rss()
print(json.dumps({"time": t, "peak": peak, "n_iter": dec.n_iter,
                  "converged": dec.converged, "rank": dec.rank}))
"""


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--cases", default="16x64,32x128")
    args = ap.parse_args()
    A = np.random.default_rng(0).standard_normal((2000, 2000))
    t = time.perf_counter()
    np.linalg.svd(A)
    t_svd = time.perf_counter() - t
    print(f"one full SVD at n = 2000: {t_svd:.2f} s (for the dense extrapolation)")
    print(f"{'F':>3} {'grid':>8} {'units':>8} {'iters':>5} {'rank':>6} "
          f"{'time s':>8} {'peak GB':>8} {'dense est s':>12} {'dense GB':>9} "
          f"{'dense/ours':>11}")
    for case in args.cases.split(","):
        F, n = (int(x) for x in case.split("x"))
        out = subprocess.run([sys.executable, "-c", CHILD, str(F), str(n)],
                             capture_output=True, text=True, check=True)
        r = json.loads(out.stdout.strip().splitlines()[-1])
        N = F * n * n
        dense_t = r["n_iter"] * t_svd * (N / 2000) ** 3
        dense_gb = 6 * N * N * 8 / 1e9
        print(f"{F:3d} {f'{n}x{n}':>8} {N:8d} {r['n_iter']:5d} {r['rank']:6d} "
              f"{r['time']:8.1f} {r['peak'] / 1e9:8.2f} {dense_t:12.3g} "
              f"{dense_gb:9.3g} {dense_t / r['time']:11.3g}"
              + ("" if r["converged"] else "  (not converged)"), flush=True)


if __name__ == "__main__":
    main()
