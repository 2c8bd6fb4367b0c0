"""Standalone NEST and Brian2 scripts of the rate model, data beside them.

``write_rate_script(circuit, folder, engine)`` writes ``circuit_<engine>.py``
(fixed code, the same for every circuit) and ``circuit_rate_data.npz``
(the signed connection list pre, post, weight; time constants; drive). The
scripts need only numpy and their simulator, not eidecomp; each runs the
rate model tau dr/dt = -r + W_full r + h (as eidecomp.export.nest_builder
and brian2_builder do) and prints the final rates as JSON.
"""

import numpy as np

from ..params import DEFAULT_PERIOD, TAU_E_MS, TAU_I_MS
from ._lists import connection_list, drive_vector, npz_bytes, tau_vector, write_into
from ._names import unit_id_list

__all__ = ["ENGINES", "rate_script_files", "render_brian2", "render_nest",
           "write_rate_script"]

ENGINES = ("nest", "brian2")

_HEAD = '''"""Rate model of a circuit assembled by eidecomp (generated file).

Usage: python {name} [--t-stop MS]

Reads circuit_rate_data.npz beside this file (signed connection list
W_full[post, pre] as pre, post, weight; time constants; drive h), runs
tau dr/dt = -r + W_full r + h and prints the final rates as JSON.
"""

import argparse
import json
import pathlib

import numpy as np

HERE = pathlib.Path(__file__).resolve().parent


def load():
    ap = argparse.ArgumentParser()
    ap.add_argument("--t-stop", type=float, default=2000.0)
    args = ap.parse_args()
    return args, np.load(HERE / "circuit_rate_data.npz", allow_pickle=False)
'''

_NEST = '''

def main():
    import os

    os.environ.setdefault("PYNEST_QUIET", "1")
    import nest

    args, d = load()
    nest.ResetKernel()
    nest.verbosity = nest.VerbosityLevel.ERROR   # stdout holds only the JSON
    nest.resolution = float(d["dt_ms"])
    n = int(d["n"])
    nodes = nest.Create("lin_rate_ipn", n, params={{
        "lambda": 1.0, "sigma": 0.0, "g": 1.0, "linear_summation": True}})
    nodes.set(tau=d["tau_ms"].tolist(), mu=d["h"].tolist())
    ids = np.asarray(nodes.tolist())
    if len(d["weight"]):
        nest.Connect(ids[d["pre"]], ids[d["post"]], conn_spec="one_to_one",
                     syn_spec={{"synapse_model": "rate_connection_instantaneous",
                               "weight": d["weight"]}})
    nest.Simulate(args.t_stop)
    print(json.dumps({{"engine": "nest", "t_stop_ms": args.t_stop,
                      "rates": list(map(float, nodes.get("rate")))}}))


if __name__ == "__main__":
    main()
'''

_BRIAN2 = '''

def main():
    import brian2 as b2

    args, d = load()
    b2.prefs.codegen.target = "numpy"
    G = b2.NeuronGroup(int(d["n"]), """
        dr/dt = (-r + s + h) / tau : 1
        s : 1
        h : 1 (constant)
        tau : second (constant)
        """, method="euler", dt=float(d["dt_ms"]) * b2.ms)
    G.h = d["h"]
    G.tau = d["tau_ms"] * b2.ms
    S = b2.Synapses(G, G, "w : 1\\ns_post = w * r_pre : 1 (summed)",
                    dt=float(d["dt_ms"]) * b2.ms)
    if len(d["weight"]):
        S.connect(i=d["pre"], j=d["post"])
        S.w = d["weight"]
    b2.Network(G, S).run(args.t_stop * b2.ms, namespace={{}})
    print(json.dumps({{"engine": "brian2", "t_stop_ms": args.t_stop,
                      "rates": list(map(float, G.r[:]))}}))


if __name__ == "__main__":
    main()
'''


def script_text(engine):
    name = f"circuit_{engine}.py"
    body = {"nest": _NEST, "brian2": _BRIAN2}[engine]
    return (_HEAD + body).format(name=name)


def rate_script_files(circuit, engine, h=None, *, tau_e=TAU_E_MS,
                      tau_i=TAU_I_MS, dt_ms=0.1, unit_ids=None):
    """{file name: bytes} of the script for ``engine`` and its data.

    ``unit_ids`` (the unit table's names) are stored in the data file as a
    string array, ``unit_ids``; the script's text never contains them."""
    if engine not in ENGINES:
        raise ValueError(f"unknown engine {engine!r}")
    ids = unit_id_list(circuit.named(unit_ids), circuit.n_excitatory)
    h = np.zeros(circuit.n_w_units) if h is None else h
    H = drive_vector(circuit, h)
    pre, post, w = connection_list(circuit)
    data = {"n": np.array(H.size), "pre": pre, "post": post, "weight": w,
            "tau_ms": tau_vector(circuit, tau_e, tau_i), "h": H,
            "dt_ms": np.array(dt_ms)}
    if ids is not None:
        data["unit_ids"] = np.array(ids, dtype=str)
    return {f"circuit_{engine}.py": script_text(engine).encode(),
            "circuit_rate_data.npz": npz_bytes(data)}


def render_nest(circuit, *, features=None, positions=None, unit_ids=None,
                tau_e=TAU_E_MS, tau_i=TAU_I_MS, raw_csv=False, drive=None,
                period=DEFAULT_PERIOD):
    """The NEST folder (script and data; ``drive`` the E units' drive h, N
    values, None for zero) as {file name: bytes} (features, positions and
    ``raw_csv`` do not apply)."""
    return rate_script_files(circuit, "nest", drive, tau_e=tau_e, tau_i=tau_i,
                             unit_ids=unit_ids)


def render_brian2(circuit, *, features=None, positions=None, unit_ids=None,
                  tau_e=TAU_E_MS, tau_i=TAU_I_MS, raw_csv=False, drive=None,
                  period=DEFAULT_PERIOD):
    """The Brian2 folder (script and data; ``drive`` the E units' drive h, N
    values, None for zero) as {file name: bytes} (features, positions and
    ``raw_csv`` do not apply)."""
    return rate_script_files(circuit, "brian2", drive, tau_e=tau_e,
                             tau_i=tau_i, unit_ids=unit_ids)


def write_rate_script(circuit, folder, engine, h=None, **kwargs):
    """Write the script for ``engine`` ("nest" or "brian2") and its data."""
    return write_into(folder, rate_script_files(circuit, engine, h, **kwargs),
                      engine)
