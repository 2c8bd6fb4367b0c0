"""Rate dynamics of a circuit: fixed points, Jacobian, stability, simulation.

The model (all blocks nonnegative, signs by Dale's law, units ordered E, I):

    tau_E dr_E/dt = -r_E + f(J_EE r_E - J_EI r_I + h)
    tau_I dr_I/dt = -r_I + J_IE r_E

with f the identity (linear) or max(., 0) (threshold-linear excitatory
units); interneurons are linear and get no external drive. In matrix form
tau dr/dt = -r + f(W_full r + H) with W_full = [[J_EE, -J_EI], [J_IE, 0]].

* The linear fixed point is r* = (I - W_full)^-1 H, whatever the time
  constants; its E part is (I - W_eff)^-1 h with W_eff = J_EE - J_EI J_IE,
  and det(I - W_full) = det(I - W_eff) (Schur complement).
* Stability does depend on them: the Jacobian is T^-1 (-I + W_full),
  T = diag(tau). Slow interneurons can destabilise a circuit whose original
  network, dr/dt = -r + W r, is stable.
* With threshold-linear E units the same holds for every fixed point: the
  interneurons' input J_IE r_E is >= 0 because J_IE >= 0 and r_E >= 0, so
  r_I = J_IE r_E at steady state and the E units see W_eff exactly.

* Stability at any size: the spectral abscissa (largest real part of the
  spectrum) is numpy.linalg.eigvals' up to :data:`DENSE_MAX_UNITS` units
  and ARPACK's (scipy.sparse.linalg.eigs, which='LR') above, on the
  Jacobian as a LinearOperator built from the blocks; the largest stable
  tau_I / tau_E is bisected on it. Scaling W by a gain g scales the
  eigenvalues of W, so -I + g W is stable iff g max Re eig(W) < 1.

Every function takes arrays or a Circuit; simulation integrates with
``scipy.integrate.solve_ivp``.
"""

import math

import numpy as np
from scipy.integrate import solve_ivp

from .errors import InputError
from .params import SETTLE_TIME_CONSTANTS, STABILITY_SCAN
from .types import BLOCK_NAMES, II_BLOCK_NAMES

__all__ = ["DENSE_MAX_UNITS", "DIVERGED", "MAX_EVALUATIONS", "EIGEN_METHODS",
           "UnsettledRun", "circuit_abscissa",
           "effective_from_full", "fixed_point", "full_matrix", "jacobian",
           "jacobian_operator", "largest_stable_circuit_gain",
           "largest_stable_gain", "max_stable_tau_ratio",
           "scaled_circuit", "simulate", "spectral_abscissa",
           "stability_summary"]


def full_matrix(circuit):
    """W_full[post, pre] of a Circuit (E first), or the array itself."""
    if hasattr(circuit, "signed_weights"):
        return circuit.signed_weights(), circuit.n_excitatory
    raise TypeError("expected a Circuit")


def effective_from_full(W_full, n_e):
    """E-to-E coupling with the interneurons at steady state.

    W_eff = W_EE + W_EI (I - W_II)^-1 W_IE on the signed blocks, i.e.
    J_EE - J_EI (I + J_II)^-1 J_IE in magnitudes.
    """
    W_full = np.asarray(W_full, dtype=float)
    EE, EI = W_full[:n_e, :n_e], W_full[:n_e, n_e:]
    IE, II = W_full[n_e:, :n_e], W_full[n_e:, n_e:]
    if EI.shape[1] == 0:
        return EE.copy()
    return EE + EI @ np.linalg.solve(np.eye(II.shape[0]) - II, IE)


def fixed_point(W, h):
    """r* = (I - W)^-1 h for a signed matrix W (original or full)."""
    W = np.asarray(W, dtype=float)
    return np.linalg.solve(np.eye(W.shape[0]) - W, np.asarray(h, dtype=float))


def _taus(n_total, n_e, tau_e, tau_i):
    if not (tau_e > 0 and tau_i > 0):
        raise InputError(f"time constants must be positive, got tau_E={tau_e}, "
                         f"tau_I={tau_i}")
    tau = np.full(n_total, float(tau_i))
    tau[:n_e] = tau_e
    return tau


