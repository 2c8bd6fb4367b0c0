"""Which weights are connections, and new starts for interneurons that lost
theirs (docs/assembly.md, "No interneuron wasted").

Every function works on the factors of the inhibitory paths, A = J_EI
(E x I) and B = J_IE (I x E), in units of max|W| (the assembler's working
scale), and changes them in place.
"""

import numpy as np

from ..params import CONNECTION_RTOL
from ..types import active_interneurons
from ._nmf import nndsvd

__all__ = ["apply_floor", "greedy_start", "inactive", "restart", "swap_search"]

_POWER_STEPS = 10  # alternating steps of a new start's rank-one fit


def apply_floor(J_EE, A, B, floor=CONNECTION_RTOL):
    """Zero every weight whose strongest path carries less than ``floor``
    (params.CONNECTION_RTOL, in units of max|W|), in place.

    Returns the number of nonzero weights removed.

    >>> J = np.array([[1.0, 1e-9]]); A = np.array([[1.0, 1e-4]])
    >>> B = np.array([[1.0], [1e-4]])
    >>> apply_floor(J, A, B), J.tolist(), A.tolist(), B.ravel().tolist()
    (3, [[1.0, 0.0]], [[1.0, 0.0]], [1.0, 0.0])
    """
    before = np.count_nonzero(J_EE) + np.count_nonzero(A) + np.count_nonzero(B)
    J_EE[J_EE < floor] = 0.0
    peak_a = A.max(axis=0, initial=0.0)   # per interneuron, largest output
    peak_b = B.max(axis=1, initial=0.0)   # and largest input
    A[A * peak_b[None, :] < floor] = 0.0
    B[B * peak_a[:, None] < floor] = 0.0
    return int(before - (np.count_nonzero(J_EE) + np.count_nonzero(A)
                         + np.count_nonzero(B)))


def inactive(A, B):
    """Indices of the interneurons with no input or no target
    (types.active_interneurons)."""
    return np.flatnonzero(~active_interneurons(A, B))


def _rank_one(R, l1, col):
    """The largest nonnegative rank-one piece a b^T of R >= 0 around its
    column ``col``, by alternating nonnegative least squares with an l1
    weight (a few steps; each touches only the rows and columns in play)."""
    a = R[:, col].copy()
    b = np.zeros(R.shape[1])
    for _ in range(_POWER_STEPS):
        rows = np.flatnonzero(a)
        if rows.size == 0:
            break
        b = np.maximum(a[rows] @ R[rows] - l1, 0.0) / float(a[rows] @ a[rows])
        cols = np.flatnonzero(b)
        if cols.size == 0:
            break
        a = np.maximum(R[:, cols] @ b[cols] - l1, 0.0) / float(b[cols] @ b[cols])
    if not (a.any() and b.any()):
        return np.zeros_like(a), np.zeros_like(b)
    f = np.sqrt(np.linalg.norm(b) / np.linalg.norm(a))  # balanced norms
    return a * f, b / f


def restart(R, A, B, which, *, l1=0.0, mask_a=None, mask_b=None,
            floor=CONNECTION_RTOL, copy=True):
    """Give the interneurons ``which`` new factors in place, one after the
    other, each the largest nonnegative rank-one piece of what R >= 0 (the
    inhibition still unexplained) has left after the previous ones.

    With masks, a restarted interneuron's support becomes that of its new
    factors (a tuned pool and targets found again). Returns the indices
    that got a start; the others found nothing above ``floor`` left in R
    (which is changed in place with ``copy=False``).
    """
    R = np.array(R, dtype=float) if copy else np.asarray(R, dtype=float)
    norms = np.einsum("ij,ij->j", R, R)   # kept up to date below
    started = []
    for t in which:
        a, b = _rank_one(R, l1, int(np.argmax(norms)))
        if a.max(initial=0.0) * b.max(initial=0.0) < floor:
            break
        A[:, t], B[t] = a, b
        if mask_a is not None:
            mask_a[:, t] = a > 0
        if mask_b is not None:
            mask_b[t] = b > 0
        rows, cols = np.flatnonzero(a), np.flatnonzero(b)
        block = R[np.ix_(rows, cols)] - np.outer(a[rows], b[cols])
        R[np.ix_(rows, cols)] = np.maximum(block, 0.0)
        norms[cols] = np.einsum("ij,ij->j", R[:, cols], R[:, cols])
        started.append(int(t))
    return started


def greedy_start(M, k, l1, floor):
    """k nonnegative components of M >= 0 taken one after the other, each the
    largest rank-one piece of what the previous ones left (:func:`restart`
    from empty factors): a start for a sparse factorisation that needs no
    SVD and whose components are as sparse as M's pieces. Returns A, B."""
    A, B = np.zeros((M.shape[0], k)), np.zeros((k, M.shape[1]))
    restart(M, A, B, range(k), l1=l1, floor=floor)
    return A, B


SWAP_PIECES = 3      # rank-one pieces of the unexplained part tried per round
SWAP_CANDIDATES = 4  # interneurons tried per piece: this many cheapest to
                     # lose, and this many sharing most of their pool
SWAP_SHARED = 0.7   # a component shares most of its pool with another when
                    # their inputs' or targets' cosine is at least this
                    # (two pools of 8 overlapping in 4, as planted
                    # neighbours do: 0.5); only such a component's place is
                    # offered to a divided one
SWAP_GAIN = 1e-6     # a trial is kept when it lowers the objective by this
                     # share of it


