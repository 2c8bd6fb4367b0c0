"""A runnable PyNN script of the circuit, with its data in a separate file.

``write_pynn(circuit, folder)`` writes ``circuit_pynn.py`` (a fixed script,
the same for every circuit) and ``circuit_pynn_data.npz`` (population names
and sizes, connection lists with their receptor, drive, unit names).
Nothing from the circuit or a unit table is pasted into the code: the
script reads the .npz with ``allow_pickle=False``.

PyNN describes spiking cells, so the script maps the linear rate model
tau dr/dt = -r + W_full r + h onto current-based integrate-and-fire units
(``IF_curr_exp``, PyNN's defaults otherwise) at an operating point where
every unit fires and its rate is a smooth, nearly linear function of its
input current (docs/simulators.md gives the derivation):

* every unit gets ``tau_m`` = its population's time constant and a bias
  current of ``bias_ratio`` (2) times its own rheobase, (v_thresh - v_reset)
  c_m / tau_m, so every population fires tonically whatever its time
  constant; there the slope of the unit's f-I curve is ``gain`` =
  f'(I) = 1000 tau_m / (T^2 x (x - 1) I_rh) Hz/nA (x = bias_ratio,
  T = t_ref + tau_m L the interspike interval, L = ln(x / (x - 1)):
  67.4 Hz/nA at x = 2 and tau_m = 10 ms, 65.5 at 5 ms);
* the synaptic current decays with tau_syn = ``tau_syn_ratio`` x tau_m of
  the postsynaptic unit (1.5). A unit firing tonically follows its input
  current almost at once, so the synaptic current carries the rate model's
  dynamics, and it must be the slowest filter of the loop: with a fast
  synapse (0.25 tau_m) the membrane's lag made inhibition-stabilised
  circuits such as the demo's settle away from the rate model's operating
  point (r 0.82-0.91, slope 0.6-0.8 of the predicted rate changes; 0.997 and
  1.03 at 1.5). Never equal to tau_m, where PyNN's Brian2 backend's exact
  integrator divides by zero;
* a synapse of magnitude w becomes a weight of ``coupling`` w / (gain
  tau_syn 1e-3) nA on the ``excitatory`` or ``inhibitory`` receptor, the
  presynaptic population's kind (Dale's law; negative on the inhibitory
  one, as PyNN requires of current-based synapses), with a fixed delay: a spike
  train of rate nu Hz then moves the postsynaptic rate by ``coupling`` w nu,
  the rate model's w r with r in Hz;
* the E drive h adds ``rate_per_drive`` / gain nA (``rate_per_drive`` Hz per
  unit of h, 10 Hz);
* a background of zero mean: every unit receives two independent Poisson
  trains of ``background_hz`` (2000 Hz) each, one on its excitatory receptor
  and one on its inhibitory receptor, with equal and opposite weights chosen
  so that the current they sum to has a standard deviation of
  ``background_sd`` (0.3) times the unit's rheobase. By Campbell's theorem a
  Poisson train of rate nu through a synapse of weight w and decay tau_syn
  gives a current of variance nu w^2 tau_syn / 2, so two of them need
  w = background_sd I_rh / sqrt(nu tau_syn) (on the simulator's time grid
  a slightly smaller w: ``background_weight_nA``). Without it the tonically firing
  units phase-lock to one another and their rates stop following their
  input (measured on a planted 300-unit circuit: slope 0.13 of the predicted
  rate changes, r 0.47; with it, slope 1.00, r 0.998).

Linearised about the operating point, the mean rate changes of the spiking
network follow dr = rate_per_drive (I - coupling W_full)^-1 dh, the rate
model's own response at coupling 1 (``benchmarks/spiking.py`` measures how
closely). This is a modelling choice for exploring the circuit with spikes,
not an equivalence: the operating point is the bias, not the rate model's
fixed point, the f-I slope is the noiseless one, and refractoriness and the
rectification of units pushed below threshold are the spiking network's own.
"""

import numpy as np

from ..graph import synapse_kind
from ..params import DEFAULT_PERIOD, TAU_E_MS, TAU_I_MS
from ..types import BLOCKS
from ._lists import drive_vector, npz_bytes, population_taus, write_into
from ._names import unit_id_list

__all__ = ["BACKGROUND_HZ", "BACKGROUND_SD", "BIAS_RATIO", "IF_CURR_EXP",
           "RATE_PER_DRIVE_HZ",
           "SCRIPT", "TAU_SYN_RATIO", "background_weight_nA", "gain_hz_per_nA",
           "pynn_files", "rate_hz", "render_pynn", "rheobase_nA",
           "spiking_data", "write_pynn"]

