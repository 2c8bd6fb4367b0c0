"""A certificate for any PCP iterate: the relative duality gap.

The dual of Principal Component Pursuit with Omega the observed entries
(Candes, Li, Ma, Wright 2011: eq. 1.1 when every entry is observed, their
missing-entries problem, Theorem 1.2 from memory, otherwise) is

    maximise <Y, P_Omega W>  subject to  ||Y||_2 <= 1,  ||Y||_max <= lam,
                                          Y = 0 off Omega,

and weak duality (Boyd & Vandenberghe 2004, section 5.2, from memory) makes the value of
any feasible Y a lower bound on the optimum. A multiplier iterate Y of the
ALM is made feasible by zeroing it off Omega and dividing it by
s = max(1, ||Y||_2, ||Y||_max / lam), with ||Y||_2 taken from above
(:func:`._norms.gram_upper` or :func:`._norms.spectral_norm_bound`), so the
bound never over-states the dual value. A primal iterate L is made
feasible by S = P_Omega(W - L). Then

    gap = (p - d) / p,  p = f(L, P_Omega(W - L)),  d = <Y / s, P_Omega W>

bounds (p - f*) / p, how far that feasible point's objective can be above
the optimum f* relative to its own value (relative to f* the bound is
gap / (1 - gap)), whatever the solver did to get there. It certifies the
feasible split (L, P_Omega(W - L)); the solver's own S differs from
P_Omega(W - L) by the primal residual.
Several candidate multipliers may be offered; the best bound is kept.
The first may also be improved by alternating projection (von Neumann
1950; Boyd & Dattorro 2003, from memory) between the two balls of the
dual: its singular values above 1 are brought to 1 (through the Gram
matrix's eigenpairs, :func:`._norms.gram_eigh`), then its entries are
clipped to +-lam. Each round is a new candidate, made feasible and bounded
like the others, so the rounds can only raise the bound. On the
natural-statistics matrices the ALM's multiplier has spectral norm
1 + 1e-4 or so; the rounds close most of the gap that its scaling leaves
(measured on the 576-unit Gabor matrix: at step 400 the dual bound rose
from 309.532 (Y scaled) to 309.548 after one round and 309.5506 after four,
of a primal 309.564).

Arrays in, a small frozen result out; row blocks keep the temporaries to a
block.
"""

import math
from dataclasses import dataclass

import numpy as np

from ._norms import gram_eigh, gram_upper, spectral_norm_bound

__all__ = ["GapCertificate", "duality_gap", "relative_gap", "row_blocks",
           "sum_abs"]

PROJECTION_GAIN = 0.1  # rounds of alternating projection stop once one
                       # closes less than this share of the remaining gap

BLOCK_ELEMENTS = 1 << 18  # elements per row block of the elementwise passes
                          # (the ALM's, the certificate's, the verdict's)
GRAM_MAX = 600  # up to this smaller side ||Y||_2 comes from the Gram matrix
                # (eigvalsh: 14 ms at 576 against 52 ms for Lanczos on the
                # clustered spectrum of a multiplier, measured); above, from
                # _norms.spectral_norm_bound, whose cost grows as n^2
                # (6 ms against 62 ms for eigvalsh on a converged planted
                # multiplier at 1,000, measured)
PROJECTION_MAX = 2000  # up to this smaller side the rounds of alternating
                       # projection run (each a full eigh, 0.2 s at 1,024,
                       # about one step of a high-rank split: measured
                       # 136 s without them and 54 s with them on the
                       # 1,024-unit Gabor row of benchmarks/hard.py)


@dataclass(frozen=True)
class GapCertificate:
    """The duality gap of one primal-dual pair.

    Attributes
    ----------
    gap : float
        (primal - dual) / primal, at least 0; 0 when the primal value is 0.
    primal : float
        ||L||_* + lam ||P_Omega(W - L)||_1: the objective of the feasible
        point made from L.
    dual : float
        <Y / s, P_Omega W>, a lower bound on the optimal objective.
    scale : float
        s, the factor that made the best candidate multiplier feasible.
    """

    gap: float
    primal: float
    dual: float
    scale: float

    def as_dict(self):
        return {"duality_gap": self.gap, "primal_objective": self.primal,
                "dual_objective": self.dual, "dual_scale": self.scale}


