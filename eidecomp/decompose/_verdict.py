"""Is W low-rank plus sparse at this lam? One verdict, one line.

Robust PCA always returns a split; only some splits are the low-rank plus
sparse structure the circuit's labels assume (untuned interneurons from L,
tuned ones from S). The rules (``params.FIT_RULES``, our own, chosen by
measurement in docs/robust_pca.md, "The verdict") bound the reported rank's
share of min(m, n), the share of entries in S's reported support, and the
number of singular values of L between the solver's noise floor and the
reported-rank cut (an L whose spectrum has no edge).

Planted problems inside the region where PCP recovers them (Candes, Li, Ma,
Wright 2011, section 4.1) meet all three; unplanted Gaussian matrices,
planted ones past that region and the natural-statistics matrices of
benchmarks/hard.py fail at least one.

:func:`settled_lam` reads a lam path for the lam where the rank and the
support settle: the longest run of consecutive path points
(``params.SETTLED``) whose reported ranks and supports change little, all
meeting the rules; it suggests the geometric middle of the run.
"""

import math
from dataclasses import replace

import numpy as np

from ..params import FIT_RULES, SETTLED, SUPPORT_RTOL
from ..types import SplitVerdict
from ._certificate import row_blocks

__all__ = ["judge_split", "max_abs", "meets_rules", "settled_lam",
           "support_density", "verdict_line"]


def max_abs(W, observed=None):
    """max |W| over the observed entries, in row blocks: the scale of the
    reported support's cut.

    >>> max_abs(np.array([[5.0, -2.0], [1.0, 0.0]]), np.array([[0, 1], [1, 1]], bool))
    2.0
    """
    top = 0.0
    for b in row_blocks(W.shape):
        block = np.abs(W[b])
        if observed is not None:
            block = block[observed[b]]
        if block.size:
            top = max(top, float(block.max()))
    return top


def support_density(S, top, observed=None):
    """The reported support of S: the fraction of observed entries with
    |S_ij| above ``params.SUPPORT_RTOL`` times ``top`` (:func:`max_abs` of
    W), counted in row blocks.

    >>> support_density(np.array([[1.0, 1e-4], [0.0, -0.5]]), 1.0)
    0.5
    """
    cut = SUPPORT_RTOL * top
    count = total = 0
    for b in row_blocks(S.shape):
        big = np.abs(S[b]) > cut
        if observed is not None:
            big = big[observed[b]]
        count += int(np.count_nonzero(big))
        total += big.size
    return count / total if total else 0.0


def _reasons(rank, n_small, support, band):
    share = rank / n_small if n_small else 0.0
    cap = FIT_RULES["max_rank_share"]
    out = []
    if rank > max(1, cap * n_small):  # a rank-1 part is low-rank at any size
        out.append(f"L is not low-rank (its rank is more than {100 * cap:.3g} "
                   f"% of {n_small})")
    if support > FIT_RULES["max_support_density"]:
        out.append(f"S is not sparse (its support is more than "
                   f"{100 * FIT_RULES['max_support_density']:.3g} % of the "
                   "entries)")
    if band is not None and band > max(FIT_RULES["min_band"],
                                       FIT_RULES["max_band_share"] * rank):
        out.append(f"L's spectrum has no edge ({band} singular values below "
                   "the rank cut)")
    return share, tuple(out)


def meets_rules(rank, shape, support, band):
    """True when a split of this rank, support and band meets every rule."""
    return not _reasons(rank, min(shape), support, band)[1]


