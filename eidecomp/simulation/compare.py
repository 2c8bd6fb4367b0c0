"""The circuit against the original network, on the same drive.

Both networks run tau dr/dt = -r + f(g W r + h) on the simulator asked for:
the original with W (every unit tau_E), the circuit with its full matrix
scaled by the same gain g (eidecomp.dynamics.scaled_circuit). The linear
model runs to the fixed points of W and W_eff, which needs stable linear
dynamics; the threshold-linear model compares final rates, stable or not.
A drive of T segments (time along its columns) is compared at the end of
every segment, and the worst segment is reported.
"""

import math

import numpy as np

from ..dynamics import (
    DIVERGED,
    UnsettledRun,
    circuit_abscissa,
    fixed_point,
    largest_stable_circuit_gain,
    max_stable_tau_ratio,
    scaled_circuit,
    spectral_abscissa,
)
from ..errors import InputError
from ..params import SETTLE_TIME_CONSTANTS
from .drive import Drive, drive_of
from .simulators import get_model, get_simulator, segment_length

__all__ = ["MAX_SETTLE_MS", "Diverged", "TooSlow",
           "Unstable", "check_stable",
           "circuit_runs", "compare_with_original", "rectified_units",
           "settle_time", "stable_gains"]


MAX_SETTLE_MS = 1e6
"""The longest run to a fixed point (1,000 s simulated): a network whose
slowest mode would need more is too close to instability to settle in a
run, and is refused with the gain that settles it."""

SETTLED_RATE = 1e-6
"""A run has settled when ||dr/dt|| / ||r|| at its end is at most this, per
ms (a settled threshold-linear run is at a fixed point; common practice)."""


class Unstable(InputError):
    """Linear dynamics with no fixed point to reach, and what would make
    them stable: ``network`` ("original" or "circuit"), its ``growth`` rate
    per ms, the ``gain`` and time constants asked for, the largest stable
    gain of both networks together (``stable_gain``), and for the circuit
    the largest stable tau_I / tau_E (``stable_ratio``) and whether its
    units are W's own (``own_neurons``). The words for a command are
    eidecomp.simulation.advice's."""

    def __init__(self, network, *, growth, gain, tau_e, tau_i, stable_gain,
                 stable_ratio=None, own_neurons=False, gain_of="both networks",
                 equal_taus_stable=True):
        self.network, self.growth, self.gain = network, growth, gain
        self.tau_e, self.tau_i = tau_e, tau_i
        self.stable_gain, self.stable_ratio = stable_gain, stable_ratio
        self.own_neurons, self.gain_of = own_neurons, gain_of
        self.equal_taus_stable = equal_taus_stable
        super().__init__(
            f"the {network} {'network ' if network == 'original' else ''}is "
            f"unstable at gain {gain:g} and tau_I/tau_E = {tau_i / tau_e:g} "
            f"(growth rate {growth:.3g} per ms); its fixed point is never "
            f"reached; {gain_of} {'are' if gain_of.endswith('s') else 'is'} "
            f"stable below gain {stable_gain:.4g}")


class TooSlow(InputError):
    """Stable linear dynamics whose slowest mode (``growth`` per ms) would
    need ``settle_ms`` to reach the fixed point, more than MAX_SETTLE_MS;
    ``stable_gain`` as in :class:`Unstable`."""

    def __init__(self, settle_ms, growth, gain, stable_gain):
        self.settle_ms, self.growth = settle_ms, growth
        self.gain, self.stable_gain = gain, stable_gain
        super().__init__(f"the slowest mode decays at {-growth:.3g} per ms, so "
                         f"a run to the fixed point would last {settle_ms:.3g} "
                         f"ms (at most {MAX_SETTLE_MS:g}); the networks are "
                         f"stable below gain {stable_gain:.4g}")


