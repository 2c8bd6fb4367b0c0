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

Every function takes arrays or a Circuit; simulation integrates with
``scipy.integrate.solve_ivp``.
"""

import math

import numpy as np
from scipy.integrate import solve_ivp

from .errors import InputError

__all__ = ["compare_with_original", "effective_from_full", "fixed_point",
           "full_matrix", "jacobian", "max_stable_tau_ratio", "random_drive",
           "simulate", "spectral_abscissa", "stability_summary"]


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


def spectral_abscissa(A):
    """Largest real part of the eigenvalues of A."""
    return float(np.max(np.linalg.eigvals(A).real)) if A.size else -np.inf


def max_stable_tau_ratio(circuit, *, lo=1e-3, hi=1e3, n_grid=61, rtol=1e-4):
    """Largest tau_I / tau_E up to which the linear circuit stays stable.

    Scans a log grid of ratios from ``lo`` to ``hi`` and bisects the first
    crossing from stable to unstable. Returns ``inf`` if every ratio on the
    grid is stable, and 0.0 if the smallest is already unstable (then the
    original network is itself unstable: the ratio does not matter as
    tau_I -> 0, where the circuit's Jacobian tends to that of W_eff).

    >>> import numpy as np
    >>> from eidecomp.types import Circuit
    >>> c = Circuit(J_EE=np.array([[0.5]]), J_EU=np.array([[1.0]]),
    ...             J_UE=np.array([[1.0]]), J_ET=np.zeros((1, 0)),
    ...             J_TE=np.zeros((0, 1)))
    >>> max_stable_tau_ratio(c)    # trace and determinant stay stable
    inf
    """
    W_full, n_e = full_matrix(circuit)

    def growth(ratio):
        return spectral_abscissa(jacobian(W_full, n_e, 1.0, ratio))

    grid = np.geomspace(lo, hi, n_grid)
    stable = [growth(x) < 0 for x in grid]
    if not stable[0]:
        return 0.0
    if all(stable):
        return float("inf")
    j = stable.index(False)
    a, b = grid[j - 1], grid[j]
    while b / a - 1 > rtol:
        mid = np.sqrt(a * b)
        a, b = (mid, b) if growth(mid) < 0 else (a, mid)
    return float(a)


def simulate(W_full, h, *, n_e=None, tau_e=1.0, tau_i=1.0, t_max=None,
             nonlinearity="linear", r0=None, rtol=1e-10, atol=1e-12):
    """Integrate tau dr/dt = -r + f(W_full r + H) with solve_ivp (LSODA).

    Parameters
    ----------
    W_full : ndarray (n, n)
        Signed full matrix; for the original network pass W and n_e=None.
    h : ndarray (n_e,)
        External drive of the E units (interneurons get none).
    n_e : int or None
        Number of E units (the first n_e); None means all units are E.
    tau_e, tau_i : float
    t_max : float or None
        End time; None integrates for 40 times the slowest decay time of
        the linearisation (rates within e^-40 of the fixed point).
    nonlinearity : "linear" or "relu"
        f for the E units; interneurons are always linear.

    Returns
    -------
    t : ndarray, r : ndarray (n, len(t))
    """
    W_full = np.asarray(W_full, dtype=float)
    n = W_full.shape[0]
    n_e = n if n_e is None else int(n_e)
    H = np.zeros(n)
    H[:n_e] = h
    tau = _taus(n, n_e, tau_e, tau_i)
    if nonlinearity not in ("linear", "relu"):
        raise InputError(f"unknown nonlinearity {nonlinearity!r}")
    relu = nonlinearity == "relu"
    if t_max is None:
        a = spectral_abscissa((W_full - np.eye(n)) / tau[:, None])
        if not a < 0:
            raise InputError("the linear dynamics are not stable (spectral "
                             f"abscissa {a:.3g}); give t_max explicitly")
        t_max = 40.0 / -a

    def rhs(_, r):
        drive = W_full @ r + H
        if relu:
            drive[:n_e] = np.maximum(drive[:n_e], 0.0)
        return (drive - r) / tau

    r0 = np.zeros(n) if r0 is None else np.asarray(r0, float)
    J = (W_full - np.eye(n)) / tau[:, None]
    sol = solve_ivp(rhs, (0.0, t_max), r0, method="LSODA", rtol=rtol, atol=atol,
                    jac=None if relu else (lambda _, __: J))
    if not sol.success:
        raise RuntimeError(f"solve_ivp failed: {sol.message}")
    return sol.t, sol.y


# --- summaries the jobs record ---------------------------------------------------

STABILITY_MAX_UNITS = 800  # the tau scan solves dozens of dense eigenproblems
STABILITY_SCAN = (1e-2, 1e2, 17)  # tau_I / tau_E from, to, grid points


def stability_summary(circuit, W):
    """What circuit.json records of stability: the spectral abscissa of the
    original network (-I + W) and of the circuit at equal time constants,
    and the largest stable tau_I / tau_E over :data:`STABILITY_SCAN`
    (None: stable over the whole range). Above
    :data:`STABILITY_MAX_UNITS` units the scan is skipped and says so.

    >>> import numpy as np
    >>> from eidecomp.types import Circuit
    >>> c = Circuit(J_EE=np.array([[0.5]]), J_EU=np.array([[1.0]]),
    ...             J_UE=np.array([[1.0]]), J_ET=np.zeros((1, 0)),
    ...             J_TE=np.zeros((0, 1)))
    >>> s = stability_summary(c, c.effective_weights())
    >>> s["original_spectral_abscissa"], s["max_stable_tau_ratio"]
    (-1.5, None)
    """
    lo, hi, n_grid = STABILITY_SCAN
    n_total = circuit.n_excitatory + circuit.n_inhibitory
    a_orig = spectral_abscissa(np.asarray(W) - np.eye(np.shape(W)[0]))
    if n_total > STABILITY_MAX_UNITS:
        return {"original_spectral_abscissa": a_orig,
                "circuit_spectral_abscissa_equal_taus": None,
                "max_stable_tau_ratio": None,
                "note": f"{n_total} units: the tau scan was skipped (above "
                        f"{STABILITY_MAX_UNITS}); call "
                        "eidecomp.dynamics.max_stable_tau_ratio"}
    W_full, n_e = full_matrix(circuit)
    a_circ = spectral_abscissa(jacobian(W_full, n_e, 1.0, 1.0))
    ratio = max_stable_tau_ratio(circuit, lo=lo, hi=hi, n_grid=n_grid, rtol=1e-3)
    return {"original_spectral_abscissa": a_orig,
            "circuit_spectral_abscissa_equal_taus": a_circ,
            "max_stable_tau_ratio": None if math.isinf(ratio) else ratio,
            "note": f"tau_I / tau_E scanned over [{lo:g}, {hi:g}]; null means "
                    "stable over the whole range"}


def random_drive(n, seed=0):
    """A seeded drive of the E units, uniform on [0.5, 1.5], and its name."""
    return np.random.default_rng(seed).uniform(0.5, 1.5, n), "random U(0.5, 1.5)"


def _relative(a, b):
    return float(np.linalg.norm(a - b) / max(np.linalg.norm(b), 1e-300))


def compare_with_original(circuit, W, h, *, tau_e, tau_i, run=None):
    """Run the circuit and the original network dr/dt = -r + W r + h on the
    same drive ``h`` for 40 time constants of their slowest mode, and
    compare the circuit's E rates with the fixed points of W_eff and W.

    ``run(W_full, H, tau, t_ms)`` -> final rates is the simulator (None:
    :func:`simulate`, scipy's solve_ivp). Unstable linear dynamics have no
    fixed point to reach: InputError, with what to change.

    Returns a dict of the settings and relative errors.
    """
    n_e = circuit.n_excitatory
    W_full = circuit.signed_weights()
    tau = _taus(W_full.shape[0], n_e, tau_e, tau_i)
    a_orig = spectral_abscissa((np.asarray(W) - np.eye(n_e)) / tau_e)
    a_circ = spectral_abscissa((W_full - np.eye(len(tau))) / tau[:, None])
    if not a_orig < 0:
        raise InputError(f"the original network is unstable (growth rate "
                         f"{a_orig:.3g} per ms); its fixed point is never "
                         "reached")
    if not a_circ < 0:
        lo, hi, n_grid = STABILITY_SCAN
        limit = max_stable_tau_ratio(circuit, lo=lo, hi=hi, n_grid=n_grid)
        raise InputError(f"the circuit is unstable at tau_I/tau_E = "
                         f"{tau_i / tau_e:g} (stable up to {limit:.3g}); "
                         "choose a smaller --tau-i")
    # whole ms: a multiple of every simulator's resolution
    t_ms = float(math.ceil(40.0 / -max(a_orig, a_circ)))
    if run is None:
        _, r = simulate(W_full, h, n_e=n_e, tau_e=tau_e, tau_i=tau_i, t_max=t_ms)
        _, r0 = simulate(W, h, tau_e=tau_e, t_max=t_ms)
        rates, orig = r[:, -1], r0[:, -1]
    else:
        rates = run(W_full, np.r_[h, np.zeros(circuit.n_inhibitory)], tau, t_ms)
        orig = run(np.asarray(W), h, np.full(n_e, float(tau_e)), t_ms)
    W_eff = circuit.effective_weights()
    fp_eff, fp_W = fixed_point(W_eff, h), fixed_point(W, h)
    return {"tau_e_ms": tau_e, "tau_i_ms": tau_i, "t_ms": t_ms,
            "circuit_vs_fixed_point_W_eff": _relative(rates[:n_e], fp_eff),
            "circuit_vs_fixed_point_W": _relative(rates[:n_e], fp_W),
            "original_vs_fixed_point_W": _relative(orig, fp_W),
            "circuit_vs_original": _relative(rates[:n_e], orig),
            "reconstruction_error": _relative(W_eff, W)}
