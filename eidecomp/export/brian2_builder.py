"""A Brian2 rate network of a circuit (imported only inside these functions).

The numpy code-generation target is used, so no compiler is needed. Each
unit obeys  tau dr/dt = -r + s + h,  s the summed input sum_j w_ij r_j from
one Synapses object holding every nonzero entry of W_full (connected by
index arrays, so zeros never become synapses); forward Euler at step dt,
whose fixed point is exactly r = W_full r + h.
"""

import numpy as np

from ._lists import connection_list, drive_vector

__all__ = ["build_rate", "read_weights", "run_rate"]

_EQS = """
dr/dt = (-r + s + h) / tau : 1
s : 1
h : 1 (constant)
tau : second (constant)
"""


def build_rate(circuit, h, *, tau_e=10.0, tau_i=10.0, dt_ms=0.1):
    """A brian2.Network of the rate model; returns (network, group, synapses)."""
    import brian2 as b2

    b2.prefs.codegen.target = "numpy"
    H = drive_vector(circuit, h)
    n = H.size
    tau = np.full(n, float(tau_i))
    tau[: circuit.n_excitatory] = tau_e
    G = b2.NeuronGroup(n, _EQS, method="euler", dt=dt_ms * b2.ms,
                       name="eidecomp_units")
    G.h = H
    G.tau = tau * b2.ms
    S = b2.Synapses(G, G, "w : 1\ns_post = w * r_pre : 1 (summed)",
                    dt=dt_ms * b2.ms, name="eidecomp_synapses")
    pre, post, w = connection_list(circuit)
    if len(w):
        S.connect(i=pre, j=post)
        S.w = w
    return b2.Network(G, S), G, S


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
