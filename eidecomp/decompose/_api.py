"""Public entry points of robust PCA: one solve, a lam path, a target rank.

``robust_pca`` validates its input, runs the fast ALM solver or a convex
program on arrays, and packs the arrays into a :class:`~eidecomp.types.Decomposition`
with an :class:`~eidecomp.types.OptimalityReport`. ``lambda_path`` and
``robust_pca(..., target_rank=k)`` are loops over the same solver with warm
starts.
"""

import dataclasses
import math
import time
import warnings

import numpy as np

from ..errors import ConvergenceWarning, InputError, warn_stopped
from ..limits import (
    available_memory,
    check_range,
    dense_input,
    observed_entries,
    size_text,
)
from ..names import unit_labels
from ..params import (
    GAP_TOL,
    MAX_ITER,
    PATH_GAP_TOL,
    PRIMAL_TOL,
    STOP_RULES,
    SolverSettings,
    check_lam,
    default_lam,
    resolve_dtype,
)
from ..progress import announcer, solver_labeller
from ..types import Decomposition, OptimalityReport, PathPoint, adopting_arrays
from ._certificate import duality_gap, row_blocks, sum_abs
from ._convex import SOLVERS, ConvexPCP, convex_bytes, largest_convex, solver_name
from ._ialm import ialm
from ._norms import spectral_norm_bound
from ._svt import numerical_rank, reported_rank
from ._threads import blas_threads
from ._verdict import judge_split, max_abs, settled_lam, support_density

__all__ = ["default_lam", "lambda_path", "pcp_objective", "robust_pca",
           "suggest_lam"]

METHODS = ("ialm", "convex")
ZERO_RTOL = 1e-7  # convex solutions: |S_ij| below this x max|W| is solver noise


def pcp_objective(L, S, lam, observed=None):
    """||L||_* + lam ||P_Omega S||_1, computed with numpy norms."""
    l1 = np.abs(S if observed is None else S[observed]).sum()
    return float(np.linalg.norm(L, "nuc") + lam * l1)


def _check_matrix(W, name="W", dtype=np.float64):
    W = dense_input(W, name)
    if W.dtype == object or not (np.issubdtype(W.dtype, np.number)
                                 or W.dtype == bool):
        raise InputError(f"{name} must be numeric, got dtype {W.dtype}")
    if np.iscomplexobj(W):
        raise InputError(f"{name} must be real, got complex values")
    if W.ndim != 2:
        raise InputError(f"{name} must be a 2-D matrix, got {W.ndim}-D "
                         f"shape {W.shape}")
    if W.size == 0:
        raise InputError(f"{name} is empty (shape {W.shape})")
    # no copy when W already has the working dtype: the solvers never
    # write into it, and at 20,000 units a copy is 3.2 GB
    W = np.ascontiguousarray(W, dtype=dtype)
    for b in row_blocks(W.shape):
        bad = ~np.isfinite(W[b])
        if bad.any():
            n_bad = int((~np.isfinite(W)).sum())
            i, j = np.argwhere(bad)[0]
            raise InputError(f"{name} has {n_bad} non-finite value(s) "
                             f"(NaN or Inf), first at row {b.start + i}, column {j}")
    check_range(W, name, base=0, dtype=dtype)
    return W


def _residual_norm(W, L, S, observed=None):
    """(||W - L - S||_F, ||W||_F) over ``observed``, in row blocks."""
    r2 = w2 = 0.0
    for b in row_blocks(W.shape):
        R = W[b] - L[b]
        R -= S[b]
        Wb = W[b]
        if observed is not None:
            R, Wb = R[observed[b]], Wb[observed[b]]
        r2 += float(np.vdot(R, R))
        w2 += float(np.vdot(Wb, Wb))
    return np.sqrt(r2), np.sqrt(w2)


