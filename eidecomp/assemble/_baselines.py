"""Reference constructions to score a circuit against (docs/assembly.md).

(a) one private interneuron per E unit: exact, at a 1:1 ratio;
(b) one global interneuron with compensating excitation: exact, dense J_EE;
(c) dropping the negative weights: no interneurons;
(d) a plain nonnegative factorisation of the negative side of W with the
    circuit's n_I, without the low-rank/sparse split.
(b) and (d) are also scored at the circuit's operating point: (b) with its
smallest excitatory weights pruned until its error equals the circuit's, and
(d) with J_EE pruned to the circuit's density.
"""

import numpy as np

from ..types import BaselineResult
from ._nmf import hals, nndsvd

__all__ = ["baselines"]


def _rel(W, W_eff):
    n = np.linalg.norm(W)
    return float(np.linalg.norm(W - W_eff) / n) if n else 0.0


def _density(J):
    return float(np.count_nonzero(J) / J.size) if J.size else 0.0


def private_interneurons(W):
    """(a): interneuron j is driven by E unit j alone and carries its
    negative outputs: J_IE = I, J_EI = max(-W, 0), J_EE = max(W, 0)."""
    n = W.shape[0]
    return np.maximum(W, 0), np.maximum(-W, 0), np.eye(n)


def global_interneuron(W):
    """(b): J_EE = W + e 1^T with e_i = max(0, -min_j W_ij), J_EI = e,
    J_IE = 1^T; W_eff = W exactly."""
    e = np.maximum(0.0, -W.min(axis=1))
    return W + e[:, None], e[:, None], np.ones((1, W.shape[1]))


def _prune_to_error(values, n_entries, norm_w, target):
    """The J_EE density of an exact construction (error zero) once its
    smallest entries are dropped while the error stays <= target.
    ``values``: its nonzero entries, a scratch array (sorted and squared in
    place); ``n_entries``: the size of J_EE; ``norm_w``: ||W||_F."""
    values.sort()
    np.square(values, out=values)
    np.cumsum(values, out=values)
    removable = int(np.searchsorted(values, (target * norm_w) ** 2,
                                    side="right"))
    return (values.size - removable) / n_entries


ROW_BLOCK = 1024
"""Rows per block when the exact baselines stream through W: their
constructions are never formed whole (each would be an N x N array)."""


def _blocks(n):
    for lo in range(0, n, ROW_BLOCK):
        yield slice(lo, min(lo + ROW_BLOCK, n))


def _exact_rows(W, circuit_error):
    """(a), (b) and (c) by blocks of rows: their relative errors and J_EE
    densities, and (b)'s density once pruned to ``circuit_error``."""
    e = np.maximum(0.0, -W.min(axis=1))       # (b)'s compensating excitation
    sq = {"private": 0.0, "global": 0.0, "drop": 0.0}
    nnz = {"private": 0, "global": 0, "drop": 0}
    for rows in _blocks(W.shape[0]):
        Wb = W[rows]
        J, EI, _ = private_interneurons(Wb)
        sq["private"] += float(np.sum((Wb - (J - EI)) ** 2))
        nnz["drop"] += np.count_nonzero(J)    # (a) and (c): J_EE = max(W, 0)
        sq["drop"] += float(np.sum((Wb - J) ** 2))
        Jg = Wb + e[rows, None]
        sq["global"] += float(np.sum((Wb - (Jg - e[rows, None])) ** 2))
        nnz["global"] += np.count_nonzero(Jg)
    nnz["private"] = nnz["drop"]
    norm = float(np.linalg.norm(W))
    size = W.size
    out = {k: (np.sqrt(sq[k]) / norm if norm else 0.0, nnz[k] / size)
           for k in sq}
    if circuit_error is None:
        return out, None
    values = np.empty(nnz["global"])          # (b)'s nonzeros, to be sorted
    at = 0
    for rows in _blocks(W.shape[0]):
        Jg = W[rows] + e[rows, None]
        v = Jg[Jg > 0]
        values[at:at + v.size] = v
        at += v.size
    return out, _prune_to_error(values, size, norm, circuit_error)


def _prune_to_density(J_EE, density):
    keep = int(round(density * J_EE.size))
    if keep >= np.count_nonzero(J_EE):
        return J_EE
    flat = J_EE.ravel()
    out = np.zeros_like(flat)
    if keep > 0:
        top = np.argpartition(flat, flat.size - keep)[flat.size - keep:]
        out[top] = flat[top]
    return out.reshape(J_EE.shape)


NMF_MAX_UNITS = 2000
"""Above this many units baseline (d) is not scored: a dense factorisation
with N / 4 components costs about N^3 / 2 per sweep (hours at 10,000
units), and the report says so."""


def baselines(W, n_i, *, circuit_error=None, circuit_density=None,
              max_iter=300):
    """Score the four reference constructions on W ((d) only up to
    :data:`NMF_MAX_UNITS` units).

    Returns a tuple of BaselineResult; with ``circuit_error`` and
    ``circuit_density``, two more rows score (b) and (d) at the circuit's
    error and density.
    """
    exact, dens = _exact_rows(W, circuit_error)
    if exact["global"][0] > 1e-9:
        raise ValueError("the global construction is not exact")
    out = [BaselineResult("private", "one private interneuron per E unit",
                          W.shape[0], *exact["private"]),
           BaselineResult("global", "one global interneuron, compensating "
                          "excitation", 1, *exact["global"]),
           BaselineResult("drop", "negative weights dropped", 0,
                          *exact["drop"])]
    if circuit_error is not None:
        out.append(BaselineResult("global@error", "global, pruned to the "
                                  "circuit's error", 1, float(circuit_error),
                                  float(dens)))
    if max(W.shape) > NMF_MAX_UNITS:
        return tuple(out)
    Jp = np.maximum(W, 0)
    Mneg = np.maximum(-W, 0)
    A, B = nndsvd(Mneg, n_i)
    A, B, _ = hals(Mneg, A, B, max_iter=max_iter, tol=1e-6)
    out.append(BaselineResult("nmf", f"nonnegative factorisation, {n_i} "
                              "interneurons, no split", n_i,
                              _rel(W, Jp - A @ B), _density(Jp)))
    if circuit_density is not None:
        Jd = _prune_to_density(Jp, circuit_density)
        out.append(BaselineResult("nmf@density", "nmf, J_EE pruned to the "
                                  "circuit's density", n_i,
                                  _rel(W, Jd - A @ B), _density(Jd)))
    return tuple(out)
