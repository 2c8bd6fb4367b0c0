"""Principal Component Pursuit by the inexact augmented Lagrange multiplier method.

Solves  min ||L||_* + lam ||P_Omega(S)||_1  subject to  P_Omega(L + S) = P_Omega(W)
(Candes, Li, Ma, Wright 2011: eq. 1.1 with every entry observed; with some left
out, their missing-entries program, Theorem 1.2 from memory; Omega the observed
entries) by the inexact ALM of Lin, Chen and Ma (2010, arXiv:1009.5055, Algorithm 5):

    L   <- SVT_{1/mu}(W - S + Y/mu)
    S   <- shrink_{lam/mu}(W - L + Y/mu)      (on Omega; off Omega unpenalised)
    Y   <- Y + mu (W - L - S)

Two departures from the textbook schedule, both for the same reason: a stop on
the primal residual alone, with mu growing by 1.5 every step, halts at a feasible
point that is not optimal (on an unplanted Gaussian matrix, 0.8 % above the
optimal objective). Here

* the stop needs both the primal residual ||W - L - S||_F / ||W||_F and the dual
  residual mu ||S_k - S_{k-1}||_F / ||Y_k||_F (Boyd et al. 2011, section 3.3)
  below ``tol``; the dual residual is exactly the distance of the multiplier from
  the subdifferential of the nuclear norm at L, so both small is the KKT system;
* mu grows by ``rho`` every step (the textbook schedule) only until the primal
  residual first falls below ``tol``; from then on it grows while the primal
  residual dominates and shrinks when the dual residual dominates (residual
  balancing, Boyd et al. 2011, section 3.4.1), an ADMM that converges to the
  optimum. On planted problems the dual residual is already small at the
  switch and nothing is spent; on the unplanted 60 x 60 Gaussian matrix the
  second phase closes the 0.8 % gap.

Under the certified stop (``gap_tol``) a solve that is not low-rank plus
sparse is stopped on the relative duality gap of the best feasible split
against the best dual value seen (``_Bound``), and a finish (``_finish``)
makes the split it returns nearly feasible (docs/robust_pca.md, "The stop").

Memory: besides W, the loop holds three m x n arrays (S, Y and the SVT's
argument T), the factors of L and three row blocks; under the certified
stop also the best split's S and, during a finish, the finish's S. L itself
is formed once, at the end, after T is freed. On top of these come the
SVD's workspace (the Gram matrix and its eigenvectors on the full path),
the Anderson history (``_anderson.HISTORY_BYTES`` at most) and the
certificate's transients. Every array has W's dtype (float64, or float32 in
float32 mode).
"""

import math

import numpy as np

from ..params import (
    FAST_PHASE,
    MAX_ITER,
    PRIMAL_TOL,
    STRICT_SPLIT,
    TOL,
)
from ._anderson import Anderson, depth_for
from ._certificate import (
    GapCertificate,
    duality_gap,
    relative_gap,
    row_blocks,
    sum_abs,
)
from ._svt import reported_rank, sketch_plan, spectral_norm, svt
from ._verdict import max_abs, support_density

__all__ = ["end_step", "ialm", "next_penalty", "next_rank", "split_point"]

GAP_EVERY = 5  # fewest steps between two certificates (each costs about
               # a third of an SVD)
GAP_SPACING = 25  # most steps between two certificates
PROJECTION_ROUNDS = 6  # most rounds of alternating projection from Y per
                       # certificate (each one symmetric eigendecomposition;
                       # _certificate stops them early once they stop paying)
FAST_WINDOW = 20  # steps over which _fast measures the residuals' fall
GAP_STALL = 20  # stop (not converged) after this many checks with no better
                # certificate: near a degenerate optimum the gap of the ALM's
                # iterates oscillates instead of falling (docs/robust_pca.md)
FINISH_FACTOR = 100.0  # a finish starts at this multiple of mu (_finish)
FINISH_STEPS = 16  # most steps of one finish
FINISH_PLATEAU = 0.01  # a finish ends once a step lowers p by less than
                       # this share of gap_tol (relative)
GROW_STEPS = 20  # phase 1: mu grows by rho for at most this many steps
BALANCE = 3.0    # phase 2: mu changes once one residual is BALANCE x the other
_BALANCE_FACTOR = 2.0
_MU_MAX_FACTOR = 1e10  # mu never exceeds this multiple of its start