def verdict_line(v):
    """The one sentence every output shows for a verdict ``v``."""
    head = (f"at lam {v.lam:.4g} the split has rank {v.rank} of "
            f"{v.n_small} and S on {100 * v.support_density:.1f} % of the "
            "entries" + ("" if v.converged else
                         " (its solve did not converge: not settled)"))
    if v.fits:
        return f"W is low-rank plus sparse: {head}."
    if v.suggested_lam is not None:
        where = (f"the lam path settles at lam {v.suggested_lam:.4g} "
                 "(--lam there)")
    elif v.path_checked:
        where = "no lam on the path gives a settled low-rank plus sparse split"
    else:
        where = "eidecomp.decompose.suggest_lam searches the lam path"
    return (f"W is not low-rank plus sparse: {head}; "
            + "; ".join(v.reasons) + f". The untuned and tuned labels then name "
            "the two parts of this split, not two kinds of interneuron; "
            f"{where}.")


def judge_split(rank, shape, support_density, rank_band, lam, *,
                suggested_lam=None, path_checked=False, converged=True):
    """The verdict on one split.

    Parameters
    ----------
    rank : int
        Reported rank of L.
    shape : tuple (m, n)
    support_density : float
        Reported support of S (fraction of observed entries).
    rank_band : int or None
        Singular values between the noise floor and the rank cut (None in
        float32: the edge rule is then not applied).
    lam : float
    suggested_lam : float or None
        From :func:`settled_lam` on a path, when one was run.
    path_checked : bool
    converged : bool
        Whether the split's solve converged (the line says when not).

    Returns
    -------
    SplitVerdict

    Examples
    --------
    >>> judge_split(5, (100, 100), 0.05, 0, 0.1).fits
    True
    >>> v = judge_split(52, (100, 100), 0.5, 30, 0.1)
    >>> v.fits, len(v.reasons)
    (False, 3)
    """
    support_density = float(support_density)
    if not (rank >= 0 and 0.0 <= support_density <= 1.0 and lam > 0):
        raise ValueError(f"judge_split: rank {rank!r}, support "
                         f"{support_density!r} and lam {lam!r} must be a "
                         "count, a fraction and a positive number")
    band = None if rank_band is None else int(rank_band)
    share, reasons = _reasons(int(rank), min(shape), support_density, band)
    v = SplitVerdict(fits=not reasons, rank=int(rank), rank_share=share,
                     support_density=support_density, rank_band=band,
                     lam=float(lam), reasons=reasons,
                     suggested_lam=None if suggested_lam is None
                     else float(suggested_lam), path_checked=bool(path_checked),
                     n_small=int(min(shape)), converged=bool(converged))
    return replace(v, line=verdict_line(v))


def settled_lam(points, shape):
    """The lam where a path's rank and support settle, or None.

    ``points`` are :class:`~eidecomp.types.PathPoint` in increasing lam,
    each with ``support_density`` and ``rank_band`` (as
    :func:`eidecomp.lambda_path` returns them). See the module docstring for
    the rule.

    >>> from eidecomp.types import PathPoint
    >>> pts = [PathPoint(lam=l, rank=r, sparsity=0.1, nuclear_norm=1.0,
    ...                  l1_norm=1.0, primal_residual=0.0, objective=1.0,
    ...                  n_iter=1, converged=True, support_density=d)
    ...        for l, r, d in [(0.01, 0, 1.0), (0.02, 5, 0.10), (0.04, 5, 0.10),
    ...                        (0.08, 5, 0.095), (0.16, 60, 0.01)]]
    >>> round(settled_lam(pts, (100, 100)), 4)
    0.04
    """
    def ok(p):
        return (p.rank > 0 and p.support_density is not None
                and meets_rules(p.rank, shape, p.support_density, p.rank_band))

    def close(a, b):
        return (abs(a.rank - b.rank)
                <= max(1, SETTLED["rank_step"] * max(a.rank, b.rank))
                and abs(a.support_density - b.support_density)
                <= SETTLED["support_step"] * max(a.support_density,
                                                 b.support_density))

    best, run = [], []
    for p in points:
        if ok(p) and run and close(run[-1], p):
            run.append(p)
        else:
            run = [p] if ok(p) else []
        if len(run) > len(best):
            best = list(run)
    if len(best) < SETTLED["min_run"]:
        return None
    return math.sqrt(best[0].lam * best[-1].lam)
