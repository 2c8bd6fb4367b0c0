"""A Brian2 rate network of a circuit (imported only inside these functions).

The numpy code-generation target is used, so no compiler is needed. Each
unit obeys  tau dr/dt = -r + f(s + h),  s the summed input sum_j w_ij r_j
from one Synapses object holding every nonzero entry of W_full (connected
by index arrays, so zeros never become synapses), f the identity, or
max(., 0) for a rectified unit (``rect`` = 1: the threshold-linear model);
forward Euler at step dt, whose fixed point is exactly r = f(W_full r + h).
A drive of T segments is T runs, the drive set between them.
"""

import numpy as np

from ..params import TAU_E_MS, TAU_I_MS
from ._lists import drive_vector, tau_vector

__all__ = ["RATE_EQUATIONS", "build_rate", "build_rate_matrix", "read_weights",
           "run_rate", "run_segments"]

RATE_EQUATIONS = """
dr/dt = (-r + rect * 0.5 * (x + abs(x)) + (1 - rect) * x) / tau : 1
x = s + h : 1
s : 1
h : 1
rect : 1 (constant)
tau : second (constant)
"""
"""The Brian2 equations of both rate models (``rect`` 1: [.]_+), the one
text the in-process runner and the exported script use."""


def build_rate_matrix(W_full, drive, tau, *, rectified=0, dt_ms=0.1):
    """A brian2.Network for any signed W_full[post, pre], the first
    ``rectified`` units threshold-linear; returns (network, group, synapses)."""
    import brian2 as b2

    b2.prefs.codegen.target = "numpy"
    W_full = np.asarray(W_full, dtype=float)
    n = W_full.shape[0]
    G = b2.NeuronGroup(n, RATE_EQUATIONS, method="euler", dt=dt_ms * b2.ms,
                       name="eidecomp_units")
    G.h = np.asarray(drive, float)
    G.tau = np.asarray(tau, float) * b2.ms
    G.rect = (np.arange(n) < int(rectified)).astype(float)
    S = b2.Synapses(G, G, "w : 1\ns_post = w * r_pre : 1 (summed)",
                    dt=dt_ms * b2.ms, name="eidecomp_synapses")
    post, pre = np.nonzero(W_full)
    if len(pre):
        S.connect(i=pre, j=post)
        S.w = W_full[post, pre]
    return b2.Network(G, S), G, S


def build_rate(circuit, h, *, tau_e=TAU_E_MS, tau_i=TAU_I_MS, dt_ms=0.1):
    """The circuit's linear rate network; returns (network, group, synapses)."""
    return build_rate_matrix(circuit.signed_weights(), drive_vector(circuit, h),
                             tau_vector(circuit, tau_e, tau_i), dt_ms=dt_ms)


def run_segments(W_full, H, tau, segment_ms, rectified=0, *, dt_ms=0.1):
    """Simulate any signed matrix on a drive H (n, T), each column held for
    ``segment_ms``; returns the rates (n, T) at the end of each segment:
    the runner of eidecomp.simulation."""
    import brian2 as b2

    H = np.asarray(H, dtype=float).reshape(len(tau), -1)
    net, G, _ = build_rate_matrix(W_full, H[:, 0], tau, rectified=rectified,
                                  dt_ms=dt_ms)
    out = np.empty_like(H)
    for k in range(H.shape[1]):
        G.h = H[:, k]
        net.run(float(segment_ms) * b2.ms, namespace={})
        out[:, k] = np.asarray(G.r[:], dtype=float)
    return out


def run_rate(circuit, h, *, t_ms=2000.0, **kwargs):
    """Build the linear network, run ``t_ms``; return (rates, synapses)."""
    import brian2 as b2

    net, G, S = build_rate(circuit, h, **kwargs)
    net.run(float(t_ms) * b2.ms, namespace={})
    return np.asarray(G.r[:], dtype=float), S


def read_weights(S, n):
    """The signed W_full[post, pre] that the Synapses object holds."""
    W = np.zeros((n, n))
    if len(S):
        W[np.asarray(S.j[:]), np.asarray(S.i[:])] = np.asarray(S.w[:])
    return W