def row_blocks(shape):
    """Row slices of at most ``BLOCK_ELEMENTS`` elements covering an array
    of this shape: the blocks every elementwise pass of the split walks."""
    rows = max(1, min(shape[0], BLOCK_ELEMENTS // max(shape[1], 1)))
    return [slice(i, min(i + rows, shape[0])) for i in range(0, shape[0], rows)]


def _low_rank_block(L, b):
    """Rows ``b`` of L, given as an array or as factors (U s, V^T)."""
    if isinstance(L, tuple):
        Us, Vt = L
        return Us[b] @ Vt if Us.shape[1] else np.zeros((b.stop - b.start,
                                                       Vt.shape[1]))
    return L[b]


def _abs_sum(R, observed, b):
    """sum |R| over the observed entries of rows ``b`` (R is those rows)."""
    np.abs(R, out=R)
    return float(R[observed[b]].sum() if observed is not None else R.sum())


def sum_abs(A, observed=None):
    """||P_Omega A||_1 in row blocks, without a full temporary."""
    return sum(_abs_sum(np.array(A[b]), observed, b) for b in row_blocks(A.shape))


def feasible_l1(W, L, observed=None):
    """||P_Omega(W - L)||_1 in row blocks (L an array or factors)."""
    return sum(_abs_sum(W[b] - _low_rank_block(L, b), observed, b)
               for b in row_blocks(W.shape))


def relative_gap(primal, dual):
    """(primal - dual) / primal, at least 0; 0 when the primal value is 0."""
    return 0.0 if primal <= 0 else max(0.0, (primal - dual) / primal)


def _scale(spec, top, lam):
    """s = max(1, ||Y||_2 bound, ||Y||_max / lam): Y / s is dual feasible."""
    return max(1.0, spec, top / lam)


def _zero_off(Y, observed):
    return Y if observed is None else np.where(observed, Y, 0.0)


def _inner(W, Y):
    total = 0.0
    for b in row_blocks(W.shape):
        total += float(np.vdot(Y[b], W[b]))  # Y is zero off Omega
    return total


def _dual_value(W, Y, lam, observed):
    """(<Y / s, P_Omega W>, s) for the candidate Y, zeroed off Omega."""
    Y = _zero_off(Y, observed)
    top = float(np.abs(Y).max()) if Y.size else 0.0
    if top == 0:
        spec = 0.0
    elif min(Y.shape) <= GRAM_MAX:
        spec = gram_upper(Y)
    else:
        spec = spectral_norm_bound(Y).upper
    s = _scale(spec, top, lam)
    return _inner(W, Y) / s, s


def _into_spectral_ball(Z, s, V):
    """Z with its singular values above 1 brought to 1, from the Gram
    eigenpairs (s, V) of ``gram_eigh``."""
    big = s > 1.0
    if not big.any():
        return Z.copy()
    Vb, shrink = V[:, big], 1.0 - 1.0 / s[big]
    if Z.shape[0] >= Z.shape[1]:  # V: right singular vectors
        return Z - ((Z @ Vb) * shrink) @ Vb.T
    return Z - Vb @ (shrink[:, None] * (Vb.T @ Z))


def _projected(W, Y, lam, observed, primal, best, rounds):
    """The best (value, scale) over Y and up to ``rounds`` rounds of
    alternating projection from it, better than ``best`` (value, scale)
    or ``best`` itself; the rounds stop early once one closes less than
    ``PROJECTION_GAIN`` of the remaining gap primal - value."""
    Z = _zero_off(Y, observed)
    for i in range(rounds + 1):
        upper, s, V = gram_eigh(Z)
        top = float(np.abs(Z).max()) if Z.size else 0.0
        scale = _scale(upper, top, lam)
        value = _inner(W, Z) / scale
        gain = value - best[0]
        if gain > 0:
            best = (value, scale)
        if i == rounds or (i and gain < PROJECTION_GAIN * (primal - best[0])):
            break
        Z = _into_spectral_ball(Z, s, V)
        np.clip(Z, -lam, lam, out=Z)
        Z = _zero_off(Z, observed)
    return best


def duality_gap(W, lam, L, nuclear, candidates, observed=None, rounds=0):
    """The relative duality gap of L and the best of the candidate multipliers.

    Parameters
    ----------
    W : ndarray (m, n)
    lam : float
    L : ndarray (m, n) or tuple (U s, V^T)
        The low-rank iterate, whole or as factors.
    nuclear : float
        ||L||_* (the sum of its singular values, known to the caller).
    candidates : iterable of ndarray (m, n)
        Multipliers to make feasible; the largest lower bound is used.
    observed : ndarray of bool or None
    rounds : int
        Most rounds of alternating projection from the first candidate
        (module docstring); each costs one symmetric eigendecomposition of
        the smaller side's Gram matrix, so they are taken only up to
        ``PROJECTION_MAX`` units.

    Returns
    -------
    GapCertificate

    Examples
    --------
    W with one nonzero entry: its optimum is L = 0, S = W, objective lam.
    The multiplier lam at that entry (0 elsewhere) is feasible and proves it;
    a multiplier of lam everywhere must be halved to be feasible, and proves
    only half.

    >>> W = np.zeros((4, 4)); W[0, 0] = 1.0
    >>> Y = np.zeros((4, 4)); Y[0, 0] = 0.5
    >>> duality_gap(W, 0.5, np.zeros((4, 4)), 0.0, [Y]).gap
    0.0
    >>> c = duality_gap(W, 0.5, np.zeros((4, 4)), 0.0, [np.full((4, 4), 0.5)])
    >>> c.primal, round(c.dual, 9), round(c.scale, 9), round(c.gap, 9)
    (0.5, 0.25, 2.0, 0.5)
    """
    primal = float(nuclear) + lam * feasible_l1(W, L, observed)
    candidates = list(candidates)
    project = bool(rounds and candidates and min(W.shape) <= PROJECTION_MAX)
    best = (-math.inf, 1.0)
    for Y in candidates[project:]:  # the first is bounded by _projected
        value, s = _dual_value(W, Y, lam, observed)
        if value > best[0]:
            best = (value, s)
    if project:
        best = _projected(W, candidates[0], lam, observed, primal, best,
                          rounds)
    value, scale = best
    if not math.isfinite(value):
        value = 0.0
    return GapCertificate(gap=relative_gap(primal, value), primal=primal,
                          dual=value, scale=scale)
