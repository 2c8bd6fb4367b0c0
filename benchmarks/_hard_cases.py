"""The problems of benchmarks/hard.py, each built from a numpy Generator seed.

* ``planted``: the exact-recovery experiment of Candes, Li, Ma, Wright (2011,
  J. ACM 58(3), section 4.1), built by :func:`eidecomp.datasets.make_planted`:
  L0 = X Y^T with X, Y n x r of i.i.d. N(0, 1/n) entries (each factor's
  standard normal entries scaled by 1/sqrt(n)), r = max(1, round(rank/n * n)),
  and a uniformly random fraction rho_s of entries corrupted by S0 = +-1 with
  independent random signs; lam = 1/sqrt(n), the library's default.
* ``unplanted``: numpy ``default_rng(seed).standard_normal(shape)``; the
  seeds of the known hard cases (25 x 25 at lam 0.12, tol 1e-7: seed 2, as in
  tests/test_path_and_estimator.py) are the base, shifted by --seed + trial.
* ``natural``: lateral matrices from natural-stimulus statistics built from
  scikit-learn's sample photographs (eidecomp.datasets): Gabor-response
  covariance (16 orientations on a 6 x 6 lattice, 576 units; 8 on 5 x 5,
  200 units), partial correlations of 12 x 12 pixel patches (144 units) and
  a sparse-coding dictionary's lateral weights (256 atoms on 8 x 8
  patches); at the default lam and stop.
* ``example``: the project's own example lateral matrix,
  :func:`eidecomp.datasets.example_lateral` at its default seed (what
  examples/decompose_example.py and ``demo_inputs`` use), solved as the
  example does, with the diagonal unobserved (``ignore_diagonal=True``).
"""

from dataclasses import dataclass

import numpy as np

from eidecomp.datasets import (
    example_lateral,
    gabor_covariance,
    make_planted,
    patch_partial_correlations,
    sparse_coding_lateral,
)

__all__ = ["FULL_GRID", "QUICK_GRID", "SUBSET_GRID", "Case", "example_case",
           "natural_cases", "planted_case", "unplanted_cases"]

FULL_GRID = tuple((rr, rs) for rr in (0.05, 0.10, 0.15, 0.20)
                  for rs in (0.05, 0.10, 0.20, 0.30))
SUBSET_GRID = ((0.05, 0.05), (0.15, 0.15), (0.10, 0.30), (0.15, 0.20),
               (0.20, 0.20))
QUICK_GRID = ((0.05, 0.05), (0.15, 0.15), (0.10, 0.30))

# (rows, cols, lam, tol, base seed): lam/tol None = the library's default
UNPLANTED = ((25, 25, 0.12, 1e-7, 2), (40, 40, None, None, 1),
             (60, 60, None, None, 1), (200, 200, None, None, 1),
             (200, 120, None, None, 3), (120, 200, None, None, 4))
UNPLANTED_QUICK = ((25, 25, 0.12, 1e-7, 2), (40, 40, None, None, 1),
                   (60, 60, None, None, 1), (40, 24, None, None, 3),
                   (24, 40, None, None, 4))


@dataclass(frozen=True)
class Case:
    """One problem: W, the solver settings, and the planted L0 if any.

    ``family`` names the problem independently of its size (planted: rank/n,
    rho_s and trial), so a tensorly iteration count measured at one n can
    stand for another; None for the fixed-size rows.
    """

    label: str
    W: np.ndarray
    lam: float | None = None
    tol: float | None = None
    ignore_diagonal: bool = False
    L0: np.ndarray | None = None
    family: tuple | None = None
    trial: int = 0

    @property
    def observed(self):
        """Boolean mask of the observed entries, or None for all."""
        if not self.ignore_diagonal:
            return None
        obs = np.ones(self.W.shape, bool)
        np.fill_diagonal(obs, False)
        return obs


def planted_seed(seed, n, rr, rs, trial):
    """One seed per (n, grid point, trial), reproducible from --seed."""
    return [seed, n, round(1000 * rr), round(1000 * rs), trial]


def planted_case(n, rr, rs, *, seed=0, trial=0):
    r = max(1, round(rr * n))
    ss = np.random.SeedSequence(planted_seed(seed, n, rr, rs, trial))
    sub = int(ss.generate_state(1)[0])
    W, L0, _ = make_planted(n, rank=r, corruption=rs, seed=sub)
    return Case(label=f"pl{n} r{rr:.2f} s{rs:.2f}", W=W, L0=L0,
                family=("planted", rr, rs, trial), trial=trial)


def unplanted_cases(*, quick=False, seed=0, trial=0):
    out = []
    for m, n, lam, tol, base in (UNPLANTED_QUICK if quick else UNPLANTED):
        W = np.random.default_rng(base + seed + trial).standard_normal((m, n))
        tag = " hard" if lam is not None else ""
        out.append(Case(label=f"gauss {m}x{n}{tag}", W=W, lam=lam, tol=tol,
                        trial=trial))
    return out


def example_case():
    W, _ = example_lateral()
    return Case(label="example lateral", W=W, ignore_diagonal=True)


def natural_cases(*, quick=False):
    """The natural-statistics rows (fixed matrices: no seed, no trials)."""
    yield Case(label="photo pcorr 12x12", W=patch_partial_correlations(12))
    yield Case(label="gabor cov 8x5x5", W=gabor_covariance(8, 5))
    if quick:
        return
    yield Case(label="sparse coding 256", W=sparse_coding_lateral())
    yield Case(label="gabor cov 16x6x6", W=gabor_covariance(16, 6))
    yield Case(label="gabor cov 16x8x8", W=gabor_covariance(16, 8))
