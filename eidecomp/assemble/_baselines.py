"""Reference constructions to score a circuit against (docs/assembly.md).

(a) one private interneuron per E unit: exact, at a 1:1 ratio;
(b) one global interneuron with compensating excitation: exact, dense J_EE;
(c) dropping the negative weights: no interneurons;
(d) a plain nonnegative factorisation of the negative side of W with the
    circuit's n_I, without the low-rank/sparse split: scikit-learn's NMF
    (coordinate descent, NNDSVDa start, tolerance NMF_TOL, up to
    NMF_MAX_ITER sweeps), with its convergence and KKT residual reported.
(b) and (d) are also scored at the circuit's operating point: (b) with its
smallest excitatory weights pruned until its error equals the circuit's, and
(d) with J_EE pruned to the circuit's density.
"""

import numpy as np

from ..types import BaselineResult

__all__ = ["baselines", "kkt_residual", "plain_factorisation"]


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


NMF_TOL = 1e-4        # scikit-learn's own default tolerance
NMF_MAX_ITER = 5000   # sweeps; a baseline stopped here says so
NMF_KKT_TOL = 1e-3    # a relative KKT residual above this is not converged


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
    """(A, B, converged, KKT residual) of M >= 0 ~ A B with k components:
    scikit-learn's NMF, solver "cd", init "nndsvda" (a seeded random start
    where NNDSVD is undefined), tol NMF_TOL, at most NMF_MAX_ITER sweeps.
    Converged means its KKT residual is at most NMF_KKT_TOL, the measured
    criterion: on an exactly factorisable M (a connectome's inhibitory
    columns) scikit-learn's own stop, relative to its first sweep's
    progress, is never met though the residual is at rounding level."""
    import warnings

    from sklearn.decomposition import NMF
    from sklearn.exceptions import ConvergenceWarning as SkConvergence

    if k == 0 or not M.any():
        A, B = np.zeros((M.shape[0], k)), np.zeros((k, M.shape[1]))
        return A, B, True, 0.0
    def fit_plain(init):
        model = NMF(n_components=k, solver="cd", init=init, tol=NMF_TOL,
                    max_iter=NMF_MAX_ITER if max_iter is None else max_iter,
                    random_state=seed)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", SkConvergence)
            return model.fit_transform(M), model

    def fit(init):
        with np.errstate(divide="raise", invalid="raise"):
            return fit_plain(init)

    try:
        A, model = fit("nndsvda")
    except FloatingPointError:  # NNDSVD divides by a zero norm when M has
        with np.errstate(divide="ignore", invalid="ignore"):  # fewer nonzero
            A, model = fit_plain("random")            # singular values than k
    B = model.components_
    kkt = kkt_residual(M, A, B)
    return A, B, kkt <= NMF_KKT_TOL, kkt


def nmf_scored(n):
    """Whether baseline (d) is scored for n units (n <= NMF_MAX_UNITS)."""
    return n <= NMF_MAX_UNITS


def baselines(W, n_i, *, circuit_error=None, circuit_density=None, seed=0,
              plain=None, max_iter=None):
    """Score the four reference constructions on W ((d) only up to
    :data:`NMF_MAX_UNITS` units).

    Returns a tuple of BaselineResult; with ``circuit_error`` and
    ``circuit_density``, two more rows score (b) and (d) at the circuit's
    error and density. ``plain``: (d)'s factorisation when the caller has
    it (:func:`plain_factorisation` of max(-W, 0) with ``n_i``);
    ``max_iter``: (d)'s sweeps (default NMF_MAX_ITER).
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
    A, B, converged, kkt = (plain_factorisation(np.maximum(-W, 0), n_i, seed,
                                                max_iter)
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