def jacobian(W_full, n_e, tau_e=1.0, tau_i=1.0):
    """T^-1 (-I + W_full) of the linear dynamics."""
    tau = _taus(W_full.shape[0], n_e, tau_e, tau_i)
    return (np.asarray(W_full, float) - np.eye(W_full.shape[0])) / tau[:, None]


# --- the rightmost eigenvalue: dense when cheap, ARPACK on an operator --------

DENSE_MAX_UNITS = 500
"""Up to this many units the spectral abscissa is numpy.linalg.eigvals'
(a dense eigenproblem of 500 x 500 takes about 0.1 s); above it, ARPACK's
(scipy.sparse.linalg.eigs, which='LR') on a linear operator."""

DENSE_FALLBACK_UNITS = 3000  # ARPACK failed: dense up to this size, else warn
_ARPACK_TOL = 1e-10
_ARPACK_TRIES = ((6, 30, 30), (12, 60, 300), (24, 120, 600))
"""(Ritz values k, Krylov basis ncv, restarts) of each ARPACK try. The
first is cheap and enough where the rightmost eigenvalue stands out of the
bulk (planted circuits: 90-300 products); a rightmost eigenvalue on the
rim of a dense disc (random matrices) needs the larger basis, with which it
converges 3-6 times faster than with a small one. k >= 2 keeps both members
of a complex pair."""
_SPARSE_BELOW = 0.25  # a block denser than this is multiplied as an array


def _operand(M):
    """A block as it is multiplied fastest: CSR when sparse enough."""
    from scipy import sparse

    if sparse.issparse(M):
        return sparse.csr_array(M, dtype=float)
    M = np.asarray(M, dtype=float)
    if M.size and np.count_nonzero(M) < _SPARSE_BELOW * M.size:
        return sparse.csr_array(M)
    return M


def _circuit_blocks(circuit):
    blocks = (_operand(circuit.J_EE), _operand(circuit.J_EI),
              _operand(circuit.J_IE))
    if circuit.J_II.any():                 # a circuit of W's own neurons
        blocks += (_operand(circuit.J_II),)
    return blocks


def _operator(blocks, tau_e, tau_i):
    from scipy.sparse.linalg import LinearOperator

    EE, EI, IE = blocks[:3]
    II = blocks[3] if len(blocks) > 3 else None
    n, m = EE.shape[0], EI.shape[1]
    _taus(1, 1, tau_e, tau_i)  # checks both

    def apply(x):
        xe, xi = x[:n], x[n:]
        ye = EE @ xe - xe
        if m:
            ye = ye - EI @ xi
        yi = IE @ xe - xi
        if II is not None:
            yi = yi - II @ xi
        return np.concatenate([ye / tau_e, yi / tau_i])

    return LinearOperator((n + m, n + m), matvec=apply, matmat=apply, dtype=float)


def jacobian_operator(J_EE, J_EI, J_IE, *, tau_e=1.0, tau_i=1.0):
    """The Jacobian T^-1 (-I + W_full) as a scipy LinearOperator.

    Built from the blocks (magnitudes, Dale's law gives the signs), never
    forming the (N + n_I)^2 matrix: a product costs one pass over J_EE,
    J_EI and J_IE, each held as a CSR matrix when less than a quarter of
    its entries are nonzero.

    Parameters
    ----------
    J_EE : array or sparse (N, N)
    J_EI : array or sparse (N, n_I)
    J_IE : array or sparse (n_I, N)
    tau_e, tau_i : float
        Time constants of the E units and of the interneurons.

    Returns
    -------
    scipy.sparse.linalg.LinearOperator of shape (N + n_I, N + n_I)

    Examples
    --------
    >>> import numpy as np
    >>> A = jacobian_operator(np.array([[2.0]]), np.array([[1.0]]),
    ...                       np.array([[2.0]]), tau_i=0.5)
    >>> A @ np.eye(2)
    array([[ 1., -1.],
           [ 4., -2.]])
    """
    blocks = tuple(_operand(M) for M in (J_EE, J_EI, J_IE))
    n, m = blocks[0].shape[0], blocks[1].shape[1]
    if blocks[0].shape != (n, n) or blocks[1].shape != (n, m) \
            or blocks[2].shape != (m, n):
        raise InputError(f"block shapes J_EE {blocks[0].shape}, J_EI "
                         f"{blocks[1].shape}, J_IE {blocks[2].shape} do not fit")
    return _operator(blocks, tau_e, tau_i)


