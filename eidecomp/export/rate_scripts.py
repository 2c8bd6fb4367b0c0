"""Standalone NEST and Brian2 scripts of the rate models, data beside them.

``rate_script_files(circuit, simulator, drive)`` gives
``circuit_<simulator>.py``
(fixed code, the same for every circuit) and ``circuit_rate_data.npz``:
the signed connection list (pre, post, weight); every unit's time constant;
the drive H (units x segments: time along the columns) and each segment's
length; how many leading units the threshold-linear model rectifies; and
what eidecomp's own simulator gives at the end of every segment for each
model (``expected_linear``, ``expected_threshold_linear``). The scripts need
only numpy and their simulator, not eidecomp. Each runs

    tau dr/dt = -r + f(W_full r + h)

(``--model linear``, the default as in ``eidecomp simulate``: f the
identity; ``--model threshold-linear``: f = max(., 0) on the rectified
units, as eidecomp.export.nest_builder and brian2_builder do) and prints,
as JSON, the rates and its own verdict: every rate finite, none negative
where the model rectifies, and agreement with eidecomp's rates to
:data:`SCRIPT_RTOL`. Its exit status is 0 when the verdict holds, else 1.
"""

import numpy as np

from ..params import DEFAULT_PERIOD, SETTLE_TIME_CONSTANTS, TAU_E_MS, TAU_I_MS
from ._lists import connection_list, npz_bytes, tau_vector, write_into
from ._names import unit_id_list
from .brian2_builder import RATE_EQUATIONS

__all__ = ["SCRIPT_SIMULATORS", "SCRIPT_RTOL", "rate_script_files", "render_brian2",
           "render_nest", "write_rate_script"]

SCRIPT_SIMULATORS = ("nest", "brian2")
"""The simulators a standalone rate script is written for."""

SCRIPT_RTOL = 1e-6
"""A script's rates agree with eidecomp's when ||r - r_eidecomp|| /
||r_eidecomp|| is at most this (both runs settled:
eidecomp.params.SETTLE_TIME_CONSTANTS time constants of the slowest mode)."""

_HEAD = '''"""Rate models of a circuit assembled by eidecomp (generated file).

Usage: python {name} [--model linear|threshold-linear] [--segment-ms MS]

Reads circuit_rate_data.npz beside this file (signed connection list
W_full[post, pre] as pre, post, weight; time constants; the drive H, one
column per segment held in turn), runs tau dr/dt = -r + f(W_full r + h)
(linear: f the identity; threshold-linear: f = max(., 0) on the first
n_rect units) and prints, as JSON, the rates at the end of each segment
and a verdict: finite, nonnegative where rectified, and the relative
difference from eidecomp's own run of the same model ({rtol:g} or less
agrees). Exit status 0 when the verdict holds, 1 otherwise.
"""

import argparse
import json
import pathlib
import sys

import numpy as np

HERE = pathlib.Path(__file__).resolve().parent
MODELS = ("linear", "threshold-linear")
RTOL = {rtol!r}


def positive(text):
    value = float(text)
    if not (value > 0 and value < float("inf")):
        raise argparse.ArgumentTypeError("must be a positive number of ms")
    return value


def load():
    d = np.load(HERE / "circuit_rate_data.npz", allow_pickle=False)
    ap = argparse.ArgumentParser()
    ap.add_argument("--model", choices=MODELS, default=MODELS[0])
    ap.add_argument("--segment-ms", type=positive, default=float(d["segment_ms"]),
                    help="length of each drive segment in ms (default: the "
                    "export's, {settle} time constants of the slowest mode)")
    return ap.parse_args(), d


def verdict(args, d, rates):
    """Print the rates and the verdict as JSON; return the exit status."""
    n_rect = int(d["n_rect"]) if args.model != "linear" else 0
    key = "expected_" + args.model.replace("-", "_")
    finite = bool(np.isfinite(rates).all())
    nonnegative = bool((rates[:n_rect] >= 0).all()) if n_rect else None
    diff = None
    if key in d.files and args.segment_ms == float(d["segment_ms"]):
        ref = d[key]
        diff = float(np.linalg.norm(rates - ref) / max(np.linalg.norm(ref), 1e-300))
    holds = finite and nonnegative is not False and (diff is None or diff <= RTOL)
    print(json.dumps({{"simulator": SIMULATOR, "model": args.model,
                      "segment_ms": args.segment_ms,
                      "rates": list(map(float, rates[:, -1])),
                      "rates_by_segment": rates.T.tolist(),
                      "verdict": {{"finite": finite, "nonnegative": nonnegative,
                                  "relative_difference_from_eidecomp": diff,
                                  "holds": holds}}}}))
    return 0 if holds else 1
'''