def _twins(A, B):
    """For each component, how much of its inputs or of its targets another
    one shares: the largest max(cos(a_k, a_l), cos(b_k, b_l)) over l != k
    (1 for two components with the same targets, 0 for disjoint pools). A
    planted pool fitted by two components (its inputs divided between them,
    its targets shared) is the other half of two pools merged into one, and
    one of the two is what a swap should replace; removing it alone costs
    more than removing a weak component, so the loss ranks it late."""
    def cosines(X):
        norms = np.linalg.norm(X, axis=0)
        X = X / np.where(norms > 0, norms, 1.0)
        return X.T @ X
    both = np.maximum(cosines(A), cosines(B.T))
    np.fill_diagonal(both, 0.0)
    return both.max(axis=1, initial=0.0)


def _halves(M, A, B, w):
    """Component ``w`` as two: the NNDSVD (Boutsidis & Gallopoulos 2008) of
    what it fits, max(M - A B + a_w b_w^T, 0) on its own rows and columns,
    with two components. Returns (a1, b1), (a2, b2), or None when the
    second is empty."""
    rows, cols = np.flatnonzero(A[:, w]), np.flatnonzero(B[w])
    if rows.size < 2 or cols.size < 2:
        return None
    X = M[np.ix_(rows, cols)] - A[rows] @ B[:, cols] \
        + np.outer(A[rows, w], B[w, cols])
    np.maximum(X, 0.0, out=X)
    P, Q = nndsvd(X, 2)
    if not (P[:, 1].any() and Q[1].any()):
        return None
    halves = []
    for j in range(2):
        a, b = np.zeros(A.shape[0]), np.zeros(B.shape[1])
        a[rows], b[cols] = P[:, j], Q[j]
        halves.append((a, b))
    return halves


def _division_trials(M, A, B, candidates, fit, objective, best):
    """The other half of a swap: a wide component (SWAP_PIECES of them, the
    most inputs times targets first) divided in two (:func:`_halves`), the
    second half in the place of a candidate (the swap search passes the
    components that share most of a pool with another: the pool fitted
    twice is where one comes free). Where a pool was left
    uncovered and its neighbours widened to cover it, its residual is too
    small to seed a piece; dividing a widened neighbour starts it again.
    Returns the first trial (A, B, objective) that lowers the objective by
    SWAP_GAIN of it, or None."""
    width = np.count_nonzero(A, axis=0) * np.count_nonzero(B, axis=1)
    for w in np.argsort(-width, kind="stable")[:SWAP_PIECES]:
        halves = _halves(M, A, B, int(w))
        if halves is None:
            continue
        for t in candidates:
            if t == w:
                continue
            A2, B2 = A.copy(), B.copy()
            (A2[:, w], B2[w]), (A2[:, t], B2[t]) = halves
            A2, B2 = fit(A2, B2)
            value = objective(A2, B2)
            if value < best - SWAP_GAIN * abs(best):
                return A2, B2, value
    return None


def _loss_of_each(R, A, B):
    """What removing each component alone would add to 0.5 ||R||^2, with R
    = M - A B: <R, a_k b_k^T> + 0.5 ||a_k||^2 ||b_k||^2."""
    cross = np.einsum("ik,ik->k", A, R @ B.T)
    return cross + 0.5 * (A * A).sum(axis=0) * (B * B).sum(axis=1)


def swap_search(M, A, B, fit, objective, *, l1=0.0, max_rounds=None):
    """Escape a local optimum of a nonnegative factorisation M ~ A B (our
    rule, docs/assembly.md "Tuned pools"): each round takes the largest
    rank-one piece of the unexplained part max(M - A B, 0), puts it in the
    place of a component that is cheap to lose or that shares most of its
    pool with another (:func:`_twins`: one pool fitted twice), lets
    ``fit(A, B)`` (a few HALS sweeps, returning new A, B) settle, and keeps
    the trial when ``objective(A, B)`` fell; when no piece helps, it tries
    dividing a wide component in two instead (:func:`_division_trials`). A
    merged pair of pools, which HALS alone keeps for ever, is divided this
    way. Rounds end when no trial helps (SWAP_PIECES pieces x 2
    SWAP_CANDIDATES components, then SWAP_PIECES divided components x
    SWAP_CANDIDATES sharing a pool), or after
    ``max_rounds``
    (default: the number of components). M is dense; A, B are not changed.

    Returns A, B and the number of swaps kept.
    """
    k = A.shape[1]
    best = objective(A, B)
    kept = 0
    for _ in range(k if max_rounds is None else max_rounds):
        R = A @ B                    # one N x N array: R = M - A B
        np.subtract(M, R, out=R)
        loss = _loss_of_each(R, A, B)
        np.maximum(R, 0.0, out=R)
        norms = np.einsum("ij,ij->j", R, R)
        shares = _twins(A, B)
        twins = np.argsort(-shares, kind="stable")[:SWAP_CANDIDATES]
        cheap = np.argsort(loss, kind="stable")[:SWAP_CANDIDATES]
        candidates = list(dict.fromkeys([*cheap.tolist(), *twins.tolist()]))
        trial = None
        for col in np.argsort(norms)[::-1][:SWAP_PIECES]:
            a, b = _rank_one(R, l1, int(col))
            if not (a.any() and b.any()):
                continue
            for t in candidates:
                A2, B2 = A.copy(), B.copy()
                A2[:, t], B2[t] = a, b
                A2, B2 = fit(A2, B2)
                value = objective(A2, B2)
                if value < best - SWAP_GAIN * abs(best):
                    trial = A2, B2, value
                    break
            if trial is not None:
                break
        shared = twins[shares[twins] >= SWAP_SHARED]
        if trial is None and shared.size:   # the other half of a merged pair
            trial = _division_trials(M, A, B, shared.tolist(), fit, objective,
                                  best)
        if trial is None:
            break
        A, B, best = trial
        kept += 1
    return A, B, kept