def _dense(A):
    if isinstance(A, np.ndarray):
        return A
    if hasattr(A, "toarray"):
        return A.toarray()
    return A @ np.eye(A.shape[1])


def _eigs_try(A, v0, k, ncv, maxiter):
    """One ARPACK run: (the rightmost eigenvalue's real part or None, the
    eigenvalues that converged)."""
    from scipy.sparse.linalg import ArpackNoConvergence, eigs

    n = A.shape[0]
    k = min(k, n - 2)
    try:
        vals = eigs(A, k=k, which="LR", v0=v0, tol=_ARPACK_TOL,
                    ncv=min(n, max(ncv, 2 * k + 1)), maxiter=maxiter,
                    return_eigenvectors=False)
    except ArpackNoConvergence as exc:
        return None, exc.eigenvalues
    return float(np.max(vals.real)), vals


def _abscissa_arpack(A, seed):
    """ARPACK's rightmost eigenvalue, retried with larger bases; then dense
    (small enough) or a warning and the best converged value."""
    import warnings

    from .errors import SolverFallbackWarning, warn_stopped

    n = A.shape[0]
    v0 = np.random.default_rng(seed).standard_normal(n)
    partial = np.empty(0)
    for k, ncv, maxiter in _ARPACK_TRIES:
        found, partial = _eigs_try(A, v0, k, ncv, maxiter)
        if found is not None:
            return found
    if n <= DENSE_FALLBACK_UNITS:
        warnings.warn(f"ARPACK did not converge on the {n}-unit spectral "
                      "abscissa; solved it densely (numpy.linalg.eigvals)",
                      SolverFallbackWarning, stacklevel=4)
        return _abscissa_dense(A)
    warn_stopped("ARPACK (spectral abscissa)",
                 sum(t[2] for t in _ARPACK_TRIES), unit="restarts",
                 detail=f"{len(partial)} eigenvalues converged",
                 advice="the value is a lower bound", stacklevel=4)
    return float(np.max(partial.real)) if len(partial) else float("nan")


def _abscissa_dense(A):
    return float(np.max(np.linalg.eigvals(_dense(A)).real))


EIGEN_METHODS = ("auto", "dense", "arpack")
"""How :func:`spectral_abscissa` solves: auto picks dense up to
:data:`DENSE_MAX_UNITS` units and ARPACK above."""


def _abscissa(A, method="auto", seed=0):
    """The spectral abscissa of an array, sparse matrix or operator."""
    if method not in EIGEN_METHODS:
        raise InputError(f"unknown eigenvalue method {method!r} (choose from "
                         f"{', '.join(EIGEN_METHODS)})")
    n = A.shape[0]
    if n == 0:
        return -np.inf
    if method == "dense" or (method == "auto" and n <= DENSE_MAX_UNITS) \
            or n <= 2 * _ARPACK_TRIES[0][0]:
        return _abscissa_dense(A)
    if isinstance(A, np.ndarray):
        A = _operand(A)
    return _abscissa_arpack(A, seed)


def spectral_abscissa(A, *, method="auto", seed=0):
    """Largest real part of the eigenvalues of A.

    Parameters
    ----------
    A : ndarray, scipy sparse matrix or LinearOperator (n, n)
    method : "auto", "dense" or "arpack"
        dense: numpy.linalg.eigvals of the whole matrix; arpack: the
        rightmost of the eigenvalues with largest real part found by
        scipy.sparse.linalg.eigs (which='LR', tol 1e-10): 6 of them in a
        Krylov basis of 30, and if that does not converge within 30
        restarts, 12 in 60, then 24 in 120 (:data:`_ARPACK_TRIES`); if none
        converges, dense up to 3000 units (SolverFallbackWarning), else a
        ConvergenceWarning and the largest converged value (a lower bound;
        nan if none); auto: dense up to :data:`DENSE_MAX_UNITS` units,
        ARPACK above. Matrices of 12 units or fewer are always dense.
    seed : int
        Seed of ARPACK's start vector (numpy Generator).

    Returns
    -------
    float (-inf for an empty matrix)

    Examples
    --------
    >>> import numpy as np
    >>> spectral_abscissa(np.array([[-1.0, 5.0], [0.0, -2.0]]))
    -1.0
    """
    return _abscissa(A, method, seed)


