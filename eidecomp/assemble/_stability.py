"""The stability guard: a stable W gives a circuit stable at the default
time constants (docs/assembly.md, "Stability guard"; a rule of this
project).

The refinement fits W_eff = J_EE - J_EI J_IE to W and knows nothing of
time. Where W sits close to the edge of stability (partial correlations of
photograph patches: the rightmost eigenvalue of W at 0.9998), the fit's
error moves the rightmost eigenvalue of W_eff past 1, and the inflated
excitation that inhibition balances (J_EE's Perron root near 5) makes the
loops through slow interneurons grow. The guard then solves

    min  0.5 ||W - J_EE + J_EI J_IE||_F^2 / ||W||_F^2
         + mu / 2 sum_k max(Re lambda_k + m, 0)^2,     all blocks >= 0,

where lambda_k are the eigenvalues of the circuit's Jacobian T^-1 (-I +
W_full) at tau_E = params.TAU_E_MS and tau_I = params.TAU_I_MS, and m =
STABILITY_MARGIN / tau_E the margin its penalty keeps. It starts from the
refinement run again with J_EE at most W's positive side (whose loops
through the interneurons are weaker) and keeps the supports of that start
(J_EE where it is nonzero, the tuned pools as fitted). It raises mu
through GUARD_PENALTIES until the rightmost eigenvalue is left of 0, with
scipy's L-BFGS-B; the gradient of Re lambda_k is the first-order
perturbation formula Re(u_k^H T^-1 dW_full v_k) / (u_k^H v_k), with u_k and
v_k the left and right eigenvectors (Wilkinson 1965, The Algebraic
Eigenvalue Problem, ch. 2; from memory). The guard trades error for
stability, and the report states both before and after.

Every evaluation solves a dense eigenproblem with left and right vectors,
so the guard runs up to GUARD_MAX_UNITS units (E and I); above, it does not
run, and the stability line says why the circuit is unstable
(dynamics.instability_line).
"""

import dataclasses

import numpy as np
from scipy import linalg
from scipy.optimize import minimize

from ..params import MARGINAL_ABSCISSA, STABILITY_MARGIN, TAU_E_MS, TAU_I_MS
from ..types import GuardResult
from ._support import apply_floor

GUARD_MAX_UNITS = 700
"""Largest circuit (E units and interneurons) the guard runs on: each
evaluation is a dense eigenproblem with both eigenvector sets (0.13 s at
500 units and 0.3 s at 661 on one core, more threads no faster), and the
guard takes hundreds of them: about 3 minutes at 661 units, on partial
correlations of 23x23 photograph patches (docs/assembly.md)."""

GUARD_REFINED_START_MAX_UNITS = 200
"""Largest circuit (E units and interneurons) on which the guard also runs
from the refined circuit itself; larger ones run from the capped start
alone. Measured on partial correlations of photograph patches, 4:1
(docs/assembly.md, "Stability guard"): the refined start ended stable with
the smaller error on 6x6 to 10x10 patches (45 to 125 units), lost at 12x12
(180 units) and did not end stable from 14x14 (245 units) on, where it
cost half the guard's time."""

GUARD_PENALTIES = (1e2, 1e4, 1e6)
"""The penalty weights mu, tried in turn until the circuit is stable."""

GUARD_MAX_ITER = 2000
"""L-BFGS-B iterations at each penalty weight."""


def _taus(n, n_i, tau_e, tau_i):
    return np.r_[np.full(n, float(tau_e)), np.full(n_i, float(tau_i))]


def full_signed(J_EE, A, B, w_scale=1.0):
    """The circuit's signed matrix W_full[post, pre] in W's units, from the
    blocks in units of max|W| (J_EE times ``w_scale``, A and B times its
    square root, as the assembler scales them back)."""
    n, n_i = A.shape
    root = np.sqrt(w_scale)
    M = np.zeros((n + n_i, n + n_i))
    M[:n, :n] = J_EE * w_scale
    M[:n, n:] = -A * root
    M[n:, :n] = B * root
    return M


def abscissa(J_EE, A, B, w_scale=1.0, tau_e=TAU_E_MS, tau_i=TAU_I_MS):
    """The rightmost real part of the eigenvalues of T^-1 (-I + W_full),
    per ms (dense).

    >>> abscissa(np.zeros((1, 1)), np.ones((1, 1)), np.ones((1, 1)),
    ...          tau_e=1.0, tau_i=1.0)
    -1.0
    """
    M = full_signed(J_EE, A, B, w_scale)
    tau = _taus(*A.shape, tau_e, tau_i)
    J = (M - np.eye(M.shape[0])) / tau[:, None]
    return float(np.linalg.eigvals(J).real.max())


def penalty_gradient(M, tau, margin):
    """(penalty, gradient, abscissa) of 0.5 sum_k max(Re lambda_k + margin,
    0)^2 over the eigenvalues of T^-1 (-I + M), the gradient taken with
    respect to M by first-order perturbation (module docstring)."""
    J = (M - np.eye(M.shape[0])) / tau[:, None]
    lam, left, right = linalg.eig(J, left=True, right=True)
    excess = lam.real + margin
    k = np.flatnonzero(excess > 0)
    u, v = np.conj(left[:, k]), right[:, k]
    weight = excess[k] / np.einsum("ik,ik->k", u, v)   # excess_k / u_k^H v_k
    G = np.real((u / tau[:, None] * weight) @ v.T)       # sum over k, one product
    hit = np.maximum(excess, 0.0)
    return 0.5 * float(hit @ hit), G, float(lam.real.max())


