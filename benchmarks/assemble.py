"""Planted-circuit recovery and assembly time, measured in one run.

For planted Dale's-law circuits (eidecomp.datasets.make_planted_circuit:
N excitatory units on a feature ring, 5 untuned interneurons with dense
pools, N/4 - 5 tuned ones pooling 8 neighbours and inhibiting 8 units of
the opposite feature, like-to-like J_EE of density 8 %), the assembler gets
only W_eff at 4:1 and the script prints, per size and seed:

* the relative error ||W - W_eff||_F / ||W||_F (target < 2 %),
* the F1 score of the recovered J_EE support (target >= 0.9),
* the mean Jaccard index of tuned input pools matched one to one to the
  planted ones (scipy's linear_sum_assignment; target >= 0.7),
* the error of baseline (d), a plain nonnegative factorisation with the same
  n_I, and the J_EE density that baseline (b) needs at the circuit's error,
* the median circular variance of the input pools of the untuned and of
  the tuned interneurons (tuned pools should be far more selective),
* the time of decomposition + assembly + baselines.

Usage: python benchmarks/assemble.py [--sizes 200,400,800] [--seeds 0,1,2]
       [--big 1000]
"""

import argparse
import time

import numpy as np
from scipy.optimize import linear_sum_assignment

from eidecomp import assemble
from eidecomp.analysis import interneuron_pools
from eidecomp.datasets import make_planted_circuit


def f1(a, b):
    a, b = a > 0, b > 0
    return 2 * (a & b).sum() / (a.sum() + b.sum())


def mean_jaccard(P, Q):
    P, Q = (P > 0).astype(float), (Q > 0).astype(float)
    inter = P @ Q.T
    J = inter / np.maximum(P.sum(1)[:, None] + Q.sum(1)[None, :] - inter, 1)
    r, c = linear_sum_assignment(-J)
    return J[r, c].mean()


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--sizes", default="200,400,800")
    ap.add_argument("--seeds", default="0,1,2")
    ap.add_argument("--big", type=int, default=1000,
                    help="size of the timing-only run (0 to skip)")
    args = ap.parse_args()
    print(f"{'N':>5} {'seed':>4} {'n_u':>3} {'n_t':>4} {'error':>7} "
          f"{'F1 J_EE':>8} {'Jaccard':>8} {'dens':>6} {'(d) err':>8} "
          f"{'(b) dens':>9} {'CV unt':>7} {'CV tun':>7} {'time s':>7}")
    for n in (int(x) for x in args.sizes.split(",")):
        for seed in (int(x) for x in args.seeds.split(",")):
            W, truth, features = make_planted_circuit(n, n_untuned=5,
                                                      n_tuned=n // 4 - 5,
                                                      seed=seed)
            t = time.perf_counter()
            c = assemble(W, ei_ratio="4:1", seed=seed)
            t = time.perf_counter() - t
            b = {x.name: x for x in c.report.baselines}
            r = c.report
            pools = interneuron_pools(c, features)
            cv = {k: np.median([p["circular_variance"] for p in pools
                                if p["kind"] == k
                                and p["circular_variance"] is not None])
                  for k in ("untuned", "tuned")}
            print(f"{n:5d} {seed:4d} {c.n_untuned:3d} {c.n_tuned:4d} "
                  f"{r.relative_error:7.4f} {f1(c.J_EE, truth.J_EE):8.3f} "
                  f"{mean_jaccard(c.J_TE, truth.J_TE):8.3f} "
                  f"{r.ee_density:6.3f} {b['nmf'].relative_error:8.4f} "
                  f"{b['global@error'].ee_density:9.3f} {cv['untuned']:7.3f} "
                  f"{cv['tuned']:7.3f} {t:7.1f}", flush=True)
    if args.big:
        n = args.big
        W, truth, _ = make_planted_circuit(n, n_untuned=5, n_tuned=n // 4 - 5,
                                           seed=0)
        t = time.perf_counter()
        c = assemble(W, ei_ratio="4:1", baselines=False)
        t = time.perf_counter() - t
        print(f"\n{n}-unit matrix at 4:1 ({c.n_inhibitory} interneurons): "
              f"{t:.1f} s (decompose + assemble, without baselines; target < 60 s)"
              f", error {c.report.relative_error:.4f}")


if __name__ == "__main__":
    main()