def _crossing(growth, a, b, rtol):
    """Shrink [a, b] (growth(a) < 0 <= growth(b)) to a factor 1 + rtol:
    Brent's method on log(ratio) (scipy.optimize.brentq, bisection
    safeguarded by interpolation), then plain bisection on the bracket of
    the ratios it tried, if that is still wider; returns the stable end."""
    from scipy.optimize import brentq

    seen, ends = {}, {np.log(a): a, np.log(b): b}  # the ends: solved already

    def f(log_t):
        t = ends.get(log_t) or float(np.exp(log_t))
        seen[t] = growth(t)
        return seen[t]

    try:
        brentq(f, *ends, xtol=0.49 * np.log1p(rtol))
    except (ValueError, RuntimeError):  # a nan abscissa: bisection below
        pass
    a = max([t for t, g in seen.items() if g < 0 and t < b] + [a])
    b = min([t for t, g in seen.items() if g >= 0 and t > a] + [b])
    while b / a - 1 > rtol:
        mid = float(np.sqrt(a * b))
        a, b = (mid, b) if growth(mid) < 0 else (a, mid)
    return float(a)


def max_stable_tau_ratio(circuit, *, lo=STABILITY_SCAN.lo,
                         hi=STABILITY_SCAN.hi, n_grid=STABILITY_SCAN.n_grid,
                         rtol=STABILITY_SCAN.rtol, method="auto", seed=0):
    """Largest tau_I / tau_E up to which the linear circuit stays stable.

    Checks ``n_grid`` ratios spaced evenly in log from ``lo`` to ``hi``,
    smallest first, until one is unstable, then narrows the crossing
    between it and the last stable one to a factor 1 + ``rtol`` by
    bracketed root finding on the spectral abscissa (Brent's method, whose
    worst case is bisection). Each check is the spectral abscissa of the
    Jacobian as an operator (:func:`jacobian_operator`;
    :func:`spectral_abscissa` with ``method`` and ``seed``). Returns
    ``inf`` if every ratio checked is stable, and 0.0 if the smallest is
    already unstable (then the original network is itself unstable: the
    ratio does not matter as tau_I -> 0, where the circuit's Jacobian tends
    to that of W_eff). A window of instability between two stable grid
    ratios is not seen.

    >>> import numpy as np
    >>> from eidecomp.types import Circuit
    >>> c = Circuit(J_EE=np.array([[0.5]]), J_EU=np.array([[1.0]]),
    ...             J_UE=np.array([[1.0]]), J_ET=np.zeros((1, 0)),
    ...             J_TE=np.zeros((0, 1)))
    >>> max_stable_tau_ratio(c)    # trace and determinant stay stable
    inf
    """
    return _stable_ratio(circuit, lo, hi, n_grid, rtol, method, seed, {})


def _stable_ratio(circuit, lo, hi, n_grid, rtol, method, seed, known):
    """max_stable_tau_ratio, with ``known``: ratio -> abscissa already
    solved (filled in as it goes)."""
    if not (0 < lo < hi < np.inf and n_grid >= 2 and rtol > 0):
        raise InputError(f"the tau ratio scan needs 0 < lo < hi, n_grid >= 2 "
                         f"and rtol > 0, got lo={lo}, hi={hi}, n_grid={n_grid}, "
                         f"rtol={rtol}")
    blocks = _circuit_blocks(circuit)

    def growth(ratio):
        if ratio not in known:
            known[ratio] = _abscissa(_operator(blocks, 1.0, ratio), method, seed)
        return known[ratio]

    grid = [float(x) for x in 10.0 ** np.linspace(np.log10(lo), np.log10(hi),
                                                   n_grid)]
    if not growth(grid[0]) < 0:
        return 0.0
    j = next((j for j in range(1, n_grid) if not growth(grid[j]) < 0), None)
    if j is None:
        return float("inf")
    return _crossing(growth, grid[j - 1], grid[j], rtol)