SCRIPT = '''"""PyNN model of a circuit assembled by eidecomp (generated file).

Usage: python circuit_pynn.py [--simulator nest|brian2] [--t-stop 1000] [--save]

Reads circuit_pynn_data.npz beside this file and prints, as JSON, the number
of spikes fired by each population and every unit's rate (Hz). The
rate-to-spiking mapping is described in eidecomp's docs/simulators.md.
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
    ap.add_argument("--save", action="store_true",
                    help="also write each population's spike trains "
                    "(spikes_<population>.pkl, neo PickleIO)")
    args = ap.parse_args()
    sim = importlib.import_module("pyNN." + args.simulator)
    data = np.load(HERE / "circuit_pynn_data.npz", allow_pickle=False)
    seed = int(data["seed"])
    if args.simulator == "nest":        # the background's Poisson trains
        sim.setup(timestep=float(data["timestep_ms"]), rng_seed=seed + 1)
    else:
        sim.setup(timestep=float(data["timestep_ms"]))
        if args.simulator == "brian2":
            importlib.import_module("brian2").seed(seed + 1)
    sizes = data["sizes"].astype(int)
    starts = np.concatenate([[0], np.cumsum(sizes)])
    rng = np.random.default_rng(seed)
    pops = {}
    for k, name in enumerate(data["populations"].tolist()):
        if sizes[k] == 0:
            continue
        offsets = data["i_offset"][starts[k]:starts[k + 1]]
        tau_syn = float(data["tau_syn_ms"][k])
        cells = sim.IF_curr_exp(tau_m=float(data["tau_ms"][k]),
                                tau_syn_E=tau_syn, tau_syn_I=tau_syn,
                                i_offset=offsets.tolist())
        pops[name] = sim.Population(int(sizes[k]), cells, label=name)
        # membrane potentials start spread between reset and threshold (a
        # seeded draw): tonically firing units start out of phase
        pops[name].initialize(v=rng.uniform(float(data["v_reset_mV"]),
                                            float(data["v_thresh_mV"]),
                                            int(sizes[k])))
        pops[name].record("spikes")
        # background of zero mean: two independent Poisson trains per unit,
        # on opposite receptors with opposite weights
        w = float(data["background_weight_nA"][k])
        for sign, receptor in ((1.0, "excitatory"), (-1.0, "inhibitory")):
            if w == 0.0:
                break
            source = sim.Population(int(sizes[k]), sim.SpikeSourcePoisson(
                rate=float(data["background_hz"])), label=name + "_background")
            sim.Projection(source, pops[name], sim.OneToOneConnector(),
                           sim.StaticSynapse(weight=sign * w,
                                             delay=float(data["timestep_ms"])),
                           receptor_type=receptor)
    for k in range(int(data["n_projections"])):
        pre = str(data["proj_pre"][k])
        post = str(data["proj_post"][k])
        conns = data["proj_%d" % k]
        sim.Projection(pops[pre], pops[post],
                       sim.FromListConnector([tuple(row) for row in conns]),
                       receptor_type=str(data["proj_receptor"][k]))
    sim.run(args.t_stop)
    counts, rates = {}, {}
    for name, p in pops.items():
        trains = p.get_data().segments[0].spiketrains
        n = [len(st) for st in trains]       # in the order of the units
        counts[name] = int(sum(n))
        rates[name] = [1000.0 * k / args.t_stop for k in n]
        if args.save:                    # spike trains, neo's pickle format
            p.write_data(str(HERE / ("spikes_%s.pkl" % name)))
    sim.end()
    print(json.dumps({"t_stop_ms": args.t_stop, "spikes": counts,
                      "rates_hz": rates}))


if __name__ == "__main__":
    main()
'''


IF_CURR_EXP = {"cm": 1.0, "tau_refrac": 0.1, "v_rest": -65.0, "v_reset": -65.0,
               "v_thresh": -50.0}
"""PyNN's IF_curr_exp defaults (pyNN.standardmodels.cells.IF_curr_exp: nF,
ms, mV) that the mapping keeps; the PyNN script leaves them to PyNN, the
NeuroML2 export writes them. Checked against PyNN 0.13's
``IF_curr_exp.default_parameters`` by
tests/test_simulators.py::test_if_curr_exp_defaults_are_pynns."""
_V_RESET_MV, _V_THRESH_MV = IF_CURR_EXP["v_reset"], IF_CURR_EXP["v_thresh"]
_CM_NF, _T_REFRAC_MS = IF_CURR_EXP["cm"], IF_CURR_EXP["tau_refrac"]

