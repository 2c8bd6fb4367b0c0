"""The published remedies for a slow ALM, measured side by side (a study).

Each remedy runs as ADMM on the same fixed-point map, with a full SVD every
step, so that only the schedule differs; the library's solver
(eidecomp/decompose/_ialm.py) is the last column. For each matrix the table
prints the steps needed for primal and dual residual below 1e-8 (the stopping
rule of docs/robust_pca.md), or ">N" when the budget ran out.

Remedies (docs/robust_pca.md, "What was tried"):

* ``textbook``  mu x 1.5 per step while the primal residual is above tol,
  then residual balancing with the old thresholds (the schedule before
  issue 14; Lin, Chen, Ma 2010, with Boyd et al. 2011 section 3.4.1);
* ``balance``   residual balancing from the first step (factor 2, band 10;
  Boyd et al. 2011, section 3.4.1);
* ``relax``     the same with over-relaxation alpha = 1.6 (Eckstein and
  Bertsekas 1992; Boyd et al. 2011, section 3.4.3);
* ``anderson``  type-II Anderson acceleration of the map (depth 10, restart
  on growth; Walker and Ni 2011) with balancing (factor 2, band 3) from the
  first step;
* ``fixed8``    a fixed penalty of 8 mu_0 with the same acceleration;
* ``library``   eidecomp's solver as shipped: growth for at most 20 steps,
  then balancing and acceleration.

Matrices: the reduced exact-recovery experiment of Candes, Li, Ma, Wright
(2011, section 4.1) at n = 200 (L0 = X Y^T, X and Y with N(0, 1/n) entries,
random-sign corruptions, lam = 1/sqrt(n); benchmarks/_hard_cases.py), and
unplanted Gaussian matrices.

Usage: OPENBLAS_NUM_THREADS=1 python benchmarks/remedies.py [--n 200]
       [--budget 1500]
"""

import argparse
import sys
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _hard_cases import planted_case  # noqa: E402

from eidecomp.decompose._anderson import Anderson  # noqa: E402
from eidecomp.decompose._ialm import ialm  # noqa: E402

TOL = 1e-8


def _step(q, W, lam, mu):
    """One ALM step as a map of q = S + Y/mu: returns F(q), S, S_new."""
    thr = lam / mu
    ym = np.clip(q, -thr, thr)
    S = q - ym
    U, s, Vt = np.linalg.svd(W - S + ym, full_matrices=False)
    r = int(np.count_nonzero(s > 1 / mu))
    L = (U[:, :r] * (s[:r] - 1 / mu)) @ Vt[:r]
    fq = W - L + ym
    S_new = fq - np.clip(fq, -thr, thr)
    return fq, L, S, S_new


def _residuals(W, L, S, S_new, fq, lam, mu, norm_W):
    primal = np.linalg.norm(W - L - S_new) / norm_W
    y_new = mu * (fq - S_new)
    dual = mu * np.linalg.norm(S_new - S) / max(np.linalg.norm(y_new), 1e-300)
    return primal, dual


def _balanced(mu, primal, dual, band, factor):
    if primal > band * dual:
        return mu * factor
    if dual > band * primal:
        return mu / factor
    return mu


def _textbook(mu, primal, dual, state):
    state["phase2"] = state.get("phase2", False) or primal < TOL
    if not state["phase2"] or primal > 0.5 * dual:
        return mu * 1.5
    return mu / 1.5 if dual > 10 * primal else mu


SCHEDULES = {
    "textbook": dict(rule=_textbook, alpha=1.0, accel=False, mu0=1.0),
    "balance": dict(rule=lambda mu, p, d, s: _balanced(mu, p, d, 10, 2),
                    alpha=1.0, accel=False, mu0=1.0),
    "relax": dict(rule=lambda mu, p, d, s: _balanced(mu, p, d, 10, 2),
                  alpha=1.6, accel=False, mu0=1.0),
    "anderson": dict(rule=lambda mu, p, d, s: _balanced(mu, p, d, 3, 2),
                     alpha=1.0, accel=True, mu0=1.0),
    "fixed8": dict(rule=lambda mu, p, d, s: mu, alpha=1.0, accel=True, mu0=8.0),
}


def admm(W, lam, schedule, budget):
    """Steps to both residuals below TOL under one schedule (None: budget out)."""
    spec = SCHEDULES[schedule]
    norm_W = np.linalg.norm(W)
    mu = spec["mu0"] * 1.25 / np.linalg.norm(W, 2)
    q = np.zeros_like(W)
    accel = Anderson() if spec["accel"] else None
    state = {}
    for it in range(1, budget + 1):
        fq, L, S, S_new = _step(q, W, lam, mu)
        primal, dual = _residuals(W, L, S, S_new, fq, lam, mu, norm_W)
        if primal < TOL and dual < TOL:
            return it
        new_mu = spec["rule"](mu, primal, dual, state)
        if new_mu != mu:  # a new map: restart from the plain step's (S, Y)
            y = mu * (fq - S_new)
            mu, q = new_mu, S_new + y / new_mu
            if accel is not None:
                accel.reset()
        elif accel is not None:
            q = accel.step(q, fq)
        else:
            q = q + spec["alpha"] * (fq - q)
    return None


def _matrices(n):
    grid = [(0.05, 0.05), (0.05, 0.30), (0.10, 0.20), (0.15, 0.10), (0.20, 0.05),
            (0.20, 0.20)]
    for rr, rs in grid:
        yield f"planted r/n {rr:.2f} rho {rs:.2f}", planted_case(n, rr, rs).W, None
    yield "Gaussian 25x25, lam 0.12", \
        np.random.default_rng(2).standard_normal((25, 25)), 0.12
    for shape in ((60, 60), (n, n), (n, 3 * n // 5)):
        yield f"Gaussian {shape[0]}x{shape[1]}", \
            np.random.default_rng(1).standard_normal(shape), None


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--n", type=int, default=200)
    ap.add_argument("--budget", type=int, default=1500)
    args = ap.parse_args()
    warnings.simplefilter("ignore")
    names = [*SCHEDULES, "library"]
    print(f"{'matrix':30s}" + "".join(f"{s:>10s}" for s in names))
    for label, W, lam in _matrices(args.n):
        lam = 1 / np.sqrt(max(W.shape)) if lam is None else lam
        cells = []
        for name in SCHEDULES:
            it = admm(W, lam, name, args.budget)
            cells.append(f">{args.budget}" if it is None else str(it))
        _, _, _, info = ialm(W, lam, tol=TOL, max_iter=args.budget)
        cells.append(str(info["n_iter"]) if info["converged"]
                     else f">{args.budget}")
        print(f"{label:30s}" + "".join(f"{c:>10s}" for c in cells), flush=True)


if __name__ == "__main__":
    main()