def _report(W, L, S, Y, lam, observed, *, nuclear, dual, n_iter, converged,
            solver, status, certificate=None, stop="residuals"):
    l1 = sum_abs(S, observed)
    norm_R, norm_W = _residual_norm(W, L, S, observed)
    primal = norm_R / norm_W if norm_W else 0.0
    spec = maxn = None
    if Y is not None:
        spec = spectral_norm_bound(Y).upper  # never under-reports
        maxn = max(float(Y.max()), -float(Y.min())) / lam
    return OptimalityReport(
        objective=float(nuclear + lam * l1), nuclear_norm=float(nuclear),
        l1_norm=l1, primal_residual=primal, dual_residual=dual,
        multiplier_spectral_norm=spec, multiplier_max_norm_over_lam=maxn,
        n_iter=int(n_iter), converged=bool(converged), solver=solver,
        status=status, stop=stop,
        duality_gap=None if certificate is None else certificate.gap,
        dual_objective=None if certificate is None else certificate.dual)


def _judged(dec, W, observed, sv):
    """``dec`` with its reported rank, band, support and verdict."""
    rank, band = reported_rank(sv, dec.low_rank.dtype)
    support = support_density(dec.sparse, max_abs(W, observed), observed)
    verdict = judge_split(rank, W.shape, support, band, dec.lam,
                          converged=dec.converged)
    with adopting_arrays():
        return dataclasses.replace(dec, rank=rank, rank_band=band,
                                   support_density=support, verdict=verdict)


def _primal_tol(gap_tol, dtype):
    """The primal residual below which the gap is checked:
    ``params.PRIMAL_TOL`` at the default gap and below, in proportion for a
    looser one (a path that needs only the rank and the support), at most
    1e-3."""
    name = np.dtype(dtype).name
    if gap_tol is None:
        return PRIMAL_TOL[name]
    return min(1e-3, PRIMAL_TOL[name] * max(1.0, gap_tol / GAP_TOL[name]))


def _ialm_decomposition(W, lam, observed, *, tol, max_iter, rho, seed,
                        progress, init=None, gap_tol=None):
    """One ALM solve; ``init`` is a neighbour's (L, S, Y, mu, n_iter).

    A warm start enters with the neighbour's large mu and a multiplier made
    for another lam; where that puts it in the slow, linearly converging
    regime, a cold start is faster (it converges superlinearly as mu grows).
    So the warm start gets a budget of twice the neighbour's iterations (at
    least 50) and is replaced by a cold start if it has not converged by then.
    """
    info = None
    if init is not None:
        budget = min(max_iter, max(50, 2 * int(init[4])))
        L, S, Y, info = ialm(W, lam, observed=observed, tol=tol, max_iter=budget,
                             rho=rho, rng=np.random.default_rng(seed),
                             init=init[:4], callback=progress, gap_tol=gap_tol,
                             primal_tol=_primal_tol(gap_tol, W.dtype))
        if not info["converged"]:
            info = None
    if info is None:
        L, S, Y, info = ialm(W, lam, observed=observed, tol=tol,
                             max_iter=max_iter, rho=rho,
                             rng=np.random.default_rng(seed), callback=progress,
                             gap_tol=gap_tol,
                             primal_tol=_primal_tol(gap_tol, W.dtype))
    if observed is not None:
        S[~observed] = 0.0  # unobserved: L is the completion, S carries nothing
    hist = info["history"]
    dual = hist[-1][1] if hist else 0.0
    sv = info["singular_values"]
    by = info["stopped_by"]
    report = _report(W, L, S, Y, lam, observed, nuclear=float(sv.sum()),
                     dual=float(dual), n_iter=info["n_iter"],
                     converged=info["converged"], solver="ialm",
                     status="converged" if info["converged"] else by,
                     certificate=info["certificate"],
                     stop=by if info["converged"] else
                     ("residuals" if gap_tol is None else "gap"))
    with adopting_arrays():  # L and S are this solve's own: no copies
        dec = Decomposition(low_rank=L, sparse=S, rank=len(sv), lam=float(lam),
                            objective=report.objective, n_iter=info["n_iter"],
                            converged=info["converged"], history=tuple(hist),
                            method="ialm", report=report, observed=observed)
    return _judged(dec, W, observed, sv), (L, S, Y, info["mu"], info["n_iter"])


