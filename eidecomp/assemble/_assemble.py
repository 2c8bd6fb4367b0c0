"""From W = L + S to a Dale's-law circuit (docs/assembly.md).

1. counts: n_I = round(N / ratio); n_u untuned (the rank of L, or a share),
   n_t = n_I - n_u tuned;
2. untuned interneurons: a nonnegative factorisation of the inhibitory side
   of the low-rank part, max(-L, 0) ~ J_EU J_UE;
3. tuned interneurons: a sparse nonnegative factorisation of the inhibitory
   side of the sparse part, max(-S, 0) ~ J_ET J_TE, whose supports become
   each tuned interneuron's pool and targets;
4. joint refinement of all blocks, counts and tuned supports fixed:

       min  0.5 ||W - J_EE + J_EI J_IE||_F^2 + alpha ||J_EE||_1,  all >= 0,

   by block coordinate descent: J_EE = max(W + J_EI J_IE - alpha, 0) exactly,
   then one HALS sweep over (J_EI, J_IE); every step solves its convex
   subproblem (J_EE) or a convex one-dimensional piece of it (HALS), so the
   objective never increases;
5. debiasing: the same descent with alpha = 0 on the support of J_EE found
   in step 4, which removes the shrinkage of the l1 term;
6. the connection floor (params.CONNECTION_RTOL) zeroes every weight whose
   strongest path carries less than 1e-6 max|W|. An interneuron left with
   no input or target (an l1 term in step 3 or a descent can empty it) is
   started again on the largest nonnegative rank-one piece of the
   inhibition still unexplained, and steps 4-6 repeat (at most
   RESTART_ROUNDS times); when nothing worth an interneuron is left, the
   report says how many W supports;
7. the stability guard (_stability.py): when W is stable and the circuit
   is not at the default time constants, all blocks are refitted under a
   penalty on the circuit's rightmost eigenvalues until it is, and the
   report states the error this cost.
"""

import dataclasses

import numpy as np
from scipy import sparse

from ..errors import InputError, warn_stopped
from ..limits import check_fits, dense_input
from ..names import unit_labels
from ..params import (
    ALPHA_DEFAULT,
    ALPHA_QUANTILE,
    CONNECTION_RTOL,
    DEFAULT_EE_SUPPORT,
    DEFAULT_EI_RATIO,
    EE_SUPPORTS,
    SUPPORT_RTOL,
    EIRatio,
)
from ..progress import announcer
from ..types import (
    AssemblyReport,
    BaselineResult,
    Circuit,
    Decomposition,
    adopting_arrays,
)
from . import _stability
from ._baselines import (
    NMF_MAX_UNITS,
    _prune_to_density,
    nmf_scored,
    plain_factorisation,
)
from ._baselines import baselines as score_baselines
from ._counts import inhibitory_count, interneuron_counts
from ._dale import dale_head, own_circuit, own_report, why_not_own
from ._mixed_hals import (
    SPARSE_MIN_UNITS,
    hals_mixed,
    objective_mixed,
    paths,
    sweep_mixed,
    tuned_parts,
)
from ._nmf import EXACT_SVD_MAX, Factored, hals, leading_svd, nndsvd
from ._stability import guarded
from ._support import (
    apply_floor,
    greedy_start,
    inactive,
    restart,
    swap_search,
)

__all__ = ["assemble", "assembly_bytes", "comparison_line", "dale_columns",
           "equal_density_pairs", "excitation_audit"]

TUNED_L1 = 0.005
"""The l1 weight on the tuned factors, times max(-S) / max|W|."""
FACTOR_ZERO_RTOL = 1e-6
"""Factor entries below this times their column's largest are zero."""
START_MARGIN = 1e-9
"""The second start must beat the first by this share, so that rounding
(c W for any c) never flips the choice."""
SWAP_MAX_UNITS = EXACT_SVD_MAX
"""The tuned swap search runs up to this many units (each of its trials
forms M - A B, N x N)."""
SWAP_SWEEPS = 50
"""Sweeps of each trial of the tuned swap search."""
RESTART_ROUNDS = 3
"""Rounds of new starts for emptied interneurons, each followed by a
refinement."""
RESTART_RTOL = 1e-3
"""A new start needs a piece of unexplained inhibition whose largest path
is this times max|W| (less is noise)."""
LOSS_MARGIN = 1e-3
"""The report says the nmf baseline beats the circuit when it does so by
more than this in relative error at equal density."""
STAND_IN_EXTRA = 10
"""The rank of the untuned factorisation's stand-in for max(-L, 0) is
2 n_u plus this."""


def tuned_l1(M_t):
    """The l1 weight on the tuned factors: TUNED_L1 max(-S) (working units)."""
    return TUNED_L1 * float(M_t.max()) if M_t.size and M_t.any() else 0.0


def default_alpha(W):
    """The default l1 weight on J_EE: :data:`~eidecomp.params.ALPHA_RULE`
    (0 when W has no positive entry).

    J_EE reproduces W's positive side, so its weight scales with that side,
    not with max|W| (set by the inhibition on planted circuits, and by a few
    large synapse counts on a connectome, where 0.02 max|W| erased every
    single-synapse connection); the percentile keeps a few large entries
    from setting it. A positive entry below alpha that no interneuron path
    lifts is left out of J_EE (the report counts them: metrics.dropped).

    >>> default_alpha(np.array([[0.0, 1.0], [2.0, -50.0]]))
    0.039
    """
    W = np.asarray(W)
    pos = W[W > 0]
    if not pos.size:
        return 0.0
    return float(ALPHA_DEFAULT * np.quantile(pos, ALPHA_QUANTILE))


