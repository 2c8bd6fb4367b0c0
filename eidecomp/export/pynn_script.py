"""A runnable PyNN script of the circuit, with its data in a separate file.

``write_pynn(circuit, folder)`` writes ``circuit_pynn.py`` (a fixed script,
the same for every circuit) and ``circuit_pynn_data.npz`` (population sizes,
connection lists, drive). Nothing from the circuit or a unit table is
pasted into the code: the script reads the .npz with ``allow_pickle=False``.

PyNN describes spiking cells, so the script maps the rate model onto
current-based integrate-and-fire units (``IF_curr_exp``):

* every unit gets ``tau_m`` = its population's time constant, and a constant
  current ``i_offset = bias_nA + nA_per_drive * h`` (h = 0 for
  interneurons); the default bias sits just above rheobase
  ((v_thresh - v_rest) cm / tau_m = 1.5 nA at tau_m = 10 ms with PyNN's
  defaults), so every unit fires tonically;
* a synapse of magnitude w becomes a weight of ``nA_per_weight * w`` nA on
  the ``excitatory`` or ``inhibitory`` receptor, the presynaptic
  population's kind (Dale's law), with a fixed delay.

This is a modelling choice for exploring the circuit in a spiking simulator,
not an equivalence with the rate model.
"""

import numpy as np

from ._lists import drive_vector, npz_bytes

__all__ = ["SCRIPT", "pynn_files", "write_pynn"]

_BLOCKS = (("E", "E", "J_EE"), ("E", "I_untuned", "J_EU"),
           ("I_untuned", "E", "J_UE"), ("E", "I_tuned", "J_ET"),
           ("I_tuned", "E", "J_TE"))

SCRIPT = '''"""PyNN model of a circuit assembled by eidecomp (generated file).

Usage: python circuit_pynn.py [--simulator nest] [--t-stop 1000]

Reads circuit_pynn_data.npz beside this file and prints, as JSON, the number
of spikes fired by each population. The rate-to-spiking mapping is described
in eidecomp's docs/simulators.md.
"""

import argparse
import importlib
import json
import pathlib

import numpy as np

HERE = pathlib.Path(__file__).resolve().parent
POPULATIONS = ("E", "I_untuned", "I_tuned")


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\\n")[0])
    ap.add_argument("--simulator", default="nest")
    ap.add_argument("--t-stop", type=float, default=1000.0)
    args = ap.parse_args()
    sim = importlib.import_module("pyNN." + args.simulator)
    data = np.load(HERE / "circuit_pynn_data.npz", allow_pickle=False)
    sim.setup(timestep=float(data["timestep_ms"]))
    pops = {}
    for k, name in enumerate(POPULATIONS):
        size = int(data["sizes"][k])
        if size == 0:
            continue
        cells = sim.IF_curr_exp(tau_m=float(data["tau_ms"][k]),
                                i_offset=data["i_offset_" + name].tolist())
        pops[name] = sim.Population(size, cells, label=name)
        pops[name].record("spikes")
    for k in range(int(data["n_projections"])):
        pre = str(data["proj_pre"][k])
        post = str(data["proj_post"][k])
        conns = data["proj_%d" % k]
        receptor = "excitatory" if pre == "E" else "inhibitory"
        sim.Projection(pops[pre], pops[post],
                       sim.FromListConnector([tuple(row) for row in conns]),
                       receptor_type=receptor)
    sim.run(args.t_stop)
    counts = {name: int(sum(len(st) for st in
                            p.get_data().segments[0].spiketrains))
              for name, p in pops.items()}
    sim.end()
    print(json.dumps({"t_stop_ms": args.t_stop, "spikes": counts}))


if __name__ == "__main__":
    main()
'''


def pynn_files(circuit, h=None, *, tau_e=10.0, tau_i=10.0, nA_per_weight=0.1,
               nA_per_drive=1.0, bias_nA=1.6, delay_ms=1.0, timestep_ms=0.1,
               unit_ids=None):
    """{file name: bytes} of the script and its data.

    ``unit_ids`` (the unit table's names) are stored in the data file as a
    string array, ``unit_ids``; the script's text never contains them."""
    h = np.zeros(circuit.n_excitatory) if h is None else h
    H = drive_vector(circuit, h)
    n_e, n_u = circuit.n_excitatory, circuit.n_untuned
    offsets = bias_nA + nA_per_drive * H
    data = {"sizes": np.array([n_e, n_u, circuit.n_tuned]),
            "tau_ms": np.array([tau_e, tau_i, tau_i], dtype=float),
            "timestep_ms": np.array(timestep_ms),
            "i_offset_E": offsets[:n_e],
            "i_offset_I_untuned": offsets[n_e:n_e + n_u],
            "i_offset_I_tuned": offsets[n_e + n_u:]}
    pres, posts = [], []
    for post, pre, block in _BLOCKS:
        J = getattr(circuit, block)
        i, j = np.nonzero(J)
        if not len(i):
            continue
        data[f"proj_{len(pres)}"] = np.column_stack(
            [j, i, nA_per_weight * J[i, j], np.full(len(i), float(delay_ms))])
        pres.append(pre)
        posts.append(post)
    data["n_projections"] = np.array(len(pres))
    data["proj_pre"] = np.array(pres, dtype="U16")
    data["proj_post"] = np.array(posts, dtype="U16")
    if unit_ids is not None:
        data["unit_ids"] = np.array([str(u) for u in unit_ids], dtype=str)
    return {"circuit_pynn.py": SCRIPT.encode(),
            "circuit_pynn_data.npz": npz_bytes(data)}


def write_pynn(circuit, folder, h=None, **kwargs):
    """Write circuit_pynn.py and circuit_pynn_data.npz into ``folder``."""
    from pathlib import Path

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    for name, data in pynn_files(circuit, h, **kwargs).items():
        (folder / name).write_bytes(data)
    return folder
