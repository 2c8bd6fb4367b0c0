"""NEST networks of a circuit (NEST 3; imported only inside these functions).

Rate variant: one ``lin_rate_ipn`` node per unit with zero noise
(sigma = 0), lambda = 1, a linear gain g = 1 and mu = the unit's external
drive, so that  tau dX/dt = -X + mu + sum_j w_ij X_j : the linear rate model
of eidecomp.dynamics. Synapses are ``rate_connection_instantaneous`` with
the signed weight, one connection per nonzero entry (arrays connected
one-to-one, never all-to-all), so the fixed point is (I - W_full)^-1 h.

Spiking variant: ``iaf_psc_exp`` neurons with ``static_synapse``
connections; the rate-to-spiking mapping (a weight of w becomes
``pA_per_weight * w`` pA, the drive h a constant current
``bias_pA + pA_per_drive * h``) is a modelling choice, documented in
docs/simulators.md, not an equivalence.
"""

import os

import numpy as np

from ..params import TAU_E_MS, TAU_I_MS
from ._lists import drive_vector, tau_vector

__all__ = ["build_rate", "build_rate_matrix", "read_weights",
           "run_rate", "run_rate_matrix"]


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


def build_rate_matrix(W_full, drive, tau, *, resolution=0.1):
    """Rate network of any signed W_full[post, pre] (one node per row)."""
    nest = _nest()
    nest.resolution = resolution
    W_full = np.asarray(W_full, dtype=float)
    nodes = nest.Create("lin_rate_ipn", W_full.shape[0], params={
        "lambda": 1.0, "sigma": 0.0, "g": 1.0, "linear_summation": True,
        "rate": 0.0})
    nodes.set(tau=np.asarray(tau, float).tolist(),
              mu=np.asarray(drive, float).tolist())
    post, pre = np.nonzero(W_full)
    ids = np.asarray(nodes.tolist())
    if len(pre):
        nest.Connect(ids[pre], ids[post], conn_spec="one_to_one",
                     syn_spec={"synapse_model": "rate_connection_instantaneous",
                               "weight": W_full[post, pre]})
    return nodes


def build_rate(circuit, h, *, tau_e=TAU_E_MS, tau_i=TAU_I_MS, resolution=0.1):
    """Create the circuit's rate network in a fresh NEST kernel."""
    return build_rate_matrix(circuit.signed_weights(), drive_vector(circuit, h),
                             tau_vector(circuit, tau_e, tau_i),
                             resolution=resolution)


def run_rate_matrix(W_full, drive, tau, t_ms=2000.0, *, resolution=0.1):
    """Simulate any signed matrix for ``t_ms``; returns the final rates."""
    nest = _imported()
    nodes = build_rate_matrix(W_full, drive, tau, resolution=resolution)
    nest.Simulate(float(t_ms))
    return np.asarray(nodes.get("rate"), dtype=float)


def run_rate(circuit, h, *, t_ms=2000.0, **kwargs):
    """Build, simulate ``t_ms`` and return (rates, nodes)."""
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