BIAS_RATIO = 2.0        # bias current / rheobase: every unit fires
TAU_SYN_RATIO = 1.5     # tau_syn / tau_m of the postsynaptic unit
RATE_PER_DRIVE_HZ = 10.0
BACKGROUND_HZ = 2000.0  # rate of each of a unit's two background trains
BACKGROUND_SD = 0.3     # sd of the background current / rheobase


def rheobase_nA(tau_m_ms):
    """The least constant current that makes a PyNN IF_curr_exp unit with
    its default parameters fire: (v_thresh - v_reset) cm / tau_m.

    >>> rheobase_nA([10.0, 5.0])
    array([1.5, 3. ])
    """
    return (_V_THRESH_MV - _V_RESET_MV) * _CM_NF / np.asarray(tau_m_ms, float)


def rate_hz(current_nA, tau_m_ms):
    """The firing rate of a PyNN IF_curr_exp unit (default parameters) under
    a constant current: 1000 / (t_ref + tau_m ln(x / (x - 1))), x the
    current over the rheobase; 0 at or below it.

    >>> round(float(rate_hz(3.0, 10.0)), 2)     # twice the rheobase
    142.22
    """
    x = np.asarray(current_nA, float) / rheobase_nA(tau_m_ms)
    with np.errstate(divide="ignore", invalid="ignore"):
        period = _T_REFRAC_MS + np.asarray(tau_m_ms) * np.log(x / (x - 1.0))
        return np.where(x > 1.0, 1000.0 / period, 0.0)


def gain_hz_per_nA(tau_m_ms, bias_ratio=BIAS_RATIO):
    """The slope of :func:`rate_hz` at ``bias_ratio`` x the rheobase, Hz/nA
    (exact derivative, refractory period included).

    >>> round(float(gain_hz_per_nA(10.0)), 1), round(float(gain_hz_per_nA(5.0)), 1)
    (67.4, 65.5)
    """
    tau = np.asarray(tau_m_ms, float)
    x = float(bias_ratio)
    L = np.log(x / (x - 1.0))
    period = _T_REFRAC_MS + tau * L
    # d rate / dI = 1000 tau / (period^2 x (x - 1) I_rh)
    return 1000.0 * tau / (period ** 2 * x * (x - 1.0) * rheobase_nA(tau))


def background_weight_nA(tau_m_ms, tau_syn_ms, sd=BACKGROUND_SD,
                         rate_hz=BACKGROUND_HZ, timestep_ms=0.1):
    """The weight (nA) of each of a unit's two background Poisson trains
    (opposite signs, ``rate_hz`` each) that makes their summed current's
    standard deviation ``sd`` times the unit's rheobase; 0 when ``sd`` or
    ``rate_hz`` is 0.

    By Campbell's theorem a Poisson train of rate nu through a synapse of
    weight w and decay tau gives a current of variance nu w^2 tau / 2. The
    simulators deliver spikes on their time grid dt, where the sum is
    nu dt w^2 / (1 - exp(-2 dt / tau)) (the same in the limit dt -> 0, and
    4 % higher in sd at dt = 0.1 ms, tau = 1.25 ms); w is set from that.

    >>> round(float(background_weight_nA(10.0, 2.5)), 4)   # 0.45 nA sd
    0.1973
    """
    tau = np.asarray(tau_syn_ms, float)
    if not (sd > 0 and rate_hz > 0):
        return np.zeros_like(tau)
    dt = float(timestep_ms)
    per_train = rate_hz * dt * 1e-3 / -np.expm1(-2.0 * dt / tau)
    return sd * rheobase_nA(tau_m_ms) / np.sqrt(2.0 * per_train)


def _bias(circuit, taus, gain, bias_ratio, coupling):
    """Each unit's bias current (nA): the current that puts it at
    ``bias_ratio`` x its rheobase once its synaptic input at the operating
    point is counted, every unit firing at :func:`rate_hz` of that current
    (the mean-field operating point: the recurrent input a unit gets there,
    coupling (W_full r0)_i Hz, is taken off its bias)."""
    sizes = [p.size for p in circuit.populations]
    target = np.repeat(bias_ratio * rheobase_nA(taus), sizes)
    r0 = rate_hz(target, np.repeat(taus, sizes))
    recurrent_hz = circuit.signed_weights() @ r0
    return target - coupling * recurrent_hz / np.repeat(gain, sizes)