def circuit_abscissa(circuit, *, tau_e=1.0, tau_i=1.0, method="auto", seed=0):
    """Spectral abscissa of a Circuit's linear dynamics (per unit time of
    the taus), from its Jacobian operator.

    >>> import numpy as np
    >>> from eidecomp.types import Circuit
    >>> c = Circuit(J_EE=np.array([[0.5]]), J_EU=np.array([[1.0]]),
    ...             J_UE=np.array([[1.0]]), J_ET=np.zeros((1, 0)),
    ...             J_TE=np.zeros((0, 1)))
    >>> circuit_abscissa(c)    # eigenvalues -0.75 +- i 0.97
    -0.75
    """
    op = _operator(_circuit_blocks(circuit), tau_e, tau_i)
    return _abscissa(op, method, seed)


DIVERGED = 1e100  # rates beyond this magnitude end a run: it has diverged
MAX_EVALUATIONS = 1_000_000  # right-hand sides one run may evaluate


class UnsettledRun(InputError):
    """A run whose rates never settled within ``max_evaluations`` steps of
    the integrator: ``t`` reached of ``t_max`` (the words are the caller's)."""

    def __init__(self, t, t_max, evaluations):
        super().__init__(f"the rates had not settled at {t:.4g} of {t_max:g} "
                         f"time units after {evaluations:,} steps of the "
                         "integrator (an unstable circuit)")
        self.t, self.t_max, self.evaluations = t, t_max, evaluations


def simulate(W_full, h, *, n_e=None, tau_e=1.0, tau_i=1.0, t_max=None,
             nonlinearity="linear", r0=None, rtol=1e-10, atol=1e-12,
             t_eval=None, max_evaluations=MAX_EVALUATIONS, rectified=None,
             tau=None):
    """Integrate tau dr/dt = -r + f(W_full r + H) with solve_ivp (LSODA).

    Parameters
    ----------
    W_full : ndarray (n, n)
        Signed full matrix; for the original network pass W and n_e=None.
    h : ndarray (n_e,) or (n,)
        External drive of the E units (interneurons get none), or of every
        unit (Circuit.full_drive).
    n_e : int or None
        Number of E units (the first n_e); None means all units are E.
    tau_e, tau_i : float
    tau : ndarray (n,) or None
        Every unit's time constant, in place of tau_e and tau_i.
    t_max : float or None
        End time; None integrates for
        :data:`~eidecomp.params.SETTLE_TIME_CONSTANTS` times the slowest
        decay time of the linearisation.
    nonlinearity : "linear" or "relu"
        f for the E units; interneurons are linear (unless ``rectified``).
    rectified : int or None
        With "relu", how many leading units are rectified (None: the E
        units; all of them for a circuit of W's own neurons, whose
        interneurons are W's units as well).
    t_eval : sequence of float or None
        Times to return; None returns every step the integrator took
        (memory grows with the steps: callers that need the end state pass
        ``(t_max,)``).
    max_evaluations : int
        A run that needs more evaluations of the right-hand side (a circuit
        whose rates never settle makes LSODA's steps collapse) stops with
        :class:`UnsettledRun`, rather than running on for hours.

    Returns
    -------
    t : ndarray, r : ndarray (n, len(t))
        A run whose rates pass :data:`DIVERGED` in magnitude stops there;
        its last column is then that state.
    """
    W_full = np.asarray(W_full, dtype=float)
    n = W_full.shape[0]
    n_e = n if n_e is None else int(n_e)
    h = np.asarray(h, dtype=float)
    H = np.zeros(n)
    if h.shape == (n,):
        H[:] = h
    else:
        H[:n_e] = h
    tau = (_taus(n, n_e, tau_e, tau_i) if tau is None
           else np.asarray(tau, dtype=float))
    if nonlinearity not in ("linear", "relu"):
        raise InputError(f"unknown nonlinearity {nonlinearity!r}")
    relu = nonlinearity == "relu"
    n_rect = n_e if rectified is None else int(rectified)
    if t_max is None:
        a = spectral_abscissa((W_full - np.eye(n)) / tau[:, None])
        if not a < 0:
            raise InputError("the linear dynamics are not stable (spectral "
                             f"abscissa {a:.3g}); give t_max explicitly")
        t_max = SETTLE_TIME_CONSTANTS / -a

    count = [0]

    def rhs(t, r):
        count[0] += 1
        if count[0] > max_evaluations:
            raise UnsettledRun(t, t_max, max_evaluations)
        drive = W_full @ r + H
        if relu:
            drive[:n_rect] = np.maximum(drive[:n_rect], 0.0)
        return (drive - r) / tau

    r0 = np.zeros(n) if r0 is None else np.asarray(r0, float)
    J = (W_full - np.eye(n)) / tau[:, None]
    def diverged(_, r):
        return DIVERGED - np.max(np.abs(r))

    diverged.terminal = True
    sol = solve_ivp(rhs, (0.0, t_max), r0, method="LSODA", rtol=rtol, atol=atol,
                    jac=None if relu else (lambda _, __: J), events=diverged,
                    t_eval=t_eval)
    if not sol.success:
        raise RuntimeError(f"solve_ivp failed: {sol.message}")
    if sol.status == 1:               # the divergence event ended the run
        return (np.r_[sol.t, sol.t_events[0]],
                np.hstack([np.reshape(sol.y, (n, -1)), sol.y_events[0].T]))
    return sol.t, sol.y


