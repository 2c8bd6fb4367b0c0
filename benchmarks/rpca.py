"""Speed of the fast robust PCA solver, measured side by side in one run.

For planted problems in the setting of Candes et al. (2011), section 4.1
(rank 0.05 n, 5 % of entries corrupted by random signs), prints at each n:

* eidecomp's ALM solver: time, relative error of L against the planted L0;
* one full numpy SVD of the same matrix (np.linalg.svd(W), numpy's default
  call, and the thin one, full_matrices=False), and our time as a multiple;
* tensorly.decomposition.robust_pca configured to solve the same PCP problem
  (reg_J = 1/2, reg_E = lam; see tests/test_tensorly.py), run to a relative
  tolerance of 1e-10; at n > --tensorly-max its time is extrapolated from a
  timed block of its iterations and the iteration count it needed at the
  largest n it ran, and marked "est";
* cvxpy (SCS, the first-order solver meant for larger problems) at the
  --cvxpy sizes.

Usage: python benchmarks/rpca.py [--sizes 500,1000,2000] [--cvxpy 100,200]
"""

import argparse
import time

import numpy as np

from eidecomp import robust_pca
from eidecomp.datasets import make_planted


def _rel(a, b):
    return float(np.linalg.norm(a - b) / np.linalg.norm(b))


def _time(f):
    t = time.perf_counter()
    out = f()
    return time.perf_counter() - t, out


def _tensorly(W, lam, n_iter_max):
    from tensorly.decomposition import robust_pca as tl_rpca

    D, E, errs = tl_rpca(W, reg_J=0.5, reg_E=lam, tol=1e-10 * np.linalg.norm(W),
                         mu_init=1.25 / np.linalg.norm(W, 2), learning_rate=1.1,
                         n_iter_max=n_iter_max, return_errors=True, verbose=0)
    return D, len(errs)


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--sizes", default="500,1000,2000")
    ap.add_argument("--cvxpy", default="100,200")
    ap.add_argument("--tensorly-max", type=int, default=500,
                    help="largest n at which tensorly runs to its tolerance")
    args = ap.parse_args()
    print(f"{'n':>5} {'ours s':>8} {'err L':>8} {'svd s':>7} {'x svd':>6} "
          f"{'thin s':>7} {'x thin':>6} {'tensorly s':>11} {'err L':>8} "
          f"{'tl/ours':>8}")
    tl_iters = None
    for n in (int(x) for x in args.sizes.split(",")):
        W, L0, _ = make_planted(n, seed=0)
        robust_pca(W[:50, :50])  # warm up imports
        t_ours, dec = _time(lambda W=W: robust_pca(W))
        t_svd, _ = _time(lambda W=W: np.linalg.svd(W))
        t_thin, _ = _time(lambda W=W: np.linalg.svd(W, full_matrices=False))
        try:
            lam = dec.lam
            if n <= args.tensorly_max:
                t_tl, (D, tl_iters) = _time(
                    lambda W=W, lam=lam: _tensorly(W, lam, 5000))
                tl = f"{t_tl:11.2f} {_rel(D, L0):8.1e}"
            else:
                block = 5
                t_blk, _ = _time(lambda W=W, lam=lam, block=block:
                                  _tensorly(W, lam, block))
                t_tl = t_blk / block * (tl_iters or 300)
                tl = f"{t_tl:7.0f} est {'-':>8}"
            ratio = f"{t_tl / t_ours:8.0f}"
        except ImportError:
            tl, ratio = f"{'(no tensorly)':>20}", "-"
        print(f"{n:5d} {t_ours:8.2f} {_rel(dec.low_rank, L0):8.1e} {t_svd:7.2f} "
              f"{t_ours / t_svd:6.2f} {t_thin:7.2f} {t_ours / t_thin:6.2f} {tl} "
              f"{ratio}", flush=True)
    print()
    # SCS stops at a far lower accuracy than our default tolerance; the last
    # columns run ours at tol = 1e-5 as well, still more accurate than SCS.
    print(f"{'n':>5} {'ours s':>8} {'err L':>8} {'cvxpy/SCS s':>12} {'err L':>8} "
          f"{'cvxpy/ours':>11} {'ours@1e-5 s':>12} {'err L':>8} {'ratio':>6}")
    for n in (int(x) for x in args.cvxpy.split(",") if x):
        W, L0, _ = make_planted(n, seed=0)
        t_ours, dec = _time(lambda W=W: robust_pca(W))
        t_loose, loose = _time(lambda W=W: robust_pca(W, tol=1e-5))
        t_cvx, ref = _time(lambda W=W: robust_pca(W, method="convex",
                                                   solver="SCS"))
        print(f"{n:5d} {t_ours:8.3f} {_rel(dec.low_rank, L0):8.1e} {t_cvx:12.1f} "
              f"{_rel(ref.low_rank, L0):8.1e} {t_cvx / t_ours:11.0f} "
              f"{t_loose:12.4f} {_rel(loose.low_rank, L0):8.1e} "
              f"{t_cvx / t_loose:6.0f}", flush=True)


if __name__ == "__main__":
    main()