def _convex_decomposition(W, lam, observed, *, program, solver, max_iter):
    L, S, Y, info = program.solve(lam, solver=solver, max_iter=max_iter)
    S = np.where(np.abs(S) <= ZERO_RTOL * np.abs(W).max(), 0.0, S)
    if observed is not None:
        S[~observed] = 0.0
    U, sv, Vt = np.linalg.svd(L, full_matrices=False)
    rank = numerical_rank(sv)
    L, sv = (U[:, :rank] * sv[:rank]) @ Vt[:rank], sv[:rank]  # the noise floor
    cert = None
    if Y is not None:  # cvxpy's sign convention is its own: try both
        cert = duality_gap(W, lam, L, float(sv.sum()), (Y, -Y), observed)
    report = _report(W, L, S, Y, lam, observed, nuclear=float(sv.sum()),
                     dual=None, n_iter=info["n_iter"],
                     converged=info["converged"], solver=info["solver"],
                     status=info["status"], certificate=cert,
                     stop=info["solver"])
    dec = Decomposition(low_rank=L, sparse=S, rank=rank, lam=float(lam),
                        objective=report.objective, n_iter=info["n_iter"],
                        converged=info["converged"], method="convex",
                        report=report, observed=observed)
    return _judged(dec, W, observed, sv)


def memory_estimate(shape, dtype=np.float64, method=METHODS[0], solver=SOLVERS[0]):
    """Bytes robust_pca needs for a matrix of this shape: W and at most four
    more m x n arrays (S, Y, the SVT's argument, then L) for the ALM; for the
    convex programs, the solver's own problem (:func:`._convex.convex_bytes`,
    measured: an interior-point solver's grows as (m + n)^4)."""
    m, n = shape
    if method == "convex":
        return convex_bytes(shape, solver) + 2 * m * n * 8
    return 5 * m * n * np.dtype(dtype).itemsize


def _check_memory(shape, dtype, method, solver=SOLVERS[0]):
    if len(shape) != 2:
        return  # _check_matrix gives the message
    if method == "convex":
        solver_name(solver)
    need = memory_estimate(shape, dtype, method, solver)
    have = available_memory()
    if not have or need <= have:
        return
    where = f"a {shape[0]}x{shape[1]} robust PCA"
    if method == "convex":
        fits = {s: largest_convex(have, s) for s in SOLVERS}
        others = [f"{s} up to {fits[s]}x{fits[s]}" for s in SOLVERS
                  if s != str(solver).upper()]
        raise InputError(
            f"{where} as a convex program ({str(solver).upper()}) needs about "
            f"{size_text(need)} and {size_text(have)} are available: it "
            f"fits up to {fits.get(str(solver).upper(), 0)}x"
            f"{fits.get(str(solver).upper(), 0)} here"
            + "".join(f", {o}" for o in others)
            + "; the fast solver (method 'ialm', the default) needs "
            f"{size_text(memory_estimate(shape, dtype))}")
    alt = ("float32 mode (dtype='float32', --float32) halves it; "
           if np.dtype(dtype) == np.float64 else "")
    raise InputError(
        f"{where} needs about {need / 2**30:.1f} "
        f"GiB and {have / 2**30:.1f} GiB are available; {alt}a kernel "
        "(--kernel) avoids the matrix altogether")


def _warn_if_stopped(dec):
    if not dec.converged:
        rep = dec.report
        dual, gap = rep.dual_residual, rep.duality_gap
        stalled = rep.status == "stalled"
        warn_stopped("robust PCA", dec.n_iter, stacklevel=4,
                     detail=f"primal residual {rep.primal_residual:.2e}, "
                     + ("no dual residual" if dual is None
                        else f"dual residual {dual:.2e}")
                     + ("" if gap is None else f", certified gap {gap:.2e}")
                     + (": the gap stopped falling" if stalled else ""),
                     **({"advice": "loosen gap_tol (--gap-tol); the split "
                         "returned is the best certified step"}
                        if stalled else {}))