# --- summaries the jobs record ---------------------------------------------------



def _method_name(n):
    return ("numpy.linalg.eigvals" if n <= DENSE_MAX_UNITS
            else "ARPACK (scipy.sparse.linalg.eigs, which='LR')")


def stability_summary(circuit, W, *, tau_ratio=None):
    """What circuit.json records of stability: the spectral abscissa of the
    original network (-I + W), of the circuit's W_eff (-I + W_eff) and of
    the circuit at equal time constants, and the largest stable tau_I /
    tau_E over :data:`STABILITY_SCAN` (None: stable over the whole range),
    at any size: dense eigenvalues up to :data:`DENSE_MAX_UNITS` units,
    ARPACK on the Jacobian operator above. With ``tau_ratio`` (the
    default tau_I / tau_E the commands use), ``why`` is one line on a
    stable W whose circuit is unstable there (:func:`instability_line`),
    else None. A circuit of W's own neurons gets no scan: its stability at
    the default ratio is recorded instead (``own_neurons``).

    >>> import numpy as np
    >>> from eidecomp.types import Circuit
    >>> c = Circuit(J_EE=np.array([[0.5]]), J_EU=np.array([[1.0]]),
    ...             J_UE=np.array([[1.0]]), J_ET=np.zeros((1, 0)),
    ...             J_TE=np.zeros((0, 1)))
    >>> s = stability_summary(c, c.effective_weights())
    >>> s["original_spectral_abscissa"], s["max_stable_tau_ratio"]
    (-1.5, None)
    """
    lo, hi, n_grid, rtol = STABILITY_SCAN
    a_orig = spectral_abscissa(np.asarray(W, dtype=float)) - 1.0
    if circuit.own_neurons:
        return _own_stability(circuit, W, a_orig, tau_ratio)
    known = {1.0: circuit_abscissa(circuit)}  # equal taus: on the scan's grid
    ratio = _stable_ratio(circuit, lo, hi, n_grid, rtol, "auto", 0, known)
    a_circ = known[1.0]
    a_eff = spectral_abscissa(circuit.reconstruction()) - 1.0
    n_total = circuit.n_excitatory + circuit.n_inhibitory
    return {"original_spectral_abscissa": a_orig,
            "effective_spectral_abscissa": a_eff,
            "circuit_spectral_abscissa_equal_taus": a_circ,
            "max_stable_tau_ratio": None if math.isinf(ratio) else ratio,
            "eigenvalue_method": _method_name(n_total),
            "why": None if tau_ratio is None else instability_line(
                a_orig, a_eff, ratio, tau_ratio, circuit),
            "note": f"tau_I / tau_E checked at {n_grid} ratios over "
                    f"[{lo:g}, {hi:g}], the crossing then narrowed to "
                    f"{100 * rtol:g} %; "
                    "null means stable over the whole range"}


