"""A certificate for any PCP iterate: the relative duality gap.

The dual of Principal Component Pursuit (Candes, Li, Ma, Wright 2011,
eq. 1.1, with Omega the observed entries) is

    maximise <Y, P_Omega W>  subject to  ||Y||_2 <= 1,  ||Y||_max <= lam,
                                          Y = 0 off Omega,

and weak duality (Boyd & Vandenberghe 2004, section 5.2) makes the value of
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

Arrays in, a small frozen result out; row blocks keep the temporaries to a
block.
"""

import math
from dataclasses import dataclass

import numpy as np

from ._norms import gram_upper, spectral_norm_bound

__all__ = ["GapCertificate", "duality_gap"]

_BLOCK_ELEMENTS = 1 << 18
GRAM_MAX = 600  # up to this smaller side ||Y||_2 comes from the Gram matrix
                # (eigvalsh: 14 ms at 576 against 52 ms for Lanczos on the
                # clustered spectrum of a multiplier, measured); above, from
                # _norms.spectral_norm_bound, whose cost grows as n^2


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


def _blocks(shape):
    rows = max(1, min(shape[0], _BLOCK_ELEMENTS // max(shape[1], 1)))
    return [slice(i, min(i + rows, shape[0])) for i in range(0, shape[0], rows)]


def _low_rank_block(L, b):
    """Rows ``b`` of L, given as an array or as factors (U s, V^T)."""
    if isinstance(L, tuple):
        Us, Vt = L
        return Us[b] @ Vt if Us.shape[1] else np.zeros((b.stop - b.start,
                                                       Vt.shape[1]))
    return L[b]


def feasible_l1(W, L, observed=None):
    """||P_Omega(W - L)||_1 in row blocks (L an array or factors)."""
    total = 0.0
    for b in _blocks(W.shape):
        R = np.abs(W[b] - _low_rank_block(L, b))
        total += float(R[observed[b]].sum() if observed is not None
                       else R.sum())
    return total


def _dual_value(W, Y, lam, observed):
    """(<Y / s, P_Omega W>, s) for the candidate Y, zeroed off Omega."""
    if observed is not None:
        Y = np.where(observed, Y, 0.0)
    top = float(np.abs(Y).max()) if Y.size else 0.0
    if top == 0:
        spec = 0.0
    elif min(Y.shape) <= GRAM_MAX:
        spec = gram_upper(Y)
    else:
        spec = spectral_norm_bound(Y).upper
    s = max(1.0, spec, top / lam)
    inner = 0.0
    for b in _blocks(W.shape):
        inner += float(np.vdot(Y[b], W[b]))  # Y is zero off Omega
    return inner / s, s


def duality_gap(W, lam, L, nuclear, candidates, observed=None):
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
    best, scale = -math.inf, 1.0
    for Y in candidates:
        value, s = _dual_value(W, Y, lam, observed)
        if value > best:
            best, scale = value, s
    if not math.isfinite(best):
        best = 0.0
    gap = 0.0 if primal <= 0 else max(0.0, (primal - best) / primal)
    return GapCertificate(gap=gap, primal=primal, dual=best, scale=scale)
