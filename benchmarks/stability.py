"""Time of the stability summary that `eidecomp run` records, at N = 1000,
2000 and 5000 E units (4:1, so N + N/4 units in the Jacobian).

Circuits: the planted circuits of eidecomp.datasets.make_planted_circuit
(5 untuned, N/4 - 5 tuned interneurons, pool 8, seed 0), scaled by
eidecomp.dynamics.scaled_circuit to a gain of 0.9 / max Re eig(W), so that
the original network is stable (growth rate -0.1 per tau_E) and the tau scan
has a crossing to find.

Columns, for each size:

* ``summary``: eidecomp.dynamics.stability_summary as shipped (ARPACK on
  the Jacobian operator above DENSE_MAX_UNITS units) and the number of
  eigenvalue problems it solved;
* ``one ARPACK``, ``one dense``: one spectral abscissa of the circuit at
  tau_I / tau_E = 2 by ARPACK (scipy.sparse.linalg.eigs) and by
  numpy.linalg.eigvals, and their difference (dense where affordable:
  up to --dense-max units);
* ``dense summary``: the same summary with every eigenvalue problem dense
  (only up to --dense-summary-max units: it solves about a dozen of them).

Usage: OPENBLAS_NUM_THREADS=1 python benchmarks/stability.py
       [--sizes 1000 2000 5000] [--dense-max 2500] [--dense-summary-max 1300]
"""

import argparse
import time

import numpy as np
import scipy.sparse.linalg as ssl

from eidecomp import dynamics
from eidecomp.datasets import make_planted_circuit


class _Counted:
    """Counts the eigenvalue problems: ARPACK calls and dense eigvals."""

    def __init__(self):
        self.n = 0
        self._eigs, self._eigvals = ssl.eigs, np.linalg.eigvals

    def __enter__(self):
        def eigs(*a, **k):
            self.n += 1
            return self._eigs(*a, **k)

        def eigvals(*a, **k):
            self.n += 1
            return self._eigvals(*a, **k)

        ssl.eigs, np.linalg.eigvals = eigs, eigvals
        return self

    def __exit__(self, *exc):
        ssl.eigs, np.linalg.eigvals = self._eigs, self._eigvals


def _timed(fn):
    t = time.perf_counter()
    out = fn()
    return out, time.perf_counter() - t


def _dense_summary(c, W):
    a = dynamics.spectral_abscissa(W, method="dense")
    b = dynamics.circuit_abscissa(c, method="dense")
    r = dynamics.max_stable_tau_ratio(c, method="dense")
    return a - 1.0, b, r


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[1000, 2000, 5000])
    ap.add_argument("--dense-max", type=int, default=2500)
    ap.add_argument("--dense-summary-max", type=int, default=1300)
    args = ap.parse_args()
    print(f"{'N':>6} {'units':>6} {'summary':>9} {'problems':>8} "
          f"{'ratio':>8} {'one ARPACK':>10} {'one dense':>10} {'|diff|':>9} "
          f"{'dense summary':>13}")
    for n in args.sizes:
        W, c, _ = make_planted_circuit(n, n_untuned=5, n_tuned=n // 4 - 5,
                                       pool=8, seed=0)
        g = 0.9 / dynamics.spectral_abscissa(W)
        c, W = dynamics.scaled_circuit(c, g), g * W
        units = c.n_excitatory + c.n_inhibitory
        with _Counted() as count:
            s, t_sum = _timed(lambda c=c, W=W: dynamics.stability_summary(c, W))
        a_it, t_it = _timed(lambda c=c: dynamics.circuit_abscissa(
            c, tau_i=2.0, method="arpack"))
        dense = diff = dense_sum = "-"
        if units <= args.dense_max:
            a_d, t_d = _timed(lambda c=c: dynamics.circuit_abscissa(
                c, tau_i=2.0, method="dense"))
            dense, diff = f"{t_d:.2f} s", f"{abs(a_it - a_d):.1e}"
        if units <= args.dense_summary_max:
            ref, t_ds = _timed(lambda c=c, W=W: _dense_summary(c, W))
            same = abs(ref[2] / s["max_stable_tau_ratio"] - 1) < 1e-3
            dense_sum = f"{t_ds:.1f} s" + ("" if same else " (differs)")
        ratio = s["max_stable_tau_ratio"]
        print(f"{n:>6} {units:>6} {t_sum:>7.2f} s {count.n:>8} "
              f"{'none' if ratio is None else format(ratio, '.4g'):>8} "
              f"{t_it:>8.2f} s {dense:>10} {diff:>9} {dense_sum:>13}", flush=True)


if __name__ == "__main__":
    main()