def robust_pca(W, *, lam=None, method=METHODS[0], observed=None,
               ignore_diagonal=False,
               target_rank=None, tol=None, max_iter=None, rho=1.5, delta=None,
               low_rank_sign=None, solver=SOLVERS[0], seed=0, progress=None,
               dtype="float64", check_memory=True, stop="gap", gap_tol=None):
    r"""Split W into a low-rank part L and a sparse part S by robust PCA.

    Solves Principal Component Pursuit

    .. math:: \min_{L, S} \|L\|_* + \lambda \|P_\Omega S\|_1
              \quad \text{s.t.} \quad P_\Omega(L + S) = P_\Omega(W),

    where :math:`\Omega` are the observed entries. With every entry observed
    (the default) this is Candes, Li, Ma and Wright's (2011) eq. 1.1; with
    entries left out (``observed``, ``ignore_diagonal``) it is their
    principal component pursuit with missing entries (their Theorem 1.2,
    from memory).

    Parameters
    ----------
    W : array_like of shape (n_post, n_pre)
        Signed weight matrix, W[post, pre]: an array, a scipy.sparse matrix,
        or a pandas DataFrame (whose index, when its columns are the same
        labels, becomes the result's ``unit_ids``).
    lam : float or None
        Weight of the l1 term. None: 1 / sqrt(max(m, n)), the weight of
        Candes et al.'s (2011) Theorem 1.1 for a fully observed matrix,
        whatever ``observed`` and ``ignore_diagonal`` leave out: the
        default is not rescaled by the observed share. Their
        missing-entries result (from memory) is stated for an n x n matrix
        observed at rate 0.1 with lam = 1 / sqrt(0.1 n), sqrt(10) times
        this default. With only the diagonal left out (observed share
        1 - 1/n), scaling lam by 1/sqrt(share) would change it by less
        than 1/n.
    method : {"ialm", "convex"}
        ``"ialm"``: inexact augmented Lagrange multipliers (Lin, Chen, Ma 2010),
        fast, stopped on primal and dual residuals. ``"convex"``: the same
        convex program solved by cvxpy with ``solver``, to that solver's
        tolerance.
    observed : array_like of bool or None
        W's shape, True where the entry is observed (None: all are).
        Unobserved entries are left out of the constraint and of the l1
        term; L fills them in and S is zero there. (The command's
        ``--unobserved FILE`` holds the opposite, 1 where unobserved.)
    ignore_diagonal : bool
        Treat the diagonal (self-connections) as unobserved.
    target_rank : int or None
        Search lam for a solution whose L has this rank (``lam`` is then
        the starting guess). See :func:`lambda_path` for a sweep.
    tol : float or None
        ALM: bound on the relative primal and dual residuals; None means
        1e-8 (float64) or 1e-6 (float32, whose residuals bottom out near
        1e-7).
    stop : {"gap", "residuals"}
        ALM: both stop when the residuals are below ``tol``. ``"gap"``
        (default) also stops, once the residuals no longer fall fast, when
        the certified relative duality gap is at most ``gap_tol`` and the
        primal residual at most ``params.PRIMAL_TOL`` (scaled up with a
        ``gap_tol`` above the default, to at most 1e-3): ``converged`` then
        means the feasible split's objective is proved within ``gap_tol``
        of the optimum, relative to itself.
        ``"residuals"`` is the strict stop alone (docs/robust_pca.md, "The
        stop"). The gap is reported either way.
    gap_tol : float or None
        Bound on the certified relative duality gap; None means
        ``params.GAP_TOL`` (5e-5).
    max_iter : int or None
        Iteration limit. ALM: default 5000, a ``ConvergenceWarning`` if
        reached. Convex: passed to the solver; None keeps the solver's own.
    rho : float
        ALM: growth factor of the penalty mu.
    delta : float or None
        Convex only: stable PCP (Zhou et al. 2010) with the noise bound
        ||P_Omega(W - L - S)||_F <= delta.
    low_rank_sign : {None, "nonpositive"}
        Convex only: constrain L <= 0 entrywise (a purely inhibitory low-rank
        part).
    solver : {"CLARABEL", "SCS"}
        cvxpy solver for ``method="convex"``.
    seed : int
        Seed of the random starting block of the partial SVD.
    progress : callable or None
        ALM: called as ``progress(iteration, primal, dual, rank, mu)``.
    dtype : "float64" or "float32"
        Working precision (float64 by default). float32 halves the memory;
        a float64 W is converted, a float32 W used as it is.
    check_memory : bool
        Refuse, before any work, a matrix whose solve would need more
        memory than is available (the figure is in the message).

    Returns
    -------
    Decomposition

    Warns
    -----
    ConvergenceWarning
        When the ALM solver stops at ``max_iter``, or (stop ``"gap"``) when
        its certified gap stops falling above ``gap_tol``.

    Examples
    --------
    >>> import numpy as np
    >>> from eidecomp import robust_pca
    >>> rng = np.random.default_rng(0)
    >>> L0 = rng.standard_normal((60, 2)) @ rng.standard_normal((2, 60))
    >>> S0 = np.where(rng.random((60, 60)) < 0.05, 10.0, 0.0)
    >>> dec = robust_pca(L0 + S0)
    >>> dec.rank, dec.converged, dec.report.duality_gap <= 5e-5
    (2, True, True)
    >>> bool(np.allclose(dec.low_rank, L0, atol=1e-6))
    True
    >>> dec.verdict.fits
    True
    """
    dtype = resolve_dtype(dtype)
    if check_memory:
        _check_memory(np.shape(W), dtype, method, solver)
    ids = unit_labels(W)
    W = _check_matrix(W, dtype=dtype)
    observed = observed_entries(observed, W.shape,
                                ignore_diagonal=ignore_diagonal)
    if method not in METHODS:
        raise InputError(f"unknown method {method!r}; choose one of "
                         f"{', '.join(METHODS)}")
    if method == "convex" and (stop != STOP_RULES[0] or gap_tol is not None):
        raise InputError("the stop rule and gap tolerance are the ALM's "
                         "(method 'ialm'); a convex program stops at its "
                         "solver's own tolerance")
    if method == "ialm" and (delta is not None or low_rank_sign is not None):
        raise InputError("stable PCP (delta) and low_rank_sign need "
                         "method='convex'")
    if low_rank_sign not in (None, "nonpositive"):
        raise InputError(f"low_rank_sign must be None or 'nonpositive', got "
                         f"{low_rank_sign!r}")
    if delta is not None and not (np.isfinite(delta) and delta >= 0):
        raise InputError(f"delta must be a finite number >= 0, got {delta!r}")
    settings = SolverSettings.resolve(W.shape, lam=lam, tol=tol,
                                      max_iter=max_iter, dtype=dtype,
                                      stop=stop, gap_tol=gap_tol)
    lam, tol = settings.lam, settings.tol
    if not rho > 1:
        raise InputError(f"rho must be greater than 1, got {rho!r}")

    if method == "ialm":
        def solve(lam_, init=None):
            return _ialm_decomposition(W, lam_, observed, tol=tol,
                                       max_iter=settings.max_iter, rho=rho,
                                       seed=seed, progress=progress, init=init,
                                       gap_tol=settings.gap_tol)
    else:
        program = ConvexPCP(W, observed=observed, delta=delta,
                            low_rank_sign=low_rank_sign)

        def solve(lam_, init=None):
            dec = _convex_decomposition(W, lam_, observed, program=program,
                                        solver=solver, max_iter=max_iter)
            return dec, None

    with blas_threads(W.shape):
        if target_rank is None:
            dec, _ = solve(lam)
        else:
            label = solver_labeller(progress)
            try:
                dec = _search_rank(solve, lam,
                                   int(_check_rank(target_rank, W.shape)),
                                   tell=label)
            finally:
                label(None)             # later solves are not this search
    _warn_if_stopped(dec)
    if ids is not None:
        with adopting_arrays():  # the same (read-only) arrays, now labelled
            dec = dataclasses.replace(dec, unit_ids=ids)
    return dec


