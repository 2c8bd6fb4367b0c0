"""Reference constructions to score a circuit against (docs/assembly.md).

private: one private interneuron per E unit: exact, at a 1:1 ratio;
global: one global interneuron with compensating excitation: exact, dense J_EE;
drop: dropping the negative weights: no interneurons;
nmf: a plain nonnegative factorisation of the negative side of W with the
    circuit's n_I, without the low-rank/sparse split: scikit-learn's NMF
    (coordinate descent, NNDSVDa start, in chunks of NMF_CHUNK sweeps until
    the measured stop of :func:`plain_factorisation`, up to NMF_MAX_ITER
    sweeps), with its convergence and KKT residual reported.
global and nmf are also scored at the circuit's operating point (global@error:
its smallest excitatory weights pruned until its error equals the circuit's;
nmf@density: J_EE pruned to the circuit's density).
"""

from typing import NamedTuple

import numpy as np

from ..types import BaselineResult

__all__ = ["PlainFit", "baselines", "kkt_residual", "plain_factorisation"]


def _rel(W, W_eff):
    n = np.linalg.norm(W)
    return float(np.linalg.norm(W - W_eff) / n) if n else 0.0


def _density(J):
    return float(np.count_nonzero(J) / J.size) if J.size else 0.0


def private_interneurons(W):
    """private: interneuron j is driven by E unit j alone and carries its
    negative outputs: J_IE = I, J_EI = max(-W, 0), J_EE = max(W, 0)."""
    n = W.shape[0]
    return np.maximum(W, 0), np.maximum(-W, 0), np.eye(n)


def global_interneuron(W):
    """global: J_EE = W + e 1^T with e_i = max(0, -min_j W_ij), J_EI = e,
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
    """private, global and drop by blocks of rows: their relative errors and J_EE
    densities, and global's density once pruned to ``circuit_error``."""
    e = np.maximum(0.0, -W.min(axis=1))       # global's compensating excitation
    sq = {"private": 0.0, "global": 0.0, "drop": 0.0}
    nnz = {"private": 0, "global": 0, "drop": 0}
    for rows in _blocks(W.shape[0]):
        Wb = W[rows]
        J, EI, _ = private_interneurons(Wb)
        sq["private"] += float(np.sum((Wb - (J - EI)) ** 2))
        nnz["drop"] += np.count_nonzero(J)    # private and drop: J_EE = max(W, 0)
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
    values = np.empty(nnz["global"])          # global's nonzeros, to be sorted
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
"""Above this many units the nmf baseline is not scored: a dense factorisation
with N / 4 components costs about N^3 / 2 per sweep (hours at 10,000
units), and the report says so."""


NMF_MAX_ITER = 5000
"""Sweeps of the nmf baseline; a baseline stopped here says so."""
NMF_KKT_TOL = 1e-3
"""A relative KKT residual above this is not converged."""
NMF_CHUNK = 100
"""Sweeps between two checks of the measured stop."""
NMF_STALL = 1e-4
"""The measured stop: the error falls by less than this share of itself over
a chunk, and the KKT residual is at most NMF_KKT_TOL. On the lateral weights
of a 512-atom sparse-coding dictionary (128 components) scikit-learn's own
stop (tol 1e-4) is not met in 5,000 sweeps, 45 s, while the error is within
0.02 % of its 3,000-sweep value after 1,800."""


class PlainFit(NamedTuple):
    """The nmf baseline's factorisation M ~ A B and how it stopped."""

    A: np.ndarray
    B: np.ndarray
    converged: bool
    kkt: float
    sweeps: int


def kkt_residual(M, A, B):
    """The relative KKT residual of min 0.5 ||M - A B||_F^2, A, B >= 0:
    the projected gradient (Lin 2007, Neural Comput. 19:2756, eq. 8) of each
    factor over the scale of its gradient's data term, the larger of the
    two. Unchanged by A -> c A, B -> B / c; zero at a KKT point.

    >>> M = np.array([[1.0, 2.0], [2.0, 4.0]])
    >>> kkt_residual(M, np.array([[1.0], [2.0]]), np.array([[1.0, 2.0]]))
    0.0
    """
    R = A @ B - M
    out = []
    for grad, factor, data in ((R @ B.T, A, M @ B.T), (A.T @ R, B, A.T @ M)):
        pg = np.where(factor > 0, grad, np.minimum(grad, 0.0))
        scale = float(np.linalg.norm(data))
        out.append(float(np.linalg.norm(pg)) / scale if scale > 0 else 0.0)
    return max(out)