_NEST = '''
SIMULATOR = "nest"


def main():
    import os

    os.environ.setdefault("PYNEST_QUIET", "1")
    import nest

    args, d = load()
    nest.ResetKernel()
    nest.verbosity = nest.VerbosityLevel.ERROR   # stdout holds only the JSON
    nest.resolution = float(d["dt_ms"])
    n, H = int(d["n"]), d["H"]
    k = int(d["n_rect"]) if args.model != "linear" else 0
    rate = {{"lambda": 1.0, "sigma": 0.0, "g": 1.0, "linear_summation": True,
            "rate": 0.0}}
    parts = [nest.Create(m, size, params=rate) for m, size in
             (("threshold_lin_rate_ipn", k), ("lin_rate_ipn", n - k)) if size]
    nodes = parts[0] if len(parts) == 1 else parts[0] + parts[1]
    nodes.set(tau=d["tau_ms"].tolist())
    drivers = None
    if k:   # a rectified unit's drive sits inside [.]_+: a held driver node
        drivers = nest.Create("lin_rate_ipn", k, params={{**rate, "tau": 1.0}})
        nest.Connect(drivers, nodes[:k], conn_spec="one_to_one",
                     syn_spec={{"synapse_model": "rate_connection_instantaneous",
                               "weight": 1.0}})
    ids = np.asarray(nodes.tolist())
    if len(d["weight"]):
        nest.Connect(ids[d["pre"]], ids[d["post"]], conn_spec="one_to_one",
                     syn_spec={{"synapse_model": "rate_connection_instantaneous",
                               "weight": d["weight"]}})
    rates = np.empty(H.shape)
    for s in range(H.shape[1]):
        if k:
            drivers.set(mu=H[:k, s].tolist(), rate=H[:k, s].tolist())
        if n > k:
            nodes[k:].set(mu=H[k:, s].tolist())
        nest.Simulate(args.segment_ms)
        rates[:, s] = nodes.get("rate")
    return verdict(args, d, rates)


if __name__ == "__main__":
    sys.exit(main())
'''

_BRIAN2 = '''
SIMULATOR = "brian2"


def main():
    import brian2 as b2

    args, d = load()
    b2.prefs.codegen.target = "numpy"
    n, H = int(d["n"]), d["H"]
    k = int(d["n_rect"]) if args.model != "linear" else 0
    dt = float(d["dt_ms"]) * b2.ms
    G = b2.NeuronGroup(n, """{equations}""", method="euler", dt=dt)
    G.tau = d["tau_ms"] * b2.ms
    G.rect = (np.arange(n) < k).astype(float)
    S = b2.Synapses(G, G, "w : 1\\ns_post = w * r_pre : 1 (summed)", dt=dt)
    if len(d["weight"]):
        S.connect(i=d["pre"], j=d["post"])
        S.w = d["weight"]
    net = b2.Network(G, S)
    rates = np.empty(H.shape)
    for s in range(H.shape[1]):
        G.h = H[:, s]
        net.run(args.segment_ms * b2.ms, namespace={{}})
        rates[:, s] = G.r[:]
    return verdict(args, d, rates)


if __name__ == "__main__":
    sys.exit(main())
'''