def _check_rank(k, shape):
    if not isinstance(k, (int, np.integer)) or not 0 <= k <= min(shape):
        raise InputError(f"target rank must be an integer from 0 to "
                         f"{min(shape)}, got {k!r}")
    return k


def _search_rank(solve, lam, k, max_evals=40, tell=lambda text: None):
    """Bisect log(lam) until rank(L) == k; rank grows with lam. ``tell``
    names each lam tried, and the rank the last one gave, as progress."""
    cache, tried = {}, []

    def at(lam_):
        last = (f" (lam {tried[-1].lam:.4g} gave rank {tried[-1].rank})"
                if tried else "")
        tell(f"target rank {k}, lam {lam_:.4g}{last}")
        near = min(cache, key=lambda x: abs(math.log(x / lam_)), default=None)
        dec, state = solve(lam_, init=None if near is None else cache[near][1])
        cache[lam_] = (dec, state)
        tried.append(dec)
        return dec

    lo = hi = None
    dec = at(lam)
    for _ in range(max_evals):
        if dec.rank == k:
            return dec
        if dec.rank < k:
            lo = lam
            lam = lam * 2.0 if hi is None else math.sqrt(lam * hi)
        else:
            hi = lam
            lam = lam / 2.0 if lo is None else math.sqrt(lam * lo)
        if lo is not None and hi is not None and hi / lo < 1 + 1e-6:
            break
        dec = at(lam)
    best = min((d for d, _ in cache.values()),
               key=lambda d: (abs(d.rank - k), d.lam))
    warnings.warn(f"no lam found that gives rank {k} exactly; closest: rank "
                  f"{best.rank} at lam {best.lam:.6g}", UserWarning, stacklevel=3)
    return best