def plain_factorisation(M, k, seed=0, max_iter=None):
    """The nmf baseline's factorisation M >= 0 ~ A B with k components, a
    :class:`PlainFit`: scikit-learn's NMF, solver "cd", init "nndsvda" (a
    seeded random start where NNDSVD is undefined), run NMF_CHUNK sweeps at
    a time, each chunk started from the last (init "custom": the same
    iterates as one run, scikit-learn's own stop switched off), until the
    measured stop: its KKT residual (:func:`kkt_residual`) at most
    NMF_KKT_TOL and ||M - A B||_F lowered by less than NMF_STALL of itself
    over the chunk; at most ``max_iter`` sweeps (default NMF_MAX_ITER).
    Converged means the KKT residual is at most NMF_KKT_TOL. On an exactly
    factorisable M (a connectome's inhibitory columns) the error falls
    linearly to rounding level before it stalls; scikit-learn's own stop,
    relative to its first sweep's progress, is never met there, and on
    natural-statistics matrices not within 5,000 sweeps."""
    import warnings

    from sklearn.decomposition import NMF
    from sklearn.exceptions import ConvergenceWarning as SkConvergence

    if k == 0 or not M.any():
        A, B = np.zeros((M.shape[0], k)), np.zeros((k, M.shape[1]))
        return PlainFit(A, B, True, 0.0, 0)
    budget = NMF_MAX_ITER if max_iter is None else max_iter

    def fit_plain(init, sweeps, start=None):
        model = NMF(n_components=k, solver="cd", init=init, tol=0.0,
                    max_iter=sweeps, random_state=seed)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", SkConvergence)
            if start is None:
                return model.fit_transform(M), model
            return model.fit_transform(M, W=start[0], H=start[1]), model

    def first(init):
        with np.errstate(divide="raise", invalid="raise"):
            return fit_plain(init, min(NMF_CHUNK, budget))

    try:
        A, model = first("nndsvda")
    except FloatingPointError:
        # NNDSVD divides by a zero norm when M has fewer nonzero singular
        # values than k
        with np.errstate(divide="ignore", invalid="ignore"):
            A, model = fit_plain("random", min(NMF_CHUNK, budget))
    B, sweeps = model.components_, model.n_iter_
    error = float(np.linalg.norm(M - A @ B))
    kkt = kkt_residual(M, A, B)
    while sweeps < budget and not kkt == 0.0:
        A, model = fit_plain("custom", min(NMF_CHUNK, budget - sweeps),
                             (A, B))
        B, sweeps = model.components_, sweeps + model.n_iter_
        before, error = error, float(np.linalg.norm(M - A @ B))
        kkt = kkt_residual(M, A, B)
        if kkt <= NMF_KKT_TOL and before - error <= NMF_STALL * before:
            break
    return PlainFit(A, B, kkt <= NMF_KKT_TOL, kkt, int(sweeps))


def nmf_scored(n):
    """Whether the nmf baseline is scored for n units (n <= NMF_MAX_UNITS)."""
    return n <= NMF_MAX_UNITS


def baselines(W, n_i, *, circuit_error=None, circuit_density=None, seed=0,
              plain=None, max_iter=None):
    """Score the four reference constructions on W (nmf only up to
    :data:`NMF_MAX_UNITS` units).

    Returns a tuple of BaselineResult; with ``circuit_error`` and
    ``circuit_density``, two more rows score global and nmf at the
    circuit's error and density. ``plain``: the nmf baseline's factorisation
    when the caller has it (:func:`plain_factorisation` of max(-W, 0) with ``n_i``);
    ``max_iter``: the nmf baseline's sweeps (default NMF_MAX_ITER).
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
    if not nmf_scored(max(W.shape)):
        return tuple(out)
    Jp = np.maximum(W, 0)
    A, B, converged, kkt, _ = (plain_factorisation(np.maximum(-W, 0), n_i,
                                                   seed, max_iter)
                               if plain is None else plain)
    out.append(BaselineResult("nmf", f"nonnegative factorisation "
                              f"(scikit-learn NMF), {n_i} interneurons, no "
                              "split", n_i, _rel(W, Jp - A @ B), _density(Jp),
                              converged, kkt))
    if circuit_density is not None:
        Jd = _prune_to_density(Jp, circuit_density)
        out.append(BaselineResult("nmf@density", "nmf, J_EE pruned to the "
                                  "circuit's density", n_i,
                                  _rel(W, Jd - A @ B), _density(Jd),
                                  converged, kkt))
    return tuple(out)
