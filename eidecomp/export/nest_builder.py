"""NEST rate networks of a circuit (NEST 3; imported only inside these
functions).

One node per unit with zero noise (sigma = 0), lambda = 1 and a gain g = 1,
so that  tau dX/dt = -X + mu + phi(sum_j w_ij X_j):

* linear units are ``lin_rate_ipn`` (phi the identity) with mu = the unit's
  drive: the linear rate model of eidecomp.dynamics;
* rectified units (threshold-linear model) are ``threshold_lin_rate_ipn``
  (phi(x) = max(x, 0): NEST's defaults theta = 0 and alpha = inf, no
  saturation, left as they are; NEST 3.10 has them), whose drive must sit
  inside phi: each gets mu = 0 and one driver node, a ``lin_rate_ipn``
  held at its drive (mu = rate = h, tau 1 ms, no input), connected with
  weight 1, so that
  tau dX/dt = -X + [sum_j w_ij X_j + h]_+.

Synapses are ``rate_connection_instantaneous`` with the signed weight, one
connection per nonzero entry (arrays connected one-to-one, never
all-to-all). A drive of T segments is run as T calls of ``nest.Simulate``,
the drive set between them.
"""

import os

import numpy as np

from ..params import TAU_E_MS, TAU_I_MS
from ._lists import drive_vector, tau_vector

__all__ = ["build_rate", "build_rate_matrix", "read_weights",
           "run_rate", "run_segments"]


def _imported():
    """The nest module, imported without its banner on stdout (every import
    of nest here goes through this: the first one decides)."""
    os.environ.setdefault("PYNEST_QUIET", "1")
    import nest

    return nest


def _nest():
    nest = _imported()
    nest.ResetKernel()
    nest.verbosity = nest.VerbosityLevel.ERROR
    return nest


_RATE = {"lambda": 1.0, "sigma": 0.0, "g": 1.0, "linear_summation": True,
         "rate": 0.0}


def _set_drive(nodes, drivers, h, rectified):
    """Drive h: mu of the linear units, the drivers' held rate for the
    rectified ones (the first ``rectified`` units)."""
    h = np.asarray(h, float)
    if rectified:
        drivers.set(mu=h[:rectified].tolist(), rate=h[:rectified].tolist())
    if len(h) > rectified:
        nodes[rectified:].set(mu=h[rectified:].tolist())


def build_rate_matrix(W_full, drive, tau, *, rectified=0, resolution=0.1):
    """Rate network of any signed W_full[post, pre] (one node per row), the
    first ``rectified`` units threshold-linear; returns (nodes, drivers)."""
    nest = _nest()
    nest.resolution = resolution
    W_full = np.asarray(W_full, dtype=float)
    n, k = W_full.shape[0], int(rectified)
    parts = [nest.Create(model, size, params=_RATE) for model, size in
             (("threshold_lin_rate_ipn", k), ("lin_rate_ipn", n - k)) if size]
    nodes = parts[0] if len(parts) == 1 else parts[0] + parts[1]
    nodes.set(tau=np.asarray(tau, float).tolist())
    drivers = None
    if k:
        drivers = nest.Create("lin_rate_ipn", k, params={**_RATE, "tau": 1.0})
        nest.Connect(drivers, nodes[:k], conn_spec="one_to_one",
                     syn_spec={"synapse_model": "rate_connection_instantaneous",
                               "weight": 1.0})
    _set_drive(nodes, drivers, drive, k)
    post, pre = np.nonzero(W_full)
    ids = np.asarray(nodes.tolist())
    if len(pre):
        nest.Connect(ids[pre], ids[post], conn_spec="one_to_one",
                     syn_spec={"synapse_model": "rate_connection_instantaneous",
                               "weight": W_full[post, pre]})
    return nodes, drivers


def build_rate(circuit, h, *, tau_e=TAU_E_MS, tau_i=TAU_I_MS, resolution=0.1):
    """Create the circuit's linear rate network in a fresh NEST kernel."""
    nodes, _ = build_rate_matrix(circuit.signed_weights(),
                                 drive_vector(circuit, h),
                                 tau_vector(circuit, tau_e, tau_i),
                                 resolution=resolution)
    return nodes


def run_segments(W_full, H, tau, segment_ms, rectified=0, *, resolution=0.1):
    """Simulate any signed matrix on a drive H (n, T), each column held for
    ``segment_ms`` (a multiple of ``resolution``); returns the rates (n, T)
    at the end of each segment: the runner of eidecomp.simulation."""
    nest = _imported()
    H = np.asarray(H, dtype=float).reshape(len(tau), -1)
    nodes, drivers = build_rate_matrix(W_full, H[:, 0], tau, rectified=rectified,
                                       resolution=resolution)
    out = np.empty_like(H)
    for k in range(H.shape[1]):
        if k:
            _set_drive(nodes, drivers, H[:, k], int(rectified))
        nest.Simulate(float(segment_ms))
        out[:, k] = nodes.get("rate")
    return out


def run_rate(circuit, h, *, t_ms=2000.0, **kwargs):
    """Build the linear network, simulate ``t_ms``; return (rates, nodes)."""
    nest = _imported()
    nodes = build_rate(circuit, h, **kwargs)
    nest.Simulate(float(t_ms))
    return np.asarray(nodes.get("rate"), dtype=float), nodes


def read_weights(nodes):
    """The signed W_full[post, pre] that NEST holds among ``nodes``."""
    nest = _imported()

    first = nodes[0].global_id
    n = len(nodes)
    W = np.zeros((n, n))
    conns = nest.GetConnections(source=nodes, target=nodes)
    if len(conns):
        d = conns.get(["source", "target", "weight"])
        src = np.atleast_1d(np.asarray(d["source"])) - first
        tgt = np.atleast_1d(np.asarray(d["target"])) - first
        W[tgt, src] = np.atleast_1d(d["weight"])
    return W