def lambda_path(W, lams=None, *, n_lams=12, observed=None, ignore_diagonal=False,
                tol=None, max_iter=MAX_ITER, seed=0, progress=None, stop="gap",
                gap_tol=None, until=None):
    """Solve PCP over a range of lam with warm starts (fast ALM solver).

    Parameters
    ----------
    W : array_like of shape (n_post, n_pre)
    lams : sequence of float or None
        The values of lam. None: ``n_lams`` values log-spaced from a quarter
        to four times the default 1 / sqrt(max(m, n)).
    n_lams : int
    observed, ignore_diagonal, tol, max_iter, seed, stop, gap_tol
        As in :func:`robust_pca`: every point is stopped by the same rule
        and certified by its own duality gap.
    progress : callable or None
        Called as ``progress(stage, 0, nan)`` before each lam (the stage
        names the point and the time so far: :class:`eidecomp.progress.Progress`
        takes it as it is).
    until : callable or None
        ``until(point)`` true ends the path after that point (the larger
        lams are not solved).

    Returns
    -------
    points : list of PathPoint
        One per lam, in increasing lam: rank, sparsity, ||L||_*, ||S||_1,
        primal residual, iterations and seconds (their sum is the path's
        cost), the reported support, the rank band and the certified gap.
        Each solve starts from its neighbour's (warm start), cold when that
        is slower (:func:`_ialm_decomposition`).
    decompositions : list of Decomposition

    Examples
    --------
    >>> import numpy as np
    >>> from eidecomp import lambda_path
    >>> W = np.random.default_rng(0).standard_normal((30, 30))
    >>> points, _ = lambda_path(W, n_lams=4)
    >>> [p.rank for p in points] == sorted(p.rank for p in points)
    True
    """
    W = _check_matrix(W)
    observed = observed_entries(observed, W.shape,
                                ignore_diagonal=ignore_diagonal)
    settings = SolverSettings.resolve(W.shape, tol=tol, max_iter=max_iter,
                                      stop=stop, gap_tol=gap_tol)
    if lams is None:
        lam0 = default_lam(W.shape)
        lams = np.geomspace(lam0 / 4, lam0 * 4, int(n_lams))
    lams = sorted(check_lam(x) for x in lams)
    if not lams:
        raise InputError("lambda_path needs at least one lam")
    points, decs, state = [], [], None
    tell = announcer(progress)
    start = time.perf_counter()
    for i, lam in enumerate(lams):
        tell(f"lambda path: lam {i + 1} of {len(lams)} = {lam:.3g} "
             f"({time.perf_counter() - start:.0f} s so far)")
        t = time.perf_counter()
        with blas_threads(W.shape):
            dec, state = _ialm_decomposition(W, lam, observed,
                                             tol=settings.tol,
                                             max_iter=settings.max_iter,
                                             rho=1.5, seed=seed, progress=None,
                                             init=state,
                                             gap_tol=settings.gap_tol)
        _warn_if_stopped(dec)
        r = dec.report
        points.append(PathPoint(lam=lam, rank=dec.rank, sparsity=dec.sparsity,
                                nuclear_norm=r.nuclear_norm, l1_norm=r.l1_norm,
                                primal_residual=r.primal_residual,
                                objective=r.objective, n_iter=dec.n_iter,
                                converged=dec.converged,
                                seconds=time.perf_counter() - t,
                                support_density=dec.support_density,
                                rank_band=dec.rank_band,
                                duality_gap=r.duality_gap))
        decs.append(dec)
        if until is not None and until(points[-1]):
            break
    return points, decs