def next_penalty(mu, history, polishing, *, tol, rho, mu_max):
    """The penalty schedule every ALM solver shares; returns (mu, balancing).

    ``history`` holds one row (primal, dual, rank, mu) per step so far.
    Growth by rho for at most ``GROW_STEPS`` steps, or until the primal
    residual first falls below tol; then residual balancing (Boyd et al.
    2011, section 3.4.1): mu doubles while the primal residual is more than
    ``BALANCE`` times the dual one, halves in the opposite case, and
    otherwise stays put (module docstring).
    """
    it = len(history)
    primal, dual = history[-1][:2]
    if not polishing and it <= GROW_STEPS:
        return min(mu * rho, mu_max), primal < tol
    if primal > BALANCE * dual:
        mu = min(mu * _BALANCE_FACTOR, mu_max)
    elif dual > BALANCE * primal:
        mu = mu / _BALANCE_FACTOR
    return mu, True


def end_step(history, callback, it, rank, mu, polishing, dY, dS, nY, norm_W,
             *, tol, rho, mu_max):
    """The end of one ALM step, shared by every ALM solver: the residuals from
    ||Y+ - Y||, ||S+ - S|| and ||Y+||, the history row, the callback, the
    stopping rule (both residuals below tol) and the penalty schedule.

    Returns (converged, mu, polishing).
    """
    primal = float(dY) / mu / norm_W
    dual = mu * float(dS) / max(float(nY), np.finfo(float).tiny)
    history.append((primal, dual, rank, mu))
    if callback is not None:
        callback(it, primal, dual, rank, mu)
    if primal < tol and dual < tol:
        return True, mu, polishing
    mu, polishing = next_penalty(mu, history, polishing, tol=tol, rho=rho,
                                 mu_max=mu_max)
    return False, mu, polishing


