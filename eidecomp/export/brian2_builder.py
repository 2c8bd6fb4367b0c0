"""A Brian2 rate network of a circuit (imported only inside these functions).

The numpy code-generation target is used, so no compiler is needed. Each
unit obeys  tau dr/dt = -r + s + h,  s the summed input sum_j w_ij r_j from
one Synapses object holding every nonzero entry of W_full (connected by
index arrays, so zeros never become synapses); forward Euler at step dt,
whose fixed point is exactly r = W_full r + h.
"""

import numpy as np

from ..params import TAU_E_MS, TAU_I_MS
from ._lists import drive_vector, tau_vector

__all__ = ["build_rate", "build_rate_matrix", "read_weights", "run_rate",
           "run_rate_matrix"]

_EQS = """
dr/dt = (-r + s + h) / tau : 1
s : 1
h : 1 (constant)
tau : second (constant)
"""


def build_rate_matrix(W_full, drive, tau, *, dt_ms=0.1):
    """A brian2.Network for any signed W_full[post, pre]."""
    import brian2 as b2

    b2.prefs.codegen.target = "numpy"
    W_full = np.asarray(W_full, dtype=float)
    G = b2.NeuronGroup(W_full.shape[0], _EQS, method="euler", dt=dt_ms * b2.ms,
                       name="eidecomp_units")
    G.h = np.asarray(drive, float)
    G.tau = np.asarray(tau, float) * b2.ms
    S = b2.Synapses(G, G, "w : 1\ns_post = w * r_pre : 1 (summed)",
                    dt=dt_ms * b2.ms, name="eidecomp_synapses")
    post, pre = np.nonzero(W_full)
    if len(pre):
        S.connect(i=pre, j=post)
        S.w = W_full[post, pre]
    return b2.Network(G, S), G, S


def build_rate(circuit, h, *, tau_e=TAU_E_MS, tau_i=TAU_I_MS, dt_ms=0.1):
    """The circuit's rate network; returns (network, group, synapses)."""
    return build_rate_matrix(circuit.signed_weights(), drive_vector(circuit, h),
                             tau_vector(circuit, tau_e, tau_i), dt_ms=dt_ms)


def run_rate_matrix(W_full, drive, tau, t_ms=2000.0, *, dt_ms=0.1):
    """Simulate any signed matrix for ``t_ms``; returns the final rates."""
    import brian2 as b2

    net, G, _ = build_rate_matrix(W_full, drive, tau, dt_ms=dt_ms)
    net.run(float(t_ms) * b2.ms, namespace={})
    return np.asarray(G.r[:], dtype=float)


def run_rate(circuit, h, *, t_ms=2000.0, **kwargs):
    """Build, run ``t_ms`` and return (rates, synapses)."""
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