def assembly_bytes(n, n_i):
    """Bytes :func:`assemble` allocates beside its input (checked with
    tracemalloc in tests/test_assembly_scale.py): W in working units (L + S
    for a decomposition), then either the tuned side of S and a residual or
    J_EE (which the circuit keeps) and one temporary, two N x N arrays at a
    time; the dense factors J_EI, J_IE and their masks, held up to four
    times while the tuned swap search runs (the circuit's, the better
    start's, a trial's and HALS's working copy; twice above
    SWAP_MAX_UNITS, where it does not run); a tenth of an N x N array of
    scratch (the sparse tuned parts, index arrays). Up to EXACT_SVD_MAX
    units, the tuned start's full SVD (U and Vt) and a dense copy of the
    tuned side add three more N x N arrays (at most 288 MB there)."""
    n, n_i = int(n), int(n_i)
    arrays = 3.1 if n > EXACT_SVD_MAX else 6.1
    copies = 4 if n <= SWAP_MAX_UNITS else 2
    return int(arrays * n * n * 8) + 2 * n * n_i * (copies * 8 + 1)


def _labelled(W_or_dec):
    """(unit ids, the input as an array or Decomposition): a DataFrame's
    index, a decomposition's ids; scipy.sparse densified."""
    if isinstance(W_or_dec, Decomposition):
        return W_or_dec.unit_ids, W_or_dec
    return unit_labels(W_or_dec, square=True), dense_input(W_or_dec)


def _decomposed(W_or_dec, seed, decompose_kwargs):
    """(W, L, S, dec, own): W is the array given (its unobserved entries, if
    the split left some out, completed: Decomposition.completed), or L + S
    of a decomposition (then a new array, ``own``, which the caller may
    change in place)."""
    if isinstance(W_or_dec, Decomposition):
        dec = W_or_dec
        W = None
    else:
        from ..decompose import robust_pca

        W = np.asarray(W_or_dec, dtype=float)
        dec = robust_pca(W, seed=seed, **(decompose_kwargs or {}))
        W = dec.completed(W)
    L = np.asarray(dec.low_rank)       # float32 parts are read as they are:
    S = np.asarray(dec.sparse)         # only W and the sides are float64
    return (np.add(L, S, dtype=float) if W is None else W), L, S, dec, \
        W is None


def _fill_dead(A, B, scale, rng):
    """Give components that a factorisation left empty a small random start
    (none when W is all zeros: there is nothing to start from)."""
    dead = (A.sum(axis=0) == 0) | (B.sum(axis=1) == 0)
    if dead.any() and scale > 0:
        A[:, dead] = scale * rng.random((A.shape[0], int(dead.sum())))
        B[dead] = scale * rng.random((int(dead.sum()), B.shape[1]))
    return A, B


def _support(F, axis):
    peak = F.max(axis=axis, keepdims=True)
    return F > FACTOR_ZERO_RTOL * np.where(peak > 0, peak, np.inf)


def dale_columns(W, zero=0.0):
    """(obeys, inhibitory): whether every column of W is one sign (zero
    entries aside), as in a connectome signed by each neuron's transmitter,
    and the mask of its columns with a negative entry (entries within
    ``zero`` of 0 aside).

    >>> dale_columns(np.array([[0.0, -1.0], [2.0, -3.0]]))
    (True, array([False,  True]))
    """
    W = np.asarray(W)
    neg, pos = (W < -zero).any(axis=0), (W > zero).any(axis=0)
    return bool(not (neg & pos).any()), neg


def _dale_note(W, zero, why):
    """What the report says of a W that already obeys Dale's law and was
    assembled like any W, and ``why`` (the option that asked it, or what
    W's own neurons could not honour)."""
    obeys, inhibitory = dale_columns(W, zero)
    k = int(inhibitory.sum())
    if not obeys or not k:
        return ()
    n = W.shape[0]
    return (f"{dale_head(n, k)} Its own "
            f"inhibitory neurons are not the interneurons here ({why}): this "
            "circuit treats all of W's units as excitatory and adds "
            "interneurons",)


DIAGONAL_SHARE = 0.5   # the diagonal note: this share of the squared error


def _diagonal_note(W, R, observed, zero):
    """A note when W's diagonal is all zero and observed, and at least
    DIAGONAL_SHARE of the squared error sits there: the interneurons'
    self-inhibition (a unit driving an interneuron that inhibits it), which
    a zero-by-convention diagonal does not forbid."""
    if observed is not None or (np.abs(np.diag(W)) > zero).any():
        return ()
    total = float(np.vdot(R, R))
    share = float(np.sum(np.diag(R) ** 2)) / total if total > 0 else 0.0
    if share < DIAGONAL_SHARE:
        return ()
    return (f"{100 * share:.0f} % of the squared error is on the diagonal, "
            "which W leaves at zero: the interneurons' loops give each unit "
            "some self-inhibition. If W's zero diagonal is a convention (no "
            "self-connection modelled), decompose with --ignore-diagonal "
            "(mask the diagonal) and it is not fitted",)


def _notes(W, n_i, ratio, A, B, n_u):
    """What the user should know about W's kind of problem, in words."""
    if not W.any():
        return ("W is all zeros: the circuit has no connection",)
    if W.min() >= 0:
        return (f"W has no negative entry, so no inhibition is needed: J_EE = W, "
                f"and the {n_i} interneuron{'s' * (n_i != 1)} of E:I "
                f"{ratio.text} {'are' if n_i != 1 else 'is'} kept but silent",)
    silent = inactive(A, B)
    if not silent.size:
        return ()
    n_ut, n_tt = int((silent < n_u).sum()), int((silent >= n_u).sum())
    return (f"{n_i - silent.size} of the {n_i} interneurons asked are "
            f"active; {n_ut} untuned and {n_tt} tuned were left silent (no "
            f"input or no target): after {RESTART_ROUNDS} rounds of new "
            "starts, no piece of unexplained inhibition with a path of "
            f"{RESTART_RTOL:g} max|W| or more was left for them, and their "
            f"weights fell below the connection floor ({CONNECTION_RTOL:g} "
            "max|W|). They count in no headline, probability or profile; "
            "W_eff is the same without them, so this does not show that W "
            "needs fewer",)