def suggest_lam(W, dec=None, *, n_lams=7, observed=None, ignore_diagonal=False,
                seed=0, progress=None, points=None):
    """The split's verdict with the lam a coarse lam path suggests.

    Runs :func:`lambda_path` over ``n_lams`` values from a quarter to four
    times the default lam, stopped at a certified gap of
    :data:`PATH_GAP_TOL`, and reads it with
    :func:`eidecomp.decompose._verdict.settled_lam` (where the rank and the
    support settle, every rule met).

    Parameters
    ----------
    W : array_like of shape (n_post, n_pre)
    dec : Decomposition or None
        The split to judge; None judges the path's point nearest the
        default lam.
    n_lams, observed, ignore_diagonal, seed, progress
        As in :func:`lambda_path`.
    points : list of PathPoint or None
        A path already solved (the report's): read instead of solving one;
        ``dec`` is then required.

    Returns
    -------
    verdict : SplitVerdict
        ``dec``'s verdict with ``suggested_lam`` filled in (or None when no
        lam settles) and ``path_checked`` true.
    points : list of PathPoint

    Examples
    --------
    >>> import numpy as np
    >>> from eidecomp.datasets import make_planted
    >>> W, _, _ = make_planted(80, rank=3, corruption=0.05, seed=1)
    >>> verdict, points = suggest_lam(W, n_lams=7)
    >>> verdict.fits, verdict.suggested_lam is not None
    (True, True)
    """
    if observed is not None:        # checked, even when a path is given
        observed = observed_entries(observed, np.shape(W),
                                    ignore_diagonal=ignore_diagonal)
    if observed is None and dec is not None and dec.observed is not None:
        observed = dec.observed
    if points is None:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)  # a loose path
            points, decs = lambda_path(W, n_lams=n_lams, observed=observed,
                                       ignore_diagonal=ignore_diagonal,
                                       seed=seed, progress=progress,
                                       gap_tol=PATH_GAP_TOL)
        if dec is None:
            lam0 = default_lam(np.shape(W))
            dec = min(decs, key=lambda d: abs(math.log(d.lam / lam0)))
    elif dec is None:
        raise InputError("suggest_lam: a path given without its decomposition")
    if dec.verdict is None:
        raise InputError("suggest_lam: the decomposition carries no verdict "
                         "(one read from an older folder); decompose again")
    shape = dec.shape
    v = dec.verdict
    return judge_split(v.rank, shape, v.support_density, v.rank_band, v.lam,
                       suggested_lam=settled_lam(points, shape),
                       path_checked=True, converged=v.converged), points