class Diverged(InputError):
    """A threshold-linear run whose rates passed DIVERGED within ``t_ms``,
    with the largest gain at which both networks' linear dynamics are
    stable (``stable_gain``)."""

    def __init__(self, t_ms, gain, stable_gain):
        self.t_ms, self.gain, self.stable_gain = t_ms, gain, stable_gain
        super().__init__(f"the rates diverged (past {DIVERGED:.0e}) within "
                         f"{t_ms:g} ms at gain {gain:g}; both networks' linear "
                         f"dynamics are stable below gain {stable_gain:.4g}")


def rectified_units(circuit, model):
    """How many leading units of the circuit's full matrix the model
    rectifies: none (linear), the E units, or every unit of a circuit of W's
    own neurons (they are all W's units, and W's are all rectified)."""
    if not get_model(model).rectified:
        return 0
    if circuit.own_neurons:
        return circuit.n_excitatory + circuit.n_inhibitory
    return circuit.n_excitatory


def stable_gains(circuit, W, *, tau_e, tau_i):
    """(the original's, the circuit's) largest stable gains at these time
    constants: 1 / max Re eig(W) (inf when <= 0), and the circuit's bisected
    (eidecomp.dynamics.largest_stable_circuit_gain)."""
    a = spectral_abscissa(np.asarray(W, dtype=float))
    g_orig = 1.0 / a if a > 0 else math.inf
    return g_orig, largest_stable_circuit_gain(circuit, tau_e=tau_e, tau_i=tau_i)


def settle_time(a_orig, a_circ, tau_e, tau_i):
    """:data:`SETTLE_TIME_CONSTANTS` of the slowest mode when both are
    stable, else of the slower population; whole ms."""
    worst = max(a_orig, a_circ)
    n = SETTLE_TIME_CONSTANTS
    return float(math.ceil(n / -worst if worst < 0 else n * max(tau_e, tau_i)))


def _relative(a, b):
    return float(np.linalg.norm(a - b) / max(np.linalg.norm(b), 1e-300))


def _worst(pairs):
    return max(_relative(a, b) for a, b in pairs)


def _rate_of_change(W_full, H, tau, r, n_rect):
    """||dr/dt|| / ||r|| at the end of a run, per ms: 0 when settled."""
    drive = W_full @ r + H
    drive[:n_rect] = np.maximum(drive[:n_rect], 0.0)
    norm = np.linalg.norm(r)
    return float(np.linalg.norm((drive - r) / tau) / norm) if norm > 0 else 0.0