def _zero_level(from_split):
    """Entries of W (working units, max|W| = 1) at or below this in
    magnitude count as zero for the excitation rule, the audit and the
    Dale's-law check: 0 for a W given as an array; for L + S of a
    decomposition, params.SUPPORT_RTOL (the split's own support rule), since
    L + S equals W only to the solver's tolerance."""
    return SUPPORT_RTOL if from_split else 0.0


def _allowed(W, observed, ee_support, zero=0.0):
    """Where J_EE may carry weight (params.EE_SUPPORTS): W > ``zero`` on the
    observed entries, or None (anywhere)."""
    if ee_support == "any":
        return None
    allowed = W > zero
    if observed is not None:
        allowed &= np.asarray(observed, dtype=bool)
    return allowed


def excitation_audit(W, J_EE, zero=0.0):
    """(autapses, cancelling share) of J_EE against W: self-connections
    where W's diagonal is not positive (zero: none in W), and the share of
    J_EE's total weight on entries where W_ij <= 0, which inhibition must
    cancel to reproduce W (0.0 for an empty J_EE); entries of W at or below
    ``zero`` count as zero.

    >>> W = np.array([[0.0, 1.0], [-1.0, 0.0]])
    >>> excitation_audit(W, np.array([[0.5, 1.0], [0.5, 0.0]]))
    (1, 0.5)
    """
    W, J_EE = np.asarray(W), np.asarray(J_EE)
    autapses = int(np.count_nonzero(np.diag(J_EE)[np.diag(W) <= zero]))
    total = float(J_EE.sum())
    if total <= 0:
        return autapses, 0.0
    return autapses, float(J_EE[W <= zero].sum()) / total


def _dropped(W, J_EE, w_scale=1.0):
    """(left out, all, largest left out, times ``w_scale``) of W's positive
    entries."""
    pos = W > 0
    out = pos & (J_EE <= 0)
    return (int(out.sum()), int(pos.sum()),
            float(W[out].max()) * w_scale if out.any() else 0.0)


def _residual(W, J_EE, A, B, n_u, parts=None):
    """W - J_EE + A B, in one new N x N array."""
    R = paths(A, B, n_u, parts)
    R += W
    R -= J_EE
    return R


def _penalty(alpha, J_EE):
    """The l1 term: a scalar weight, or one weight per entry."""
    if np.ndim(alpha):
        return float(np.vdot(alpha, J_EE))
    return alpha * float(J_EE.sum())


def _objective(W, J_EE, A, B, alpha, n_u, parts=None):
    R = _residual(W, J_EE, A, B, n_u, parts)
    return 0.5 * float(np.vdot(R, R)) + _penalty(alpha, J_EE)


def _excitation(W, A, B, n_u, alpha, ee_support, parts=None, out=None,
                cap=None):
    """J_EE = max(W + A B - alpha, 0) on ``ee_support`` (None: everywhere),
    at most ``cap`` where given, the exact minimiser given the paths (each
    entry a box-constrained 1-D quadratic); written into ``out`` when given
    (at most one N x N array either way)."""
    J = paths(A, B, n_u, parts, out=out)
    J += W
    J -= alpha
    np.maximum(J, 0.0, out=J)
    if cap is not None:
        np.minimum(J, cap, out=J)
    if ee_support is not None:  # a buffered ufunc: no float copy of the mask
        J *= ee_support
    return J


def _descend(W, A, B, n_u, masks, alpha, ee_support, max_iter, tol,
             history, progress=None, stage="", cap=None):
    """Block coordinate descent on J_EE and (A, B), the first ``n_u``
    components dense and the others sparse; returns J_EE, n, ok."""
    converged = False
    scale = max(0.5 * float(np.vdot(W, W)), 1e-300)  # the objective at zero
    start = len(history)
    parts = tuned_parts(A, B, n_u)
    cache = {}                           # colourings and Grams, sweep to sweep
    J_EE = None
    while not converged and len(history) - start < max_iter:
        J_EE = _excitation(W, A, B, n_u, alpha, ee_support, parts, out=J_EE,
                           cap=cap)
        J_EE -= W                        # the sweep fits J_EE - W ~ A B
        parts = sweep_mixed(J_EE, A, B, n_u, by_cost=True,
                            mask_a=masks[0],
                            mask_b=masks[1], A_sp=parts[0], B_sp=parts[1],
                            cache=cache)
        J_EE += W                        # its loss is 0.5 ||W - J_EE + A B||^2
        loss = cache.pop("loss", None)
        history.append(_objective(W, J_EE, A, B, alpha, n_u, parts)
                       if loss is None else loss + _penalty(alpha, J_EE))
        if progress is not None:
            progress(stage, len(history) - start, history[-1])
        converged = (len(history) - start > 1
                     and history[-2] - history[-1] <= tol * scale)
    it = len(history) - start
    return _excitation(W, A, B, n_u, alpha, ee_support, parts, out=J_EE,
                       cap=cap), it, \
        converged


def _missing_inhibition(W, J_EE, A, B, n_u):
    """The inhibition W asks for and the circuit does not give, >= 0 (one
    new N x N array)."""
    R = _residual(W, J_EE, A, B, n_u)
    np.negative(R, out=R)
    np.maximum(R, 0.0, out=R)
    return R