def script_text(simulator):
    name = f"circuit_{simulator}.py"
    body = {"nest": _NEST, "brian2": _BRIAN2}[simulator]
    return (_HEAD + body).format(name=name, rtol=SCRIPT_RTOL,
                                 settle=SETTLE_TIME_CONSTANTS,
                                 equations=RATE_EQUATIONS)


def rate_script_files(circuit, simulator, drive=None, *, tau_e=TAU_E_MS,
                      tau_i=TAU_I_MS, dt_ms=0.1, unit_ids=None, expected=None,
                      segment_ms=None, n_rect=None):
    """{file name: bytes} of the script for ``simulator`` and its data.

    ``drive``: the drive of W's units, N values or (N, T) (None: zero, one
    segment); ``expected``: {model name: rates (n, T)} of eidecomp's own
    runs, for the script's verdict; ``segment_ms``: each segment's length
    (default 2000 ms); ``n_rect``: how many leading units the
    threshold-linear model rectifies (default the E units). ``unit_ids``
    (the unit table's names) are stored in the data file as a string
    array; the script's text never contains them."""
    if simulator not in SCRIPT_SIMULATORS:
        raise ValueError(f"unknown simulator {simulator!r}")
    ids = unit_id_list(circuit.named(unit_ids), circuit.n_excitatory)
    h = (np.zeros((circuit.n_w_units, 1)) if drive is None
         else np.asarray(getattr(drive, "values", drive), dtype=float))
    h = h.reshape(circuit.n_w_units, -1)
    H = circuit.full_drive(h)
    pre, post, w = connection_list(circuit)
    n_e = circuit.n_excitatory
    data = {"n": np.array(H.shape[0]), "pre": pre, "post": post, "weight": w,
            "tau_ms": tau_vector(circuit, tau_e, tau_i), "H": H,
            "dt_ms": np.array(dt_ms),
            "segment_ms": np.array(2000.0 if segment_ms is None else segment_ms),
            "n_rect": np.array(n_e if n_rect is None else n_rect)}
    for model, rates in (expected or {}).items():
        data["expected_" + model.replace("-", "_")] = np.asarray(rates, float)
    if ids is not None:
        data["unit_ids"] = np.array(ids, dtype=str)
    return {f"circuit_{simulator}.py": script_text(simulator).encode(),
            "circuit_rate_data.npz": npz_bytes(data)}


def render_nest(circuit, *, features=None, positions=None, unit_ids=None,
                tau_e=TAU_E_MS, tau_i=TAU_I_MS, raw_csv=False, drive=None,
                period=DEFAULT_PERIOD, expected=None, segment_ms=None,
                n_rect=None):
    """The NEST folder (script and data) as {file name: bytes}; the
    arguments are :func:`rate_script_files`' (features, positions and
    ``raw_csv`` do not apply)."""
    return rate_script_files(circuit, "nest", drive, tau_e=tau_e, tau_i=tau_i,
                             unit_ids=unit_ids, expected=expected,
                             segment_ms=segment_ms, n_rect=n_rect)


def render_brian2(circuit, *, features=None, positions=None, unit_ids=None,
                  tau_e=TAU_E_MS, tau_i=TAU_I_MS, raw_csv=False, drive=None,
                  period=DEFAULT_PERIOD, expected=None, segment_ms=None,
                  n_rect=None):
    """The Brian2 folder (script and data) as {file name: bytes}; the
    arguments are :func:`rate_script_files`' (features, positions and
    ``raw_csv`` do not apply)."""
    return rate_script_files(circuit, "brian2", drive, tau_e=tau_e,
                             tau_i=tau_i, unit_ids=unit_ids, expected=expected,
                             segment_ms=segment_ms, n_rect=n_rect)


def write_rate_script(circuit, folder, simulator, h=None, **kwargs):
    """Write the script for ``simulator`` ("nest" or "brian2") and its data."""
    return write_into(folder, rate_script_files(circuit, simulator, h, **kwargs),
                      simulator)