def compare_with_original(circuit, W, drive, *, tau_e, tau_i, simulator="internal",
                          gain=1.0, model="linear", t_ms=None):
    """Run the circuit and the original network on the same drive and
    compare the circuit's rates of W's units with them.

    Parameters
    ----------
    circuit : Circuit
    W : ndarray (N, N)
        The original network, W[post, pre].
    drive : Drive or array_like
        N values, or (N, T): T segments, time along the columns.
    tau_e, tau_i : float
        Time constants in ms.
    simulator : str
        A name of :data:`eidecomp.simulation.SIMULATORS`.
    gain : float
        W scaled by it and the circuit with it (J_EE by g, J_EI and J_IE by
        sqrt(g): Dale's law kept).
    model : str
        A name of :data:`eidecomp.simulation.MODELS`. Linear: both runs
        against the fixed points of W_eff and W; unstable linear dynamics
        raise :class:`Unstable`. Threshold-linear: final rates compared,
        stable or not; a run past DIVERGED raises :class:`Diverged`.
    t_ms : float or None
        Simulated time in all (shared among the segments); None: each
        segment lasts :func:`settle_time`.

    Returns
    -------
    dict of the settings, the linear growth rates and the relative errors
    (the worst segment's).

    Examples
    --------
    >>> import numpy as np
    >>> from eidecomp.types import Circuit
    >>> c = Circuit(J_EE=np.array([[0.5]]), J_EU=np.array([[1.0]]),
    ...             J_UE=np.array([[1.0]]), J_ET=np.zeros((1, 0)),
    ...             J_TE=np.zeros((0, 1)))
    >>> r = compare_with_original(c, c.effective_weights(), [1.0],
    ...                           tau_e=10.0, tau_i=5.0)
    >>> r["circuit_vs_original"] < 1e-8
    True
    """
    sim = get_simulator(simulator)
    rule = get_model(model)
    if model not in sim.models:
        raise InputError(f"the {simulator} simulator does not run the {model} "
                         "model")
    if t_ms is not None and not (t_ms > 0 and math.isfinite(t_ms)):
        raise InputError(f"the simulated time must be a positive number of ms, "
                         f"got {t_ms!r}")
    sim.check_available()
    W = np.asarray(W, dtype=float)
    drive = drive if isinstance(drive, Drive) else drive_of(drive, W.shape[0])
    a_W = spectral_abscissa(W)
    circuit, W = scaled_circuit(circuit, gain), gain * W
    a_orig = (gain * a_W - 1.0) / tau_e
    a_circ = circuit_abscissa(circuit, tau_e=tau_e, tau_i=tau_i)
    if not rule.rectified and not (a_orig < 0 and a_circ < 0):
        _refuse(circuit, W, a_orig, a_circ, gain, tau_e, tau_i)
    T = drive.n_segments
    settle = settle_time(a_orig, a_circ, tau_e, tau_i)
    if t_ms is None and settle > MAX_SETTLE_MS:
        raise TooSlow(settle, max(a_orig, a_circ), gain,
                      _both_gain(circuit, W, gain, tau_e, tau_i))
    segment = (segment_length(t_ms, T) if t_ms is not None
               else segment_length(settle, 1))
    run = sim.load()
    n_rect = rectified_units(circuit, model)
    W_full, h = circuit.signed_weights(), drive.values
    H = circuit.full_drive(h)
    tau = circuit.unit_taus(tau_e, tau_i)
    try:
        rates = run(W_full, H, tau, segment, n_rect)
        orig = run(W, h, np.full(W.shape[0], float(tau_e)), segment,
                   W.shape[0] if rule.rectified else 0)
    except UnsettledRun:
        raise Diverged(segment * T, gain, _both_gain(circuit, W, gain, tau_e,
                                                     tau_i)) from None
    if not (np.abs(rates).max() < DIVERGED and np.abs(orig).max() < DIVERGED):
        raise Diverged(segment * T, gain,
                       _both_gain(circuit, W, gain, tau_e, tau_i))
    mine = circuit.w_rates(rates)
    cols = range(T)
    out = {"model": model, "simulator": simulator, "gain": float(gain),
           "tau_e_ms": tau_e, "tau_i_ms": tau_i, "t_ms": segment * T,
           "segment_ms": segment, "n_segments": T,
           "original_growth_rate": a_orig, "circuit_growth_rate": a_circ,
           "largest_stable_gain": 1.0 / a_W if a_W > 0 else math.inf,
           "circuit_vs_original": _worst((mine[:, k], orig[:, k]) for k in cols),
           "reconstruction_error": _relative(circuit.reconstruction(), W),
           "duration_given": t_ms is not None,
           "linear_stable": bool(a_orig < 0 and a_circ < 0)}
    tau_w = np.full(W.shape[0], float(tau_e))
    out["circuit_rate_of_change"] = max(
        _rate_of_change(W_full, H[:, k], tau, rates[:, k], n_rect) for k in cols)
    out["original_rate_of_change"] = max(
        _rate_of_change(W, h[:, k], tau_w, orig[:, k],
                        W.shape[0] if rule.rectified else 0) for k in cols)
    out["settled"] = max(out["circuit_rate_of_change"],
                         out["original_rate_of_change"]) <= SETTLED_RATE
    if not out["settled"]:     # what would make them settle
        out["stable_gain"] = _both_gain(circuit, W, gain, tau_e, tau_i)
    if not rule.rectified:
        W_eff = circuit.reconstruction()
        fp_eff = [fixed_point(W_eff, h[:, k]) for k in cols]
        fp_W = [fixed_point(W, h[:, k]) for k in cols]
        out["circuit_vs_fixed_point_W_eff"] = _worst(
            (mine[:, k], fp_eff[k]) for k in cols)
        out["circuit_vs_fixed_point_W"] = _worst((mine[:, k], fp_W[k]) for k in cols)
        out["original_vs_fixed_point_W"] = _worst((orig[:, k], fp_W[k]) for k in cols)
    return out