def _fit(W, A, B, n_u, masks, alpha, allowed, max_iter, tol, history,
         progress, cap=None):
    """Steps 4-5 once, then the connection floor: J_EE, sweeps, converged,
    weights floored. ``allowed``: where J_EE may carry weight (None:
    anywhere)."""
    J_EE, it1, ok1 = _descend(W, A, B, n_u, masks, alpha, allowed, max_iter,
                              tol, history, progress, "refinement", cap)
    support = J_EE > 0
    del J_EE
    J_EE, it2, ok2 = _descend(W, A, B, n_u, masks, 0.0, support, max_iter,
                              tol, history, progress, "debiasing", cap)
    return J_EE, it1 + it2, ok1 and ok2, apply_floor(J_EE, A, B)


def _refine(W, A, B, mask_a, mask_b, alpha, allowed, n_u, max_iter, tol,
            history, progress, tell, cap=None):
    """Steps 4-5 with the connection floor; new starts for interneurons that
    end without input or target while inhibition is left unexplained (at
    most RESTART_ROUNDS times). Returns J_EE, sweeps, converged and the
    numbers of new starts and of weights the floor removed."""
    masks = (mask_a, mask_b)

    def fit():
        return _fit(W, A, B, n_u, masks, alpha, allowed, max_iter, tol,
                    history, progress, cap)

    J_EE, n_iter, converged, floored = fit()
    restarted = 0
    for _ in range(RESTART_ROUNDS):
        silent = inactive(A, B)
        if not silent.size:
            break
        tell("new starts for emptied interneurons")
        started = restart(_missing_inhibition(W, J_EE, A, B, n_u), A, B,
                          silent[silent < n_u], floor=RESTART_RTOL, copy=False)
        owed = _missing_inhibition(W, J_EE, A, B, n_u)
        started += restart(owed, A, B, silent[silent >= n_u],
                           l1=TUNED_L1 * float(owed.max()), mask_a=mask_a,
                           mask_b=mask_b, floor=RESTART_RTOL, copy=False)
        del owed
        if not started:
            break
        restarted += len(started)
        J_EE, it, converged, floored = fit()
        n_iter += it
    return J_EE, n_iter, converged, (restarted, floored)


def _unexplained(M, A, B):
    """max(M - A B, 0) for tuned-only factors, in one new array."""
    R = paths(A, B, 0)
    np.subtract(M, R, out=R)
    np.maximum(R, 0.0, out=R)
    return R


def _inhibitory_side(X, w_scale):
    """max(-X, 0) / w_scale, in one new float64 array."""
    M = np.negative(X, dtype=float)
    np.maximum(M, 0.0, out=M)
    M /= w_scale
    return M


def _tuned_fit(M_t, M_sp, A_t, B_t, l1, max_iter, tell):
    """Step 3 from one start: l1 HALS, new starts for emptied pools, then
    the swap search (up to SWAP_MAX_UNITS). Returns A_t, B_t and the number
    of pools started again."""
    A_t, B_t, _ = hals_mixed(M_sp, A_t, B_t, 0, l1=l1, max_iter=max_iter,
                             tol=1e-6, by_cost=True)
    restarted = 0
    # the l1 term can empty a pool: start it again on the largest piece left
    for _ in range(RESTART_ROUNDS):
        dead = inactive(A_t, B_t)
        started = restart(_unexplained(M_t, A_t, B_t), A_t, B_t, dead, l1=l1,
                          floor=RESTART_RTOL, copy=False) if dead.size else []
        if not started:
            break
        restarted += len(started)
        A_t, B_t, _ = hals_mixed(M_sp, A_t, B_t, 0, l1=l1, max_iter=max_iter,
                                 tol=1e-6, by_cost=True)
    if max(M_t.shape) <= SWAP_MAX_UNITS and A_t.shape[1] > 1:
        tell("tuned factorisation: swaps")
        A_t, B_t, _ = swap_search(
            M_t, A_t, B_t,
            lambda a, b: hals_mixed(M_sp, a, b, 0, l1=l1,
                                    max_iter=SWAP_SWEEPS, tol=1e-6,
                                    by_cost=True)[:2],
            lambda a, b: objective_mixed(M_sp, a, b, 0, l1), l1=l1)
    return A_t, B_t, restarted