def _own_stability(circuit, W, a_orig, tau_ratio):
    """The stability summary of a circuit of W's own neurons: at equal time
    constants its dynamics are W's; its inhibitory-to-inhibitory loops make
    stability depend on tau_I / tau_E in both directions, so no largest
    stable ratio is scanned, and the default ratio is checked directly."""
    a_circ = circuit_abscissa(circuit)
    n_total = circuit.n_excitatory + circuit.n_inhibitory
    out = {"original_spectral_abscissa": a_orig,
           "effective_spectral_abscissa": a_orig,
           "circuit_spectral_abscissa_equal_taus": a_circ,
           "eigenvalue_method": _method_name(n_total),
           "own_neurons": True, "why": None,
           "note": "a circuit of W's own neurons: at tau_I = tau_E its "
                   "dynamics are W's; no largest stable tau_I / tau_E is "
                   "scanned, since its inhibitory-to-inhibitory loops can be "
                   "unstable for fast interneurons as well as slow ones"}
    if tau_ratio is not None:
        a_default = circuit_abscissa(circuit, tau_e=1.0, tau_i=tau_ratio)
        out["circuit_spectral_abscissa_default_taus"] = a_default
        if a_orig < 0 and not a_default < 0:
            out["why"] = (f"W is stable, and so is this circuit of its own "
                          f"neurons at tau_I = tau_E, but not at tau_I/tau_E "
                          f"= {tau_ratio:.3g} (growth {a_default:.3g} per "
                          "tau_E): the interneurons' loops need their own "
                          "time constant; simulate with tau_I equal to "
                          "tau_E")
    return out


def instability_line(a_orig, a_eff, max_ratio, tau_ratio, circuit):
    """One line on why a circuit is unstable at ``tau_ratio`` though W is
    stable, with the largest stable ratio; None when there is nothing to
    explain. Two causes, told apart by W_eff:

    * W_eff itself unstable: the circuit's misfit moved W's rightmost
      eigenvalue across 1 (no time constant helps; more interneurons, a
      closer fit, may);
    * W_eff stable: the interneurons are too slow for the excitation they
      hold. For one E and one I unit, stability at tau_I / tau_E = r needs
      an excitatory gain below 1 + 1 / r (the linear term of the
      characteristic polynomial tau_E tau_I s^2 + (tau_E + tau_I -
      J_EE tau_I) s + (1 - J_EE + J_EI J_IE); common practice for
      inhibition-stabilised networks); the line gives J_EE's Perron root
      beside that bound.
    """
    if not (a_orig < 0) or max_ratio >= tau_ratio:
        return None
    return _unstable_because(a_orig, a_eff, max_ratio, tau_ratio,
                             circuit) + _guard_not_run(circuit)


def _guard_not_run(circuit):
    """The clause that says the stability guard did not run on a circuit
    too large for it (AssemblyReport.guard_limit), else ""."""
    limit = getattr(getattr(circuit, "report", None), "guard_limit", None)
    if limit is None:
        return ""
    n = circuit.n_excitatory + circuit.n_inhibitory
    return (f"; the stability guard runs on circuits of up to {limit} units "
            f"and this one has {n}, so it did not run")


def _unstable_because(a_orig, a_eff, max_ratio, tau_ratio, circuit):
    margin = -a_orig
    if a_eff >= 0:
        return (f"W is stable (margin {margin:.2g}) but W_eff is not: the "
                f"circuit's error moves the rightmost eigenvalue to "
                f"{1 + a_eff:.4g} (W's: {1 - margin:.4g}), so the circuit is "
                "unstable however fast its interneurons; a closer fit (more "
                "interneurons) is needed")
    limit = 1 + 1 / tau_ratio
    rho = (float(np.max(np.abs(np.linalg.eigvals(circuit.J_EE))))
           if circuit.n_excitatory <= DENSE_MAX_UNITS else None)
    head = (f"W and W_eff are stable but the circuit is stable only up to "
            f"tau_I/tau_E = {max_ratio:.3g} (default {tau_ratio:.3g})")
    if rho is not None and rho > limit:
        return (f"{head}: its excitation J_EE has Perron root {rho:.3g}, more "
                f"than interneurons this slow hold (a gain below about "
                f"{limit:.3g} for one E and one I unit)")
    return (f"{head}: its interneurons are too slow for the loops of "
            "excitation and inhibition they close")