def _both_gain(circuit, W, gain, tau_e, tau_i):
    """The largest gain (of the unscaled networks) at which both are
    stable, given the networks already scaled by ``gain``."""
    g_orig, g_circ = stable_gains(circuit, W, tau_e=tau_e, tau_i=tau_i)
    return gain * min(g_orig, g_circ)


def _refuse(circuit, W, a_orig, a_circ, gain, tau_e, tau_i):
    """Raise :class:`Unstable` for the first network that is unstable."""
    both = _both_gain(circuit, W, gain, tau_e, tau_i)
    if not a_orig < 0:
        raise Unstable("original", growth=a_orig, gain=gain, tau_e=tau_e,
                       tau_i=tau_i, stable_gain=both)
    ratio = None
    if not circuit.own_neurons:
        ratio = max_stable_tau_ratio(circuit)
    raise Unstable("circuit", growth=a_circ, gain=gain, tau_e=tau_e,
                   tau_i=tau_i, stable_gain=both, stable_ratio=ratio,
                   own_neurons=circuit.own_neurons)


def check_stable(circuit, *, gain=1.0, tau_e, tau_i):
    """:class:`Unstable` (the circuit alone, with its own largest stable
    gain and tau_I / tau_E) when the circuit scaled by ``gain`` has
    unstable linear dynamics at these time constants: what an export
    checks before it writes a script that would only diverge."""
    scaled = scaled_circuit(circuit, gain)
    a = circuit_abscissa(scaled, tau_e=tau_e, tau_i=tau_i)
    if a < 0:
        settle = settle_time(a, a, tau_e, tau_i)
        if settle > MAX_SETTLE_MS:
            g = largest_stable_circuit_gain(scaled, tau_e=tau_e, tau_i=tau_i)
            raise TooSlow(settle, a, gain, gain * g)
        return
    ratio = None
    if not circuit.own_neurons:
        ratio = max_stable_tau_ratio(scaled)
    g = largest_stable_circuit_gain(scaled, tau_e=tau_e, tau_i=tau_i)
    equal = circuit_abscissa(scaled, tau_e=tau_e, tau_i=tau_e) < 0
    raise Unstable("circuit", growth=a, gain=gain, tau_e=tau_e, tau_i=tau_i,
                   stable_gain=gain * g, stable_ratio=ratio,
                   own_neurons=circuit.own_neurons, gain_of="the circuit",
                   equal_taus_stable=equal)


def circuit_runs(circuit, drive, *, tau_e, tau_i, simulator="internal"):
    """The circuit alone on ``drive`` under every model: ({model name: rates
    of every unit (n, T) at the end of each segment}, segment length in
    ms). Each segment lasts :func:`settle_time` of the circuit
    (:data:`~eidecomp.params.SETTLE_TIME_CONSTANTS` of its slowest mode); a
    model whose run diverges, or never settles, is left out. What an
    exported script compares itself with.
    """
    from .simulators import MODELS

    run = get_simulator(simulator).load()
    a = circuit_abscissa(circuit, tau_e=tau_e, tau_i=tau_i)
    segment = segment_length(min(settle_time(a, a, tau_e, tau_i), MAX_SETTLE_MS),
                             1)
    values = drive.values if isinstance(drive, Drive) else np.asarray(drive, float)
    H = circuit.full_drive(values.reshape(circuit.n_w_units, -1))
    W_full, tau = circuit.signed_weights(), circuit.unit_taus(tau_e, tau_i)
    out = {}
    for m in MODELS:
        try:
            rates = run(W_full, H, tau, segment, rectified_units(circuit, m.name))
        except UnsettledRun:
            continue
        if np.abs(rates).max() < DIVERGED:
            out[m.name] = rates
    return out, segment