def _first_factorisations(L, S, w_scale, n_u, n_t, start, seed, max_iter, tell):
    """Steps 2-3: NNDSVD + HALS of the inhibitory sides of L (dense, untuned
    pools) and of S (l1, tuned pools, their supports then fixed), in units
    of ``w_scale``. Returns the stacked factors A (E x I), B (I x E), the masks
    of their supports and the number of tuned pools that emptied and were
    started again. One N x N side is held at a time."""
    tell("untuned factorisation")
    rng = np.random.default_rng(seed)
    M_u = _inhibitory_side(L, w_scale)
    # the untuned side comes from a low-rank L: its HALS runs on the leading
    # 2 n_u + STAND_IN_EXTRA triplets of max(-L, 0), a stand-in whose
    # products cost O(N q) per component (the refinement then fits W itself)
    q = min(2 * n_u + STAND_IN_EXTRA, min(M_u.shape))
    U, s, Vt = leading_svd(M_u, q, seed) if n_u and M_u.any() else (None,) * 3
    A_u, B_u = nndsvd(M_u, n_u, seed=seed,
                      svd=None if U is None else (U, s, Vt))
    A_u, B_u = _fill_dead(A_u, B_u, start, rng)
    if U is not None:
        A_u, B_u, _ = hals(Factored(U * s, Vt), A_u, B_u, max_iter=max_iter,
                           tol=1e-6)
    del M_u
    tell("tuned factorisation")
    M_t = _inhibitory_side(S, w_scale)
    l1 = tuned_l1(M_t)
    # two starts, the better kept: each leaves merged pools that the other
    # avoids on some planted sheets (docs/assembly.md, "Tuned pools"); both
    # are made first, while no sparse copy of M_t is held (the greedy start
    # works on a dense copy)
    starts = [("a greedy start", greedy_start(M_t, n_t, l1, RESTART_RTOL))]
    if max(M_t.shape) <= EXACT_SVD_MAX:  # above, its SVD of N / 4 components
        starts.insert(0, ("NNDSVD", nndsvd(M_t, n_t)))  # costs too much
    # the sweeps are dense below SPARSE_MIN_UNITS: M_t itself, not a copy
    M_sp = M_t if max(M_t.shape) < SPARSE_MIN_UNITS else sparse.csr_matrix(M_t)
    best = None                          # more than all the rest
    while starts:
        name, (A_t, B_t) = starts.pop(0)
        tell(f"tuned factorisation from {name}")
        A_t, B_t = _fill_dead(A_t, B_t, start, rng)
        A_t, B_t, restarted = _tuned_fit(M_t, M_sp, A_t, B_t, l1, max_iter,
                                         tell)
        value = objective_mixed(M_sp, A_t, B_t, 0, l1)
        if best is None or value < best[0] * (1 - START_MARGIN):
            best = value, A_t, B_t, restarted
        del A_t, B_t
    _, A_t, B_t, restarted = best
    del best
    mask_t_a, mask_t_b = _support(A_t, 0), _support(B_t, 1)
    A_t *= mask_t_a
    B_t *= mask_t_b
    return (np.hstack([A_u, A_t]), np.vstack([B_u, B_t]),
            np.hstack([np.ones_like(A_u, bool), mask_t_a]),
            np.vstack([np.ones_like(B_u, bool), mask_t_b]), restarted)


NO_SPLIT_MAX_UNITS = 1000  # above, the no-split baseline (dense, N / 4
                           # components, O(N^2 n_I) a sweep) is not scored
NO_SPLIT_SWEEPS = 5000  # the no-split baseline's budget: all dense, it needs
                        # more sweeps than the circuit (3,000 on a 256-unit
                        # sparse-coding matrix) and must converge to be fair


def _no_split(W, plain, alpha, allowed, max_iter, tol, density=None):
    """The baseline with no robust PCA: this assembler's refinement, support
    rule and connection floor, started from the plain factorisation of
    max(-W, 0) (all interneurons dense: without the split none is tuned),
    with at least NO_SPLIT_SWEEPS sweeps; and, when its J_EE is denser than
    ``density`` (the circuit's), the same pruned to it."""
    max_iter = max(max_iter, NO_SPLIT_SWEEPS)
    A, B = np.asfortranarray(plain[0]), np.array(plain[1])
    n_i = A.shape[1]
    ones_a, ones_b = np.ones_like(A, bool), np.ones_like(B, bool)
    J_EE, _, converged, _ = _refine(W, A, B, ones_a, ones_b, alpha, allowed,
                                    n_i, max_iter, tol, [], None,
                                    lambda _: None)
    norm = max(np.linalg.norm(W), 1e-300)
    dens = float(np.count_nonzero(J_EE) / J_EE.size)
    rows = (BaselineResult(
        "no-split", "this assembler's refinement and excitation rule from a "
        "plain NMF start, no robust PCA", n_i,
        float(np.linalg.norm(_residual(W, J_EE, A, B, n_i)) / norm), dens,
        converged, None),)
    if density is not None and dens > density:  # at the circuit's density
        J = _prune_to_density(J_EE, density)
        rows += (BaselineResult(
            "no-split@density", "no-split, J_EE pruned to the circuit's "
            "density", n_i,
            float(np.linalg.norm(_residual(W, J, A, B, n_i)) / norm),
            float(np.count_nonzero(J) / J.size), converged, None),)
    return rows


def _guard_limit(guard_on, n_total):
    """The stability guard's size limit when it was on and the circuit is
    larger (so it did not run), else None (AssemblyReport.guard_limit)."""
    limit = _stability.GUARD_MAX_UNITS
    return limit if guard_on and n_total > limit else None


def _scored_baselines(W, n_i, J_EE, A, B, n_u, err, dens, seed, refit):
    """The baselines, this circuit pruned to nmf's density when it is
    denser (a comparison at equal density), and the no-split baseline
    (``refit``: (alpha, allowed, max_iter, tol) of this assembly)."""
    if not nmf_scored(max(W.shape)):
        base = score_baselines(W, n_i, circuit_error=err,
                               circuit_density=dens, seed=seed)
        return base, (f"the nmf baseline, a plain nonnegative factorisation, was "
                      f"not scored above {NMF_MAX_UNITS} units (its dense "
                      "factorisation costs about N^3 / 2 per sweep)",)
    plain = plain_factorisation(np.maximum(-W, 0.0), n_i, seed)
    base = score_baselines(W, n_i, circuit_error=err, circuit_density=dens,
                           seed=seed, plain=plain)
    nmf = next(b for b in base if b.name == "nmf")
    if dens > nmf.ee_density:
        J = _prune_to_density(J_EE, nmf.ee_density)
        pruned = J - paths(A, B, n_u)
        base += (BaselineResult(
            "circuit@density", "this circuit, J_EE pruned to nmf's density",
            n_i, float(np.linalg.norm(W - pruned)
                       / max(np.linalg.norm(W), 1e-300)),
            float(np.count_nonzero(J) / J.size)),)
    notes = ()
    if W.min() < 0 and max(W.shape) <= NO_SPLIT_MAX_UNITS:
        rows = _no_split(W, plain, *refit, density=dens)
        base += rows
        if dens > rows[0].ee_density:   # the circuit pruned to no-split's
            J = _prune_to_density(J_EE, rows[0].ee_density)
            base += (BaselineResult(
                "circuit@no-split", "this circuit, J_EE pruned to "
                "no-split's density", n_i,
                float(np.linalg.norm(W - (J - paths(A, B, n_u)))
                      / max(np.linalg.norm(W), 1e-300)),
                float(np.count_nonzero(J) / J.size)),)
    elif W.min() < 0:
        notes = (f"baseline no-split (this refinement without robust PCA) "
                 f"was not scored above {NO_SPLIT_MAX_UNITS} units (dense "
                 "sweeps over N / 4 components)",)
    return base, _against_nmf(base, err, dens) + notes