def pynn_files(circuit, h=None, *, tau_e=TAU_E_MS, tau_i=TAU_I_MS,
               unit_ids=None, **mapping):
    """{file name: bytes} of the script and its data (:func:`spiking_data`,
    whose other keyword arguments ``mapping`` takes).

    ``unit_ids`` (the unit table's names) are stored in the data file as a
    string array, ``unit_ids``; the script's text never contains them."""
    data = spiking_data(circuit, h, tau_e=tau_e, tau_i=tau_i, **mapping)
    ids = unit_id_list(circuit.named(unit_ids), circuit.n_excitatory)
    if ids is not None:
        data["unit_ids"] = np.array(ids, dtype=str)
    return {"circuit_pynn.py": SCRIPT.encode(),
            "circuit_pynn_data.npz": npz_bytes(data)}


def spiking_data(circuit, h=None, *, tau_e=TAU_E_MS, tau_i=TAU_I_MS,
                 bias_ratio=BIAS_RATIO, tau_syn_ratio=TAU_SYN_RATIO,
                 rate_per_drive=RATE_PER_DRIVE_HZ, coupling=1.0, delay_ms=0.1,
                 timestep_ms=0.1, seed=0, background_sd=BACKGROUND_SD,
                 background_hz=BACKGROUND_HZ):
    """The spiking model of the circuit as arrays (the mapping of the
    module's docstring; ``coupling`` scales every synapse, 1 for the rate
    model's own; ``background_sd`` 0 leaves the background out; ``seed``
    sets the starting potentials and the simulator's random numbers): what
    the PyNN script reads and the NeuroML2 export writes as elements."""
    if not bias_ratio > 1:
        raise ValueError(f"bias_ratio must exceed 1, got {bias_ratio!r}")
    if not (background_sd >= 0 and background_hz >= 0):
        raise ValueError(f"background_sd and background_hz must be >= 0, got "
                         f"{background_sd!r} and {background_hz!r}")
    h = np.zeros(circuit.n_w_units) if h is None else h
    H = drive_vector(circuit, h)
    pops = circuit.populations
    sizes = np.array([p.size for p in pops])
    taus = population_taus(circuit, tau_e, tau_i)
    gain = gain_hz_per_nA(taus, bias_ratio)
    tau_syn = tau_syn_ratio * taus
    per_unit = {p.name: k for k, p in enumerate(pops)}
    data = {"populations": np.array([p.name for p in pops], dtype=str),
            "sizes": sizes, "tau_ms": taus, "tau_syn_ms": tau_syn,
            "gain_hz_per_nA": gain,
            "background_hz": np.array(float(background_hz)),
            "background_weight_nA": background_weight_nA(
                taus, tau_syn, background_sd, background_hz, timestep_ms),
            "rate_per_drive_hz": np.array(float(rate_per_drive)),
            "coupling": np.array(float(coupling)),
            "seed": np.array(int(seed)),
            "v_reset_mV": np.array(_V_RESET_MV),
            "v_thresh_mV": np.array(_V_THRESH_MV),
            "timestep_ms": np.array(timestep_ms),
            "i_offset": _bias(circuit, taus, gain, bias_ratio, coupling)
            + np.repeat(rate_per_drive / gain, sizes) * H}
    pres, posts, receptors = [], [], []
    for b in BLOCKS:
        J = getattr(circuit, b.name)
        i, j = np.nonzero(J)
        if not len(i):
            continue
        k = per_unit[b.post_name]          # the receiving unit sets the scale
        nA = coupling / (gain[k] * tau_syn[k] * 1e-3)
        if synapse_kind(b) == "inhibitory":
            nA = -nA  # PyNN's convention: current-based inhibitory weights < 0
        data[f"proj_{len(pres)}"] = np.column_stack(
            [j, i, nA * J[i, j], np.full(len(i), float(delay_ms))])
        pres.append(b.pre_name)
        posts.append(b.post_name)
        receptors.append(synapse_kind(b))  # PyNN's receptor types
    data["n_projections"] = np.array(len(pres))
    data["proj_pre"] = np.array(pres, dtype=str)
    data["proj_post"] = np.array(posts, dtype=str)
    data["proj_receptor"] = np.array(receptors, dtype=str)
    return data


def render_pynn(circuit, *, features=None, positions=None, unit_ids=None,
                tau_e=TAU_E_MS, tau_i=TAU_I_MS, raw_csv=False, drive=None,
                period=DEFAULT_PERIOD):
    """The PyNN folder (script and data; ``drive`` the E units' drive h, N
    values, None for zero) as {file name: bytes} (features, positions and
    ``raw_csv`` do not apply)."""
    return pynn_files(circuit, drive, tau_e=tau_e, tau_i=tau_i,
                      unit_ids=unit_ids)


def write_pynn(circuit, folder, h=None, **kwargs):
    """Write circuit_pynn.py and circuit_pynn_data.npz into ``folder``."""
    return write_into(folder, pynn_files(circuit, h, **kwargs), "pynn")
