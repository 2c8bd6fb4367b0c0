"""Synthetic matrices: planted low-rank + sparse problems and the example.

``make_planted`` is the setting of the numerical experiments of Candes, Li, Ma,
Wright (2011), section 4.1: L0 = X Y^T with X, Y of i.i.d. N(0, 1/n) entries,
and S0 with a uniformly random support of the given fraction and independent
random signs.

``example_lateral`` is invented data for the demo only, a scenario of our own:
a ring of orientation-tuned model units whose lateral weights mix broad
inhibition (rank 3), sparse like-to-like excitation and sparse
feature-specific suppression, with optional dense measurement noise (PCP
spreads dense noise over many tiny singular values; stable PCP, with
``delta``, is the program for noisy data).
"""

import numpy as np

__all__ = ["example_lateral", "make_planted"]


def make_planted(n, *, rank=None, corruption=0.05, magnitude=1.0, seed=0,
                 m=None):
    """A planted PCP problem: W = L0 + S0.

    Parameters
    ----------
    n : int
        Columns (and rows, unless ``m`` is given).
    rank : int or None
        Rank of L0; None means round(0.05 n), as in Candes et al. 2011.
    corruption : float
        Fraction of entries in the support of S0.
    magnitude : float
        |S0| on its support; signs are random (+-1 times ``magnitude``).
    seed : int
    m : int or None

    Returns
    -------
    W, L0, S0 : ndarray of shape (m, n)
    """
    m = n if m is None else m
    rank = max(1, round(0.05 * n)) if rank is None else rank
    rng = np.random.default_rng(seed)
    X = rng.standard_normal((m, rank)) / np.sqrt(n)
    Y = rng.standard_normal((n, rank)) / np.sqrt(n)
    L0 = X @ Y.T
    support = rng.random((m, n)) < corruption
    S0 = np.zeros((m, n))
    S0[support] = magnitude * rng.choice([-1.0, 1.0], size=int(support.sum()))
    return L0 + S0, L0, S0


def example_lateral(n=120, *, noise=0.0, seed=7):
    """Invented lateral weight matrix W[post, pre] of ``n`` orientation-tuned units.

    Parameters
    ----------
    n : int
    noise : float
        Standard deviation of dense Gaussian noise added to every entry.
    seed : int

    Returns
    -------
    W : ndarray of shape (n, n)
        Zero diagonal (no self-connections).
    preferred : ndarray of shape (n,)
        Preferred orientation of each unit, degrees in [0, 180).
    """
    rng = np.random.default_rng(seed)
    theta = np.sort(rng.uniform(0.0, 180.0, n))
    d = np.deg2rad(theta[:, None] - theta[None, :]) * 2.0   # period 180 deg
    broad = -0.04 * (1.0 + 0.5 * np.cos(d))                 # rank 3
    like = (np.cos(d) > 0.85) & (rng.random((n, n)) < 0.3)
    excite = np.where(like, rng.uniform(0.2, 0.5, (n, n)), 0.0)
    unlike = (np.cos(d) < -0.7) & (rng.random((n, n)) < 0.1)
    suppress = np.where(unlike, -rng.uniform(0.2, 0.4, (n, n)), 0.0)
    W = broad + excite + suppress + noise * rng.standard_normal((n, n))
    np.fill_diagonal(W, 0.0)
    return W, theta