def equal_density_pairs(err, dens, baselines):
    """(this circuit, baseline) pairs at equal J_EE density, one per scored
    baseline family: the sparser side as it is, the denser pruned to it
    ("circuit@density" against nmf, "nmf@density" against the circuit; the
    same with "circuit@no-split" and "no-split@density"). One rule for the
    first line and the notes."""
    rows = {b.name: b for b in baselines}
    circuit = BaselineResult("circuit", "this circuit", 0, err, dens)
    pairs = []
    for family, ours_pruned in (("nmf", "circuit@density"),
                                ("no-split", "circuit@no-split")):
        if ours_pruned in rows and family in rows:
            pairs.append((rows[ours_pruned], rows[family]))
        elif f"{family}@density" in rows:
            pairs.append((circuit, rows[f"{family}@density"]))
        elif family in rows:
            pairs.append((circuit, rows[family]))
    return pairs


def comparison_line(err, dens, baselines):
    """The first line of the summary and of the report: whether a baseline
    reproduces W better than this circuit at equal J_EE density (the pairs
    of :func:`equal_density_pairs`), by more than LOSS_MARGIN in relative
    error, and so whether the split pays."""
    pairs = equal_density_pairs(err, dens, baselines)
    if not pairs:
        return (f"this circuit: relative error {err:.3g} at J_EE density "
                f"{dens:.3g} (no baseline scored at equal density)")
    ours, theirs = max(pairs, key=lambda p: p[0].relative_error
                       - p[1].relative_error)
    caveat = ("" if theirs.converged is not False
              else f" ({theirs.name} did not converge)")
    at = f"at equal J_EE density {min(ours.ee_density, theirs.ee_density):.3g}"
    if theirs.relative_error < ours.relative_error - LOSS_MARGIN:
        return (f"baseline {theirs.name} reproduces W better than this "
                f"circuit {at}: relative error {theirs.relative_error:.3g} "
                f"against {ours.relative_error:.3g}{caveat}; the "
                "low-rank/sparse split does not pay here")
    if ours.relative_error <= theirs.relative_error:
        return (f"this circuit reproduces W best {at}: relative error "
                f"{ours.relative_error:.3g} against {theirs.relative_error:.3g}"
                f" for the closest baseline, {theirs.name}{caveat}")
    return (f"no scored baseline reproduces W better than this circuit by "
            f"more than {LOSS_MARGIN:g} {at} (closest: {theirs.name}, "
            f"relative error {theirs.relative_error:.3g} against "
            f"{ours.relative_error:.3g}{caveat})")


def _against_nmf(base, err, dens):
    """A note when the plain factorisation, the nmf baseline, reproduces W better
    than this circuit at equal J_EE density (the sparser of the two, the
    other pruned to it), with what to try."""
    nmf = [p for p in equal_density_pairs(err, dens, base)
           if p[1].name.startswith("nmf")]
    if not nmf:
        return ()
    ours, theirs = nmf[0]
    if not theirs.relative_error < ours.relative_error - LOSS_MARGIN:
        return ()
    return (f"the plain nonnegative factorisation (the nmf baseline, "
            f"{theirs.n_inhibitory} interneurons, no low-rank/sparse split) "
            f"reproduces W better at equal J_EE density "
            f"{theirs.ee_density:.3g}: relative error "
            f"{theirs.relative_error:.3g} against this circuit's "
            f"{ours.relative_error:.3g}. W's inhibition is not well described "
            "as low-rank plus sparse at these settings: try a smaller alpha "
            "(--alpha) or another lam, or read the nmf baseline as the better "
            "hypothesis (its interneurons are neither untuned nor tuned)",)


def _own_neurons(W, L, S, dec, inhibitory, ratio, zero, ids, ee_support,
                 stability_guard):
    """The circuit of W's own neurons (_dale.py), for a W whose every column
    is one sign."""
    blocks, index, n_u, text, notes = own_circuit(W, L, S, inhibitory, ratio,
                                                  zero)
    e = np.flatnonzero(~inhibitory)
    with adopting_arrays():                # every block is a new array of ours
        circuit = Circuit(**blocks, w_index=index,
                          unit_ids=None if ids is None
                          else tuple(ids[i] for i in e))
    report = own_report(W, circuit.reconstruction(), circuit.J_EE,
                        W[np.ix_(e, e)], notes, zero)
    params = {"ei_ratio": text, "untuned_share": "auto", "alpha": None,
              "ee_support": ee_support,
              "stability_guard": bool(stability_guard), "own_neurons": True,
              "n_inhibitory": circuit.n_inhibitory, "lam": dec.lam,
              "rank": dec.rank, "decomposition_converged": dec.converged}
    return dataclasses.replace(circuit, report=report, params=params)