# --- the gain of W and of the circuit ------------------------------------------

def largest_stable_gain(W):
    """Largest g for which dr/dt = -r + g W r is stable: 1 / max Re eig(W),
    or inf when max Re eig(W) <= 0 (every positive gain is stable).

    The eigenvalues of -I + g W are -1 + g lambda, so the condition is
    g max Re lambda < 1; stability needs g strictly below the value.

    >>> import numpy as np
    >>> largest_stable_gain(np.array([[2.0, 1.0], [0.0, -1.0]]))
    0.5
    """
    return _stable_gain(spectral_abscissa(np.asarray(W, dtype=float)))


def _stable_gain(a):
    return 1.0 / a if a > 0 else float("inf")


def scaled_circuit(circuit, gain):
    """The circuit whose W_eff is ``gain`` W_eff: J_EE times g, J_EI and
    J_IE each times sqrt(g) (all nonnegative: Dale's law kept); a circuit of
    W's own neurons, whose full matrix is W, has every block times g.

    >>> import numpy as np
    >>> from eidecomp.types import Circuit
    >>> c = Circuit(J_EE=np.array([[0.5]]), J_EU=np.array([[1.0]]),
    ...             J_UE=np.array([[1.0]]), J_ET=np.zeros((1, 0)),
    ...             J_TE=np.zeros((0, 1)))
    >>> scaled_circuit(c, 4.0).effective_weights()
    array([[-2.]])
    """
    import dataclasses

    if not (gain > 0 and math.isfinite(gain)):
        raise InputError(f"the gain must be a positive number, got {gain!r}")
    if gain == 1.0:
        return circuit
    if circuit.own_neurons:
        return dataclasses.replace(circuit, **{
            name: gain * getattr(circuit, name)
            for name in (*BLOCK_NAMES, *II_BLOCK_NAMES)})
    root = math.sqrt(gain)
    return dataclasses.replace(
        circuit, J_EE=gain * circuit.J_EE, J_EU=root * circuit.J_EU,
        J_UE=root * circuit.J_UE, J_ET=root * circuit.J_ET,
        J_TE=root * circuit.J_TE)


def largest_stable_circuit_gain(circuit, *, tau_e=1.0, tau_i=1.0, rtol=1e-4,
                                method="auto", seed=0):
    """The gain g at which the circuit scaled by g (:func:`scaled_circuit`)
    stops being stable at these time constants, bisected to ``rtol``:
    stable just below it (inf when stable up to 1e6, 0 when unstable down
    to 1e-6). From g = 1 the search doubles or halves to a bracket first,
    so the crossing found is the one nearest 1.

    >>> import numpy as np
    >>> from eidecomp.types import Circuit
    >>> c = Circuit(J_EE=np.array([[2.0]]), J_EU=np.zeros((1, 1)),
    ...             J_UE=np.zeros((1, 1)), J_ET=np.zeros((1, 0)),
    ...             J_TE=np.zeros((0, 1)))
    >>> round(largest_stable_circuit_gain(c), 3)     # -1 + 2 g < 0
    0.5
    """
    def stable(g):
        return circuit_abscissa(scaled_circuit(circuit, g), tau_e=tau_e,
                                tau_i=tau_i, method=method, seed=seed) < 0

    if stable(1.0):
        lo, hi = 1.0, 2.0
        while stable(hi):
            lo, hi = hi, 2 * hi
            if hi > 1e6:
                return float("inf")
    else:
        lo, hi = 0.5, 1.0
        while not stable(lo):
            lo, hi = lo / 2, lo
            if lo < 1e-6:
                return 0.0
    while hi - lo > rtol * lo:
        mid = math.sqrt(lo * hi)
        lo, hi = (mid, hi) if stable(mid) else (lo, mid)
    return hi
