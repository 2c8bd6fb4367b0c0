"""A runnable PyNN script of the circuit, with its data in a separate file.

``write_pynn(circuit, folder)`` writes ``circuit_pynn.py`` (a fixed script,
the same for every circuit) and ``circuit_pynn_data.npz`` (population names
and sizes, connection lists with their receptor, drive, unit names).
Nothing from the circuit or a unit table is pasted into the code: the
script reads the .npz with ``allow_pickle=False``.

PyNN describes spiking cells, so the script maps the rate model onto
current-based integrate-and-fire units (``IF_curr_exp``):

* every unit gets ``tau_m`` = its population's time constant, and a constant
  current ``i_offset = rheobase + above_rheobase_nA + nA_per_drive * h``
  (h = 0 for interneurons), the rheobase of an integrate-and-fire unit being
  (v_thresh - v_rest) cm / tau_m (1.5 nA at tau_m = 10 ms, 3 nA at 5 ms with
  PyNN's IF_curr_exp defaults v_rest = -65 mV, v_thresh = -50 mV,
  cm = 1 nF), so every unit fires tonically whatever its time constant;
* a synapse of magnitude w becomes a weight of ``nA_per_weight * w`` nA on
  the ``excitatory`` or ``inhibitory`` receptor, the presynaptic
  population's kind (Dale's law), with a fixed delay.

This is a modelling choice for exploring the circuit in a spiking simulator,
not an equivalence with the rate model.
"""

import numpy as np

from ..graph import synapse_kind
from ..params import TAU_E_MS, TAU_I_MS
from ..types import BLOCKS
from ._lists import drive_vector, npz_bytes, population_taus, write_into
from ._names import unit_id_list

__all__ = ["SCRIPT", "pynn_files", "render_pynn", "rheobase_nA", "write_pynn"]

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


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\\n")[0])
    ap.add_argument("--simulator", default="nest")
    ap.add_argument("--t-stop", type=float, default=1000.0)
    args = ap.parse_args()
    sim = importlib.import_module("pyNN." + args.simulator)
    data = np.load(HERE / "circuit_pynn_data.npz", allow_pickle=False)
    sim.setup(timestep=float(data["timestep_ms"]))
    sizes = data["sizes"].astype(int)
    starts = np.concatenate([[0], np.cumsum(sizes)])
    pops = {}
    for k, name in enumerate(data["populations"].tolist()):
        if sizes[k] == 0:
            continue
        offsets = data["i_offset"][starts[k]:starts[k + 1]]
        cells = sim.IF_curr_exp(tau_m=float(data["tau_ms"][k]),
                                i_offset=offsets.tolist())
        pops[name] = sim.Population(int(sizes[k]), cells, label=name)
        pops[name].record("spikes")
    for k in range(int(data["n_projections"])):
        pre = str(data["proj_pre"][k])
        post = str(data["proj_post"][k])
        conns = data["proj_%d" % k]
        sim.Projection(pops[pre], pops[post],
                       sim.FromListConnector([tuple(row) for row in conns]),
                       receptor_type=str(data["proj_receptor"][k]))
    sim.run(args.t_stop)
    counts = {name: int(sum(len(st) for st in
                            p.get_data().segments[0].spiketrains))
              for name, p in pops.items()}
    sim.end()
    print(json.dumps({"t_stop_ms": args.t_stop, "spikes": counts}))


if __name__ == "__main__":
    main()
'''


# PyNN's IF_curr_exp defaults (pyNN.standardmodels.cells.IF_curr_exp)
_V_REST_MV, _V_THRESH_MV, _CM_NF = -65.0, -50.0, 1.0


def rheobase_nA(tau_m_ms):
    """The least constant current that makes a PyNN IF_curr_exp unit with
    its default parameters fire: (v_thresh - v_rest) cm / tau_m.

    >>> rheobase_nA([10.0, 5.0])
    array([1.5, 3. ])
    """
    return (_V_THRESH_MV - _V_REST_MV) * _CM_NF / np.asarray(tau_m_ms, float)


def pynn_files(circuit, h=None, *, tau_e=TAU_E_MS, tau_i=TAU_I_MS,
               nA_per_weight=0.1, nA_per_drive=1.0, above_rheobase_nA=0.1,
               delay_ms=1.0, timestep_ms=0.1, unit_ids=None):
    """{file name: bytes} of the script and its data.

    ``unit_ids`` (the unit table's names) are stored in the data file as a
    string array, ``unit_ids``; the script's text never contains them."""
    ids = unit_id_list(unit_ids, circuit.n_excitatory)
    h = np.zeros(circuit.n_excitatory) if h is None else h
    H = drive_vector(circuit, h)
    pops = circuit.populations
    sizes = np.array([p.size for p in pops])
    taus = population_taus(circuit, tau_e, tau_i)
    bias = np.repeat(rheobase_nA(taus) + above_rheobase_nA, sizes)
    data = {"populations": np.array([p.name for p in pops], dtype=str),
            "sizes": sizes, "tau_ms": taus,
            "timestep_ms": np.array(timestep_ms),
            "i_offset": bias + nA_per_drive * H}
    pres, posts, receptors = [], [], []
    for b in BLOCKS:
        J = getattr(circuit, b.name)
        i, j = np.nonzero(J)
        if not len(i):
            continue
        data[f"proj_{len(pres)}"] = np.column_stack(
            [j, i, nA_per_weight * J[i, j], np.full(len(i), float(delay_ms))])
        pres.append(b.pre_name)
        posts.append(b.post_name)
        receptors.append(synapse_kind(b))  # PyNN's receptor types
    data["n_projections"] = np.array(len(pres))
    data["proj_pre"] = np.array(pres, dtype=str)
    data["proj_post"] = np.array(posts, dtype=str)
    data["proj_receptor"] = np.array(receptors, dtype=str)
    if ids is not None:
        data["unit_ids"] = np.array(ids, dtype=str)
    return {"circuit_pynn.py": SCRIPT.encode(),
            "circuit_pynn_data.npz": npz_bytes(data)}


def render_pynn(circuit, *, features=None, positions=None, unit_ids=None,
                tau_e=TAU_E_MS, tau_i=TAU_I_MS, raw_csv=False, drive=None):
    """The PyNN folder (script and data; ``drive`` the E units' drive h, N
    values, None for zero) as {file name: bytes} (features, positions and
    ``raw_csv`` do not apply)."""
    return pynn_files(circuit, drive, tau_e=tau_e, tau_i=tau_i,
                      unit_ids=unit_ids)


def write_pynn(circuit, folder, h=None, **kwargs):
    """Write circuit_pynn.py and circuit_pynn_data.npz into ``folder``."""
    return write_into(folder, pynn_files(circuit, h, **kwargs))