def assemble(W_or_dec, *, ei_ratio=None, untuned_share="auto",
             alpha=None, ee_support=DEFAULT_EE_SUPPORT, stability_guard=True,
             own_neurons=True, max_iter=500, tol=1e-6, seed=0, baselines=True,
             decompose_kwargs=None, progress=None, max_bytes=None):
    """Assemble a Dale's-law circuit that reproduces W as closely as it can.

    Parameters
    ----------
    W_or_dec : ndarray (N, N) or Decomposition
        The signed matrix W[post, pre], or its robust PCA (then W = L + S).
        An array is decomposed with ``robust_pca`` at its defaults; a
        scipy.sparse matrix is densified; a pandas DataFrame's index (the
        same labels as its columns) becomes the circuit's ``unit_ids``.
    ei_ratio : EIRatio, str, float or None
        Excitatory units per interneuron: 4, "4:1", "9:2"
        (:class:`eidecomp.params.EIRatio`); stored as its text. None: 4:1
        (params.DEFAULT_EI_RATIO), or W's own for a W that already obeys
        Dale's law.
    untuned_share : "auto" or float in [0, 1]
        Fraction of the interneurons that are untuned; "auto" takes the rank
        of the low-rank part.
    alpha : float or None
        Weight of ||J_EE||_1; None means :func:`default_alpha`
        (:data:`~eidecomp.params.ALPHA_RULE`).
    ee_support : {"positive", "any"}
        Where J_EE may carry weight (``params.EE_SUPPORTS``): "positive"
        (default), only where W_ij > 0, so no excitation is made that
        inhibition must cancel and no autapse where W has none; "any", the
        unconstrained construction. The report states the autapses and the
        share of J_EE's weight where W <= 0 either way.
    stability_guard : bool
        When W's linear rate dynamics are stable and the refined circuit's
        are not at the default time constants (params.TAU_E_MS,
        TAU_I_MS), refit under a stability penalty until they are, and
        report the error this cost (docs/assembly.md, "Stability guard";
        up to GUARD_MAX_UNITS units in all). False keeps the closest fit
        whatever its stability.
    own_neurons : bool
        When every column of W is one sign (a signed connectome), some
        negative and some not (an E unit is needed), build the
        circuit from W's own neurons: its inhibitory neurons are the
        interneurons (untuned or tuned by the split), its full matrix is W,
        with the inhibitory-to-inhibitory synapses W has; a ratio asking
        more interneurons divides the neurons with the most targets, one
        asking fewer is refused (docs/assembly.md, "A W that already obeys
        Dale's law"). False assembles it like any W.
    max_iter : int
        Sweeps of the joint refinement (and of each debiasing pass).
    tol : float
        The refinement stops when a sweep lowers the objective by less than
        ``tol`` times its value at zero blocks, 0.5 ||W||_F^2.
    seed : int
        Seeds the decomposition and the start of empty factor columns.
    baselines : bool
        Score the reference constructions as well.
    decompose_kwargs : dict or None
        Passed to ``robust_pca`` when an array is given.
    progress : callable or None
        Called as ``progress(stage, step, objective)``: once at the start of
        each stage, and after every sweep of the refinement and debiasing.
    max_bytes : int or None
        Refuse (InputError, before anything is allocated) when
        :func:`assembly_bytes` exceeds it; None: the memory this process
        may use (:func:`eidecomp.limits.available_memory`).

    Returns
    -------
    Circuit
        With ``report`` (an AssemblyReport) and ``params``.

    Examples
    --------
    >>> from eidecomp.datasets import make_planted_circuit
    >>> W, truth, _ = make_planted_circuit(60, n_untuned=2, n_tuned=13,
    ...                                    pool=4, seed=3)
    >>> c = assemble(W, ei_ratio="4:1", baselines=False)
    >>> (c.n_excitatory, c.n_untuned, c.n_tuned)
    (60, 2, 13)
    >>> bool((c.signed_weights()[:, 60:] <= 0).all())
    True
    """
    ratio = None if ei_ratio is None else EIRatio.parse(ei_ratio)
    if ee_support not in EE_SUPPORTS:
        raise InputError(f"ee_support must be one of {', '.join(EE_SUPPORTS)},"
                         f" got {ee_support!r}")
    ids, W_or_dec = _labelled(W_or_dec)
    W, L, S, dec, own = _decomposed(W_or_dec, seed, decompose_kwargs)
    if W.ndim != 2 or W.shape[0] != W.shape[1]:
        raise InputError(f"W must be square to build a circuit, got {W.shape}")
    n = W.shape[0]
    zero = _zero_level(own)
    scale = float(np.abs(W).max()) if W.size else 0.0
    why = "own_neurons=False, --no-own-neurons"
    if own_neurons:
        obeys, inhibitory = dale_columns(W, zero * scale)
        if obeys and inhibitory.any():
            why = ("every column is inhibitory, so W has no excitatory unit"
                   if inhibitory.all() else
                   "W was split with entries left out (a mask or "
                   "--ignore-diagonal), so it is not known everywhere"
                   if dec.observed is not None else
                   "alpha or ee_support 'any' was given, options of the "
                   "construction that adds interneurons"
                   if alpha is not None or ee_support != DEFAULT_EE_SUPPORT
                   else why_not_own(np.where(np.abs(W) > zero * scale, W, 0.0),
                                    inhibitory, ratio, untuned_share))
            if why is None:
                return _own_neurons(W, L, S, dec, inhibitory, ratio,
                                    zero * scale, ids, ee_support,
                                    stability_guard)
    ratio = EIRatio.parse(DEFAULT_EI_RATIO) if ratio is None else ratio
    n_i = inhibitory_count(n, ratio)
    check_fits(assembly_bytes(n, n_i),
               f"assembling {n} excitatory units and {n_i} interneurons",
               max_bytes=max_bytes,
               advice="; free other N x N arrays first, or assemble a "
                      "translation-invariant W from its kernel "
                      "(assemble_tiled)")
    # Work in units of max|W| and scale back at the end: every step is then
    # homogeneous, so c W gives c J_EE and sqrt(c) J_EI, sqrt(c) J_IE (the
    # inhibitory paths J_EI J_IE scale by c), whatever c.
    w_scale = scale if scale > 0 else 1.0
    no_inhibition = bool(W.min() >= 0)
    alpha = default_alpha(W) if alpha is None else float(alpha)
    if not np.isfinite(alpha) or alpha < 0:
        raise InputError(f"alpha must be a nonnegative number, got {alpha!r}")
    if own:                             # L + S: ours to scale in place
        W /= w_scale
    else:
        W = W / w_scale
    n_u, n_t, rule = interneuron_counts(n_i, untuned_share, dec.rank,
                                  bool((S < 0).any()))
    start = 1e-3 if scale > 0 else 0.0  # of empty factor columns

    tell = announcer(progress)
    A, B, mask_a, mask_b, first_starts = _first_factorisations(
        L, S, w_scale, n_u, n_t, start, seed, max_iter, tell)
    A = np.asfortranarray(A)   # the sweeps update A by columns

    # 4-5. joint refinement, then debiasing on the support of J_EE
    history = []
    if no_inhibition:  # J_EE = W (exactly, below), the pools silent
        A[:], B[:] = 0.0, 0.0
        J_EE, n_iter, converged, counts = W.copy(), 0, True, (0, 0)
    else:
        J_EE, n_iter, converged, counts = _refine(
            W, A, B, mask_a, mask_b, alpha / w_scale,
            _allowed(W, dec.observed, ee_support, zero), n_u, max_iter, tol,
            history, progress, tell)
    if not converged:
        warn_stopped("circuit refinement", max_iter, unit="sweeps",
                     advice="raise max_iter")
    R = _residual(W, J_EE, A, B, n_u)
    err = float(np.linalg.norm(R) / max(np.linalg.norm(W), 1e-300))
    del R
    dens = float(np.count_nonzero(J_EE) / J_EE.size)
    base, base_notes = (), ()
    if baselines:
        tell("baselines")
        base, base_notes = _scored_baselines(
            W, n_i, J_EE, A, B, n_u, err, dens, seed,
            (alpha / w_scale, _allowed(W, dec.observed, ee_support, zero), max_iter,
             tol))
    comparison = comparison_line(err, dens, base) if baselines else ""
    guard = None
    if stability_guard and not no_inhibition:
        def capped_start():
            """The refinement again from the fitted factors (copies), J_EE
            at most W's positive side: the guard's start."""
            A0, B0 = np.array(A, order="F"), B.copy()
            J0, _, _, _ = _refine(
                W, A0, B0, mask_a, mask_b, alpha / w_scale,
                _allowed(W, dec.observed, ee_support, zero), n_u, max_iter,
                tol, [], None, tell, cap=np.maximum(W, 0.0))
            return J0, A0, B0

        J_EE, A, B, guard = guarded(W, J_EE, A, B, mask_a, mask_b, w_scale=w_scale,
                                    start=capped_start, tell=tell)
    if guard is not None:
        err = guard.error_after
        dens = float(np.count_nonzero(J_EE) / J_EE.size)
        if comparison:
            comparison += (f"; compared before the stability guard, after "
                           f"which this circuit's error is {err:.3g} (the "
                           "baselines are not held to stability)")
    R = _residual(W, J_EE, A, B, n_u)
    diagonal = _diagonal_note(W, R, dec.observed, zero)
    del R
    audit = excitation_audit(W, J_EE, zero)
    report = AssemblyReport(relative_error=err, ee_density=dens,
                            share_rule=rule, baselines=base, n_iter=n_iter,
                            converged=converged, history=tuple(history),
                            notes=(_dale_note(W, zero, why)
                                   + _notes(W, n_i, ratio, A, B, n_u)
                                   + diagonal + base_notes),
                            restarted=int(first_starts + counts[0]),
                            floored=int(counts[1]),
                            dropped=_dropped(W, J_EE, w_scale),
                            ee_support=ee_support,
                            autapses=audit[0], cancelling_share=audit[1],
                            comparison=comparison, guard=guard,
                            guard_limit=_guard_limit(stability_guard
                                                     and not no_inhibition,
                                                     n + n_i))
    params = {"ei_ratio": ratio.text, "untuned_share": untuned_share,
              "alpha": alpha, "ee_support": ee_support,
              "stability_guard": bool(stability_guard), "own_neurons": False,
              "max_iter": max_iter,
              "tol": tol, "seed": seed,
              "n_inhibitory": n_i, "lam": dec.lam, "rank": dec.rank,
              "decomposition_converged": dec.converged}
    root = np.sqrt(w_scale)
    if no_inhibition:                   # J_EE = W exactly
        J_EE = (np.add(L, S, dtype=float) if own
                else np.array(W_or_dec, dtype=float))
    else:
        J_EE *= w_scale                 # back to W's units, in place
    with adopting_arrays():                # every block is a new array of ours
        return Circuit(J_EE=J_EE,
                       J_EU=A[:, :n_u] * root, J_UE=B[:n_u] * root,
                       J_ET=A[:, n_u:] * root, J_TE=B[n_u:] * root,
                       params=params, report=report, unit_ids=ids)