def guard(W, J_EE, A, B, mask_a, mask_b, *, w_scale, margin,
          tau_e=TAU_E_MS, tau_i=TAU_I_MS):
    """Run the guard on the refined blocks (units of max|W|; W likewise),
    J_EE kept on its support and A, B on ``mask_a``, ``mask_b``. Returns
    new (J_EE, A, B) and a :class:`GuardResult`; the inputs are not
    changed."""
    n, n_i = A.shape
    tau = _taus(n, n_i, tau_e, tau_i)
    root = np.sqrt(w_scale)
    where = (np.flatnonzero(J_EE > 0), np.flatnonzero(mask_a),
             np.flatnonzero(mask_b))
    sizes = np.cumsum([w.size for w in where])
    norm = max(float(np.vdot(W, W)), 1e-300)

    def blocks(x):
        out = (np.zeros((n, n)), np.zeros((n, n_i)), np.zeros((n_i, n)))
        for block, w, lo, hi in zip(out, where, (0, *sizes[:2]), sizes, strict=True):
            block.flat[w] = x[lo:hi]
        return out

    count = [0]

    def value_and_gradient(x, mu):
        count[0] += 1
        E, Af, Bf = blocks(x)
        R = W - E + Af @ Bf
        p, G, _ = penalty_gradient(full_signed(E, Af, Bf, w_scale), tau, margin)
        gE = -R / norm + mu * w_scale * G[:n, :n]
        gA = R @ Bf.T / norm - mu * root * G[:n, n:]
        gB = Af.T @ R / norm + mu * root * G[n:, :n]
        grad = np.concatenate([g.flat[w] for g, w
                               in zip((gE, gA, gB), where, strict=True)])
        return 0.5 * float(np.vdot(R, R)) / norm + mu * p, grad

    x = np.concatenate([blk.flat[w] for blk, w
                        in zip((J_EE, A, B), where, strict=True)])
    before = abscissa(J_EE, A, B, w_scale, tau_e, tau_i)
    for mu in GUARD_PENALTIES:
        x = minimize(value_and_gradient, x, args=(mu,), jac=True,
                     method="L-BFGS-B", bounds=[(0.0, None)] * x.size,
                     options={"maxiter": GUARD_MAX_ITER, "ftol": 1e-12}).x
        E, Af, Bf = blocks(x)
        apply_floor(E, Af, Bf)          # as the refinement ends
        after = abscissa(E, Af, Bf, w_scale, tau_e, tau_i)
        if after < 0:
            break
    nw = np.sqrt(norm)
    result = GuardResult(
        error_before=float(np.linalg.norm(W - J_EE + A @ B) / nw),
        error_after=float(np.linalg.norm(W - E + Af @ Bf) / nw),
        abscissa_before=before, abscissa_after=after, stable=after < 0,
        evaluations=count[0])
    return E, Af, Bf, result


def guard_margin(tau_e=TAU_E_MS):
    """The margin m (per ms) the guard's penalty keeps: STABILITY_MARGIN /
    tau_E, so that the soft penalty leaves the rightmost eigenvalue left of
    0.

    >>> guard_margin(tau_e=10.0)
    0.001
    """
    return STABILITY_MARGIN / tau_e


def guarded(W, J_EE, A, B, mask_a, mask_b, *, w_scale, start, tell=None):
    """The guard where it applies: W (units of max|W|, times ``w_scale`` in
    its own) stable, the refined circuit not stable at the default time
    constants, and at most GUARD_MAX_UNITS units in all. It runs from two
    starts and keeps the stable end with the smaller error (neither stable:
    the refined circuit is kept, and the result says so): the refined
    circuit itself (up to GUARD_REFINED_START_MAX_UNITS units), and
    ``start()``, the
    refinement with J_EE at most W's positive side, whose loops through the
    interneurons are weaker (the refined circuit ends closer where it is
    nearly stable; the capped start ends stable where it is far from it:
    docs/assembly.md). Returns (J_EE, A, B, GuardResult or None), the
    blocks unchanged with None; the result's "before" figures are the
    refined circuit's."""
    n, n_i = A.shape
    if n + n_i > GUARD_MAX_UNITS or not B.any():
        return J_EE, A, B, None
    w_abscissa = w_scale * float(np.linalg.eigvals(W).real.max()) - 1.0
    before = abscissa(J_EE, A, B, w_scale)
    if not w_abscissa < -MARGINAL_ABSCISSA or before < 0:
        return J_EE, A, B, None
    error = float(np.linalg.norm(W - J_EE + A @ B)
                  / max(np.linalg.norm(W), 1e-300))
    best, evaluations = None, 0
    starts = (("from the refined circuit", lambda: (J_EE, A, B)),
              ("from J_EE at most W's positive side", start))
    if n + n_i > GUARD_REFINED_START_MAX_UNITS:
        starts = starts[1:]
    for name, blocks in starts:
        if tell is not None:
            tell(f"stability guard {name}")
        out = guard(W, *blocks(), mask_a, mask_b, w_scale=w_scale,
                    margin=guard_margin())
        evaluations += out[3].evaluations
        if out[3].stable and (best is None
                              or out[3].error_after < best[3].error_after):
            best = out
    if best is None:      # neither start ended stable: the closest fit stays
        return J_EE, A, B, GuardResult(error, error, before, before, False,
                                       evaluations)
    J, Af, Bf, result = best
    return J, Af, Bf, dataclasses.replace(
        result, error_before=error, abscissa_before=before,
        evaluations=evaluations)