def next_rank(sv_prev, r, n_small):
    """Rank to compute next: a little above the predicted rank r."""
    if r < sv_prev:
        return min(r + 1 + max(2, r // 20), n_small)
    return min(r + 5 + max(5, r // 10), n_small)


def split_point(q, S, Y, mu, thr, mask=None):
    """S and Y (in place) from the point q = S + Y/mu of the fixed-point map:
    Y/mu = clip_thr(q) on the observed entries (0 off them), S = q - Y/mu."""
    np.clip(q, -thr, thr, out=Y)
    if mask is not None:
        Y *= mask
    np.subtract(q, Y, out=S)
    Y *= mu


def _svt_argument(T, W, S, Y, inv_mu, blocks, plan):
    """T = W + Y/mu - S block by block; with a sketch plan, T @ Omega in the
    same pass. Returns the sketch for the partial SVD (or None)."""
    P = None if plan is None else np.empty((W.shape[0], plan[0].shape[1]),
                                           W.dtype)
    for b in blocks:
        tb = T[b]
        np.multiply(Y[b], inv_mu, out=tb)
        tb += W[b]
        tb -= S[b]
        if plan is not None:
            np.matmul(tb, plan[0], out=P[b])
    return None if plan is None else (*plan, P)


def _update_s_y(W, S, Y, Us, Vt, r, mu, thr, mask, blocks, work):
    """S and Y in place, block by block, from L = Us Vt (never stored):
    S = shrink_thr(W - L + Y/mu), Y = mu (W - L + Y/mu - S), zero off Omega.
    Returns (||S+ - S||^2, ||Y+ - Y||^2, ||Y+||^2)."""
    t, c, d = work
    inv_mu = 1.0 / mu
    dS2 = dY2 = Y2 = 0.0
    for b in blocks:
        h = b.stop - b.start
        tb, cb, db = t[:h], c[:h], d[:h]
        if r:
            np.matmul(Us[b], Vt, out=tb)         # L
            np.subtract(W[b], tb, out=tb)        # W - L
        else:
            tb[...] = W[b]
        np.multiply(Y[b], inv_mu, out=cb)
        tb += cb                                 # W - L + Y/mu
        np.clip(tb, -thr, thr, out=cb)           # Y_new / mu on Omega
        if mask is not None:
            cb *= mask[b]                        # off Omega: Y = 0
        tb -= cb                                 # S_new
        Sb = S[b]
        np.subtract(Sb, tb, out=db)
        dS2 += float(np.vdot(db, db))
        Sb[...] = tb
        cb *= mu                                 # Y_new
        Yb = Y[b]
        np.subtract(Yb, cb, out=db)              # -mu (W - L - S_new)
        dY2 += float(np.vdot(db, db))
        Yb[...] = cb
        Y2 += float(np.vdot(cb, cb))
    return dS2, dY2, Y2


def _apply_mask(W, observed):
    """(W zeroed off the observed entries, the 0/1 mask), or (W, None)."""
    if observed is None or observed.all():
        return W, None
    mask = observed.astype(W.dtype)
    return W * mask, mask


def _start(W, init):
    """(S, Y, mu) to start from: zeros, or a neighbour's warm start."""
    if init is None:
        # Y_0 = 0 rather than the textbook W / J(W): the first threshold 1/mu_0
        # then keeps only the top of the spectrum, so no step starts with a
        # near-full SVD (any Y_0 converges; this one is cheap). mu_0 only
        # sets a scale, so ||W||_2 is needed to a few digits.
        return (np.zeros_like(W), np.zeros_like(W),
                1.25 / spectral_norm(W, rtol=1e-3))
    S, Y = (np.array(a, dtype=W.dtype, copy=True) for a in init[1:3])
    return S, Y, float(init[3])


def _fast(history):
    """True while the larger residual still falls by ``params.FAST_PHASE``
    or more over ``FAST_WINDOW`` steps (the linear phase: the strict stop
    is near)."""
    if len(history) <= FAST_WINDOW:
        return True
    now = max(history[-1][:2])
    then = max(history[-1 - FAST_WINDOW][:2])
    return then >= FAST_PHASE * now


def _spacing(it, gap, gap_tol):
    """Steps to the next certificate: where the gap would reach ``gap_tol``
    if it kept falling as 1/k (as it does near a degenerate optimum,
    measured), but at least ``GAP_EVERY`` and at most ``GAP_SPACING`` steps,
    so that a dip of the oscillating gap is still seen."""
    ahead = it * (gap / gap_tol - 1.0)
    return int(min(GAP_SPACING, max(GAP_EVERY, round(ahead))))


def _fits(sv, S, top, mask, dtype):
    """True when the split so far has the low rank and sparse S of
    ``params.STRICT_SPLIT``: its L is what the circuit is built from, and
    the solve goes on to the strict tolerance. The gap stop is for the other
    splits, whose reported rank and support settle long before their
    residuals do."""
    rank, _ = reported_rank(sv, dtype)
    if rank > STRICT_SPLIT["max_rank_share"] * min(S.shape):
        return False
    observed = None if mask is None else mask > 0
    return (support_density(S, top, observed)
            <= STRICT_SPLIT["max_support_density"])


def _certify(W, lam, sv, Us, Vt, Y, T, mu, observed, blocks, *, all_candidates=True):
    """The duality gap of the step just taken (``_certificate``).

    Two candidate multipliers: Y itself (|Y| <= lam by construction),
    improved by up to ``PROJECTION_ROUNDS`` rounds of alternating
    projection, and clip(mu (T - L), lam), where T is the SVT's argument of
    the step: before the clip that one lies in the subdifferential of
    ||.||_* at L, so its spectral norm is at most 1. T is overwritten (the
    next step forms it again). Without ``all_candidates`` (a solve that met
    the residual test, whose multiplier is already near-feasible), Y alone:
    one norm bound."""
    if not all_candidates:
        return duality_gap(W, lam, (Us, Vt), float(np.sum(sv)), (Y,),
                           observed=observed)
    for b in blocks:
        tb = T[b]
        if Us.shape[1]:
            tb -= Us[b] @ Vt
        tb *= mu
        np.clip(tb, -lam, lam, out=tb)
    return duality_gap(W, lam, (Us, Vt), float(np.sum(sv)), (Y, T),
                       observed=observed, rounds=PROJECTION_ROUNDS)


def _accelerate(accel, q, S, Y, mu_was, mu, lam, mask=None):
    """The accelerated point after a plain step from q that left (S, Y);
    S and Y are set from it in place. None once mu has changed (a new
    penalty is a new map: the history restarts at the next step)."""
    if mu != mu_was:
        accel.reset()
        return None
    q = accel.step(q, S + Y / mu)
    split_point(q, S, Y, mu, lam / mu, mask)
    return q


class _Workspace:
    """What one ALM step needs besides S and Y: W (zeroed off Omega), the
    mask, lam, the SVT's argument T, the row blocks and their work arrays,
    and the partial SVD's state (how many triplets to compute, the vectors
    that warm-start it, the random source).

    The pass that forms T also forms T @ Omega for the partial SVD, and the
    pass after it forms L = U s V^T block by block, so L is never stored
    inside the loop and each step streams W, S and Y twice.
    """

    def __init__(self, W, mask, lam, rng):
        m, n = W.shape
        self.W, self.mask, self.lam, self.rng = W, mask, lam, rng
        self.blocks = row_blocks(W.shape)
        rows = self.blocks[0].stop
        self.work = tuple(np.empty((rows, n), W.dtype) for _ in range(3))
        self.T = np.empty_like(W)
        self.k, self.V, self.r, self.steps = min(10, m, n), None, 0, 0

    def step(self, S, Y, mu):
        """One ALM step on S and Y in place: L = SVT(W - S + Y/mu) as
        factors, then S and Y. Returns (s, U s, V^T, ||dS||^2, ||dY||^2,
        ||Y||^2), s the shrunk singular values of L."""
        W, inv_mu = self.W, 1.0 / mu
        plan = sketch_plan(W.shape, self.k, self.V, self.rng, dtype=W.dtype)
        sketch = _svt_argument(self.T, W, S, Y, inv_mu, self.blocks, plan)
        U, s, Vt, self.V, _ = svt(self.T, inv_mu, k=self.k, V0=self.V,
                                  rng=self.rng, sketch=sketch)
        r_prev, self.r = self.r, len(s)
        self.steps += 1
        self.k = next_rank(r_prev if self.steps > 1 else self.r + 1, self.r,
                           min(W.shape))
        Us = U * s
        sums = _update_s_y(W, S, Y, Us, Vt, self.r, mu, self.lam * inv_mu,
                           self.mask, self.blocks, self.work)
        return (s, Us, Vt, *sums)


class _Bound:
    """The lowest feasible objective and the highest dual value seen so far.

    By weak duality every dual value is a lower bound on the optimum,
    whichever step it came from, so the certified gap is that of the best
    primal split against the best dual value, not of one step's pair.
    """

    def __init__(self):
        self.primal, self.dual, self.scale = math.inf, -math.inf, 1.0
        self.split = None  # (s, U s, V^T, S, step) of the best primal
        self.finished = False  # whether that split came from a finish

    def offer_dual(self, cert):
        if cert.dual > self.dual:
            self.dual, self.scale = cert.dual, cert.scale

    def offer_primal(self, primal, s, Us, Vt, S, step, copy=True,
                     finished=False):
        if primal < self.primal:
            self.primal, self.finished = primal, finished
            self.split = (np.array(s), Us, Vt, S.copy() if copy else S, step)

    def gap(self):
        if self.split is None or not math.isfinite(self.dual):
            return math.inf
        return relative_gap(self.primal, self.dual)

    def certificate(self):
        return GapCertificate(gap=self.gap(), primal=self.primal,
                              dual=max(self.dual, 0.0) if math.isfinite(
                                  self.dual) else 0.0, scale=self.scale)


def _worth_finishing(bound, own, gap_tol):
    """True when a finish (``_finish``) is likely to end a solve whose
    gap is still above gap_tol (a solve that has met it always gets one, so
    that the split returned is nearly feasible and its objective not
    inflated by the residual's l1 norm): the
    step's own objective ``own`` = ||L||_* + lam ||P_Omega S||_1 (of a split
    that is not quite feasible) is within half of gap_tol of the dual bound,
    so what keeps the step from the stop is its infeasibility, and a
    feasible point near ``own`` would lower the best primal by more than
    gap_tol."""
    p = bound.primal
    return (own - bound.dual <= 0.5 * gap_tol * p
            and p - own > gap_tol * p)


def _finish(ws, S, Y, mu, rho, gap_tol):
    """A feasible split near the current one: from a copy of S (and Y),
    ALM steps with mu raised by ``FINISH_FACTOR`` and then growing by rho
    each step (the schedule of Lin, Chen and Ma 2010, Algorithm 5), which
    drives the primal residual down fast while the split moves little,
    until the feasible objective p of L falls by less than
    ``FINISH_PLATEAU`` x gap_tol in a step, or ``FINISH_STEPS``. The main
    iterate and the partial SVD's state are left as they were.

    The finish keeps (S, T) rather than (S, Y): T = W + Y/mu - S is the SVT's
    argument, and Y/mu = T - W + S, so the workspace's T holds the state and
    the finish costs one m x n array, its S.

    Measured on the 576-unit Gabor matrix from step 400: p fell from
    309.5640 to 309.5551 in 16 steps, where the main iterates took 3,600
    more steps to reach 309.5564; on a 256-unit patch covariance from step
    187, from 252.1046 to 252.0967.

    Returns (p, s, U s, V^T, S, steps taken).
    """
    W, T, mask, lam = ws.W, ws.T, ws.mask, ws.lam
    S = S.copy()
    mu = mu * FINISH_FACTOR
    for b in ws.blocks:
        np.multiply(Y[b], 1.0 / mu, out=T[b])
        T[b] += W[b]
        T[b] -= S[b]
    k, V, r = ws.k, ws.V, ws.r
    tb, cb = ws.work[:2]
    p_last, steps = math.inf, 0
    while steps < FINISH_STEPS:
        U, s, Vt, V, _ = svt(T, 1.0 / mu, k=k, V0=V, rng=ws.rng)
        r, k = len(s), next_rank(r, len(s), min(W.shape))
        Us = U * s
        steps += 1
        thr, l1 = lam / mu, 0.0
        for b in ws.blocks:  # q = T - L + S; Y/mu = clip(q); S = q - Y/mu
            h = b.stop - b.start
            Lb, qb = tb[:h], cb[:h]
            if r:
                np.matmul(Us[b], Vt, out=Lb)
            else:
                Lb[...] = 0.0
            np.subtract(W[b], Lb, out=qb)  # the feasible S of this L
            np.abs(qb, out=qb)
            if mask is not None:
                qb *= mask[b]
            l1 += float(qb.sum())
            np.subtract(T[b], Lb, out=qb)
            qb += S[b]
            np.clip(qb, -thr, thr, out=Lb)  # Y/mu
            if mask is not None:
                Lb *= mask[b]
            np.subtract(qb, Lb, out=S[b])
            Lb /= rho  # the next step's T: W + Y/(rho mu) - S
            Lb += W[b]
            np.subtract(Lb, S[b], out=T[b])
        p = float(np.sum(s)) + lam * l1
        if p_last - p < FINISH_PLATEAU * gap_tol * p:
            break
        p_last, mu = p, mu * rho
    return p, s, Us, Vt, S, steps


def ialm(W, lam, *, observed=None, tol=TOL["float64"], max_iter=MAX_ITER, rho=1.5,
         init=None, rng=None, callback=None, accelerate=True, gap_tol=None,
         primal_tol=PRIMAL_TOL["float64"]):
    """Solve PCP by inexact ALM; arrays in, arrays out.

    Parameters
    ----------
    W : ndarray of shape (m, n), float
    lam : float
    observed : ndarray of bool, shape (m, n), or None
        Entries that enter the constraint; None means all.
    tol : float
        Bound on both relative residuals.
    max_iter : int
    rho : float
        Factor by which mu grows in the first phase (``next_penalty``).
    init : tuple (L, S, Y, mu) or None
        Warm start, e.g. from a neighbouring lam on a path.
    rng : numpy.random.Generator or None
        For the random part of the partial SVD's starting block.
    callback : callable or None
        Called as ``callback(iteration, primal, dual, rank, mu)`` every step.
    accelerate : bool
        Anderson acceleration in the balancing phase (``_anderson``), with a
        depth that fits ``_anderson.HISTORY_BYTES``.
    gap_tol : float or None
        None: stop only when both residuals are below ``tol``. A number: stop
        also when the primal residual is below ``primal_tol`` and the
        certified relative duality gap (``_certificate``) at most
        ``gap_tol``. The gap is checked once the residuals no longer fall
        fast (``_fast``), then every ``GAP_EVERY`` to ``GAP_SPACING`` steps
        (``_spacing``). The step with the smallest
        gap is returned; after ``GAP_STALL`` checks without a smaller one the
        solve stops, not converged.
    primal_tol : float
        The primal residual below which the gap is checked.

    Returns
    -------
    L, S, Y : ndarray of shape (m, n)
    info : dict
        ``n_iter`` (steps run), ``step`` (the step whose split is returned:
        the last, or the best certified one under ``gap_tol``), ``history``
        (one row ``(primal, dual, rank, mu)`` per step up to ``step``),
        ``converged``, ``stopped_by`` (``"residuals"``, ``"gap"``,
        ``"stalled"`` or ``"max_iter"``), ``mu`` of the returned step (to
        warm-start a neighbour), ``singular_values`` of the returned L, and
        ``certificate``, its :class:`~._certificate.GapCertificate`.
    """
    m, n = W.shape
    dtype = W.dtype
    if rng is None:
        rng = np.random.default_rng(0)
    W, mask = _apply_mask(W, observed)
    norm_W = float(np.linalg.norm(W))
    if norm_W == 0.0:
        zero = np.zeros_like(W)
        return zero, zero.copy(), zero.copy(), {
            "n_iter": 0, "converged": True, "history": [], "mu": 0.0,
            "step": 0, "stopped_by": "residuals",
            "singular_values": np.zeros(0),
            "certificate": GapCertificate(gap=0.0, primal=0.0, dual=0.0,
                                          scale=1.0),
            "acceleration": {"depth": 0, "restarts": 0}}
    S, Y, mu = _start(W, init)
    top = max_abs(W)  # W is zero off Omega: the max over Omega
    mu_max = mu * _MU_MAX_FACTOR
    ws = _Workspace(W, mask, lam, rng)
    s = Us = Vt = None
    history = []
    converged = False
    polishing = False  # phase 2: balance the residuals instead of growing mu
    depth = depth_for(W.size, W.itemsize) if accelerate else 0
    accel = Anderson(depth) if depth else None
    q = None  # the accelerated point S + Y/mu (phase 2 only)
    it = extra = 0  # main steps, and steps of finishes
    cert, stopped_by, checked = None, "max_iter", -1
    due, since = 0, 0  # the next check; checks without a smaller gap
    bound = _Bound()
    for it in range(1, max_iter + 1):
        if q is None and polishing and accel is not None:
            q = S + Y / mu  # the map's point: accelerate from here
        s, Us, Vt, dS2, dY2, Y2 = ws.step(S, Y, mu)
        mu_was = mu
        converged, mu, polishing = end_step(
            history, callback, it, len(s), mu, polishing, np.sqrt(dY2),
            np.sqrt(dS2), np.sqrt(Y2), norm_W, tol=tol, rho=rho, mu_max=mu_max)
        if converged:
            stopped_by = "residuals"
            break
        if (gap_tol is not None and history[-1][0] < primal_tol
                and it >= due and not _fast(history)
                and not _fits(s, S, top, mask, dtype)):
            was, checked = bound.gap(), it
            cert = _certify(W, lam, s, Us, Vt, Y, ws.T, mu_was, observed,
                            ws.blocks)
            bound.offer_dual(cert)
            bound.offer_primal(cert.primal, s, Us, Vt, S, it)
            if (bound.gap() <= gap_tol and not bound.finished) or (
                    bound.gap() > gap_tol and _worth_finishing(
                        bound, float(np.sum(s)) + lam * sum_abs(S, observed),
                        gap_tol)):
                done = _finish(ws, S, Y, mu_was, rho, gap_tol)
                extra += done[-1]
                bound.offer_primal(*done[:5], it, copy=False, finished=True)
            since = 0 if bound.gap() < was else since + 1
            due = it + _spacing(it, bound.gap(), gap_tol)
            converged = bound.gap() <= gap_tol
            if converged or since >= GAP_STALL:
                stopped_by = "gap" if converged else "stalled"
                break
        if q is not None:
            q = _accelerate(accel, q, S, Y, mu_was, mu, lam, mask)
    step = it  # the step whose split is returned
    if stopped_by == "residuals":  # Y is near-feasible: Y alone
        cert = _certify(W, lam, s, Us, Vt, Y, ws.T, mu_was, observed,
                        ws.blocks, all_candidates=False)
    else:
        if checked != it:  # the last step is a candidate too
            last = _certify(W, lam, s, Us, Vt, Y, ws.T, mu_was, observed,
                            ws.blocks)
            bound.offer_dual(last)
            bound.offer_primal(last.primal, s, Us, Vt, S, it, copy=False)
        cert = bound.certificate()
        s, Us, Vt, S, step = bound.split
    r = len(s)
    del ws, bound  # the work arrays go before L arrives
    L = (Us @ Vt).astype(dtype, copy=False) if r else np.zeros_like(W)
    return L, S, Y, {"n_iter": it + extra, "converged": converged,
                     "history": history[:step], "step": step,
                     "stopped_by": stopped_by, "mu": mu,
                     "finish_steps": extra,
                     "singular_values": np.array(s), "certificate": cert,
                     "acceleration": {"depth": depth, "restarts":
                                      accel.restarts if accel else 0}}
