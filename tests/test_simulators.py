"""The circuit in real simulators: NEST and Brian2 against the analytic
fixed point (I - W_full)^-1 h (numpy.linalg.solve), and the weights each
simulator reads back against the circuit's. The simulators are the
references here; they are an optional extra, installed by .ci/run.
"""

import numpy as np
import pytest
from conftest import require

from eidecomp import assemble
from eidecomp.datasets import make_planted_circuit
from eidecomp.dynamics import spectral_abscissa


@pytest.fixture(scope="module")
def circuit():
    # the 100-E / 25-I circuit from the assembler, W scaled so that
    # the original network is stable
    W, _, _ = make_planted_circuit(100, n_untuned=3, n_tuned=22, pool=6, seed=2)
    W = 0.6 * W / max(1.0, spectral_abscissa(W))
    c = assemble(W, ei_ratio="4:1", baselines=False)
    h = np.random.default_rng(0).uniform(0.5, 1.5, 100)
    W_full = c.signed_weights()
    target = np.linalg.solve(np.eye(125) - W_full, np.r_[h, np.zeros(25)])
    return c, h, W_full, target


def _rel(a, b):
    return np.linalg.norm(a - b) / np.linalg.norm(b)


@pytest.mark.parametrize("tau_i", [5.0, 10.0])
def test_nest_rate_reaches_fixed_point(circuit, tau_i):
    require("nest")
    from eidecomp.export import nest_builder

    c, h, W_full, target = circuit
    rates, nodes = nest_builder.run_rate(c, h, tau_e=10.0, tau_i=tau_i,
                                         t_ms=2000.0)
    assert _rel(rates, target) < 1e-6
    np.testing.assert_array_equal(nest_builder.read_weights(nodes), W_full)


@pytest.mark.parametrize("tau_i", [5.0, 10.0])
def test_brian2_rate_reaches_fixed_point(circuit, tau_i):
    require("brian2")
    from eidecomp.export import brian2_builder

    c, h, W_full, target = circuit
    rates, S = brian2_builder.run_rate(c, h, tau_e=10.0, tau_i=tau_i,
                                       t_ms=2000.0)
    assert _rel(rates, target) < 1e-6
    np.testing.assert_array_equal(brian2_builder.read_weights(S, 125), W_full)


def test_neuroml_validates_and_round_trips(circuit, tmp_path):
    require("neuroml")
    from neuroml.utils import validate_neuroml2

    from eidecomp.export import neuroml2

    c = circuit[0]
    path = tmp_path / "c.net.nml"
    neuroml2.write_neuroml(c, path)
    validate_neuroml2(str(path))  # libNeuroML's own schema check
    blocks = neuroml2.read_blocks(path)
    for name, J in blocks.items():   # through the currents (nA) and back
        np.testing.assert_allclose(J, getattr(c, name), rtol=1e-13, atol=0)


def test_neuroml_is_one_kind_of_spiking_model_and_carries_its_drive(circuit,
                                                                   tmp_path):
    """Cells, synapses and inputs all spiking (PyNN's IF_curr_exp,
    expCurrSynapse, pulse and Poisson inputs: NeuroML2's PyNN-compatible
    elements); each unit's current is the PyNN export's (bias plus drive),
    so the drive is in the file. References: libNeuroML's reader and
    validator, and the PyNN export's own data (numpy's npz reader)."""
    require("neuroml")
    import io

    from neuroml.loaders import read_neuroml2_file
    from neuroml.utils import validate_neuroml2

    from eidecomp.export import render
    from eidecomp.export.pynn_script import RATE_PER_DRIVE_HZ, gain_hz_per_nA

    c, h, _, _ = circuit
    path = tmp_path / "c.net.nml"
    path.write_bytes(render("neuroml", c, drive=h))
    validate_neuroml2(str(path))
    doc = read_neuroml2_file(str(path))
    assert len(doc.IF_curr_exp) == 3 and not doc.iaf_tau_cells
    assert not doc.linear_graded_synapses and not doc.silent_synapses
    assert len(doc.exp_curr_synapses) == 3
    net = doc.networks[0]
    assert net.projections and not net.continuous_projections
    currents = {il.populations: np.array([float(i.weight) for i in il.input_ws])
                for il in net.input_lists if il.id.endswith("_drive")}
    with np.load(io.BytesIO(render("pynn", c, drive=h)["circuit_pynn_data.npz"]),
                 allow_pickle=False) as z:
        np.testing.assert_allclose(np.concatenate(
            [currents[p] for p in ("E", "I_untuned", "I_tuned")]),
            z["i_offset"], rtol=1e-15)
    # the drive's share: rate_per_drive / gain x h on the E units
    zero = read_neuroml2_file(str(_written(tmp_path / "z.net.nml",
                                           render("neuroml", c))))
    base = [np.array([float(i.weight) for i in il.input_ws])
            for il in zero.networks[0].input_lists if il.id == "E_drive"][0]
    np.testing.assert_allclose(currents["E"] - base,
                               RATE_PER_DRIVE_HZ / gain_hz_per_nA(10.0) * h,
                               rtol=1e-12)


def _written(path, data):
    path.write_bytes(data)
    return path


def test_pynn_script_runs_under_pynn_nest(circuit, tmp_path):
    # pyNN.nest is imported only by the script, in its own process: on first
    # import it tries to compile optional NEST extensions with the compiler
    # path recorded in the NEST wheel, and warns when that path is missing
    require("pyNN")
    require("nest")
    import json
    import subprocess
    import sys

    from eidecomp.export import pynn_script

    c, h = circuit[0], circuit[1]
    pynn_script.write_pynn(c, tmp_path, h)
    run = subprocess.run([sys.executable, str(tmp_path / "circuit_pynn.py"),
                          "--t-stop", "300"], capture_output=True, text=True,
                         timeout=600, env={**__import__("os").environ,
                                           "PYNEST_QUIET": "1"})
    assert run.returncode == 0, run.stderr[-2000:]
    out = json.loads(run.stdout.strip().splitlines()[-1])
    assert set(out["spikes"]) == {"E", "I_untuned", "I_tuned"}
    assert all(n > 0 for n in out["spikes"].values()), out


@pytest.mark.parametrize("simulator", ["nest", "brian2"])
def test_standalone_rate_scripts(circuit, tmp_path, simulator):
    require(simulator)
    import json
    import os
    import subprocess
    import sys

    from eidecomp.export import rate_scripts

    c, h, _, target = circuit
    rate_scripts.write_rate_script(c, tmp_path, simulator, h)
    run = subprocess.run([sys.executable, str(tmp_path / f"circuit_{simulator}.py")],
                         capture_output=True, text=True, timeout=600,
                         env={**os.environ, "PYNEST_QUIET": "1"})
    assert run.returncode == 0, run.stderr[-2000:]
    rates = np.array(json.loads(run.stdout.strip().splitlines()[-1])["rates"])
    assert _rel(rates, target) < 1e-6


@pytest.fixture(scope="module")
def bundle(tmp_path_factory, circuit):
    from eidecomp.cli import main

    d = tmp_path_factory.mktemp("bundle")
    W, _, _ = make_planted_circuit(100, n_untuned=3, n_tuned=22, pool=6, seed=2)
    np.save(d / "w.npy", 0.6 * W / max(1.0, spectral_abscissa(W)))
    assert main(["run", str(d / "w.npy"), "-o", str(d / "c"), "-q"]) == 0
    return d / "c"


@pytest.mark.parametrize("simulator", ["internal", "nest", "brian2"])
def test_simulate_command(bundle, simulator, capsys):
    if simulator != "internal":
        require(simulator)
    from eidecomp.cli import main
    from eidecomp.pipeline import run_simulate

    r = run_simulate(bundle, simulator=simulator, tau_i=5.0)
    assert r["circuit_vs_fixed_point_W_eff"] < 1e-6
    assert r["original_vs_fixed_point_W"] < 1e-6
    # the circuit reproduces the original responses as well as it
    # reproduces W (both small on this planted circuit)
    assert r["circuit_vs_original"] < 0.05
    assert main(["simulate", str(bundle), "--simulator", simulator]) == 0
    assert "vs fixed point of W_eff" in capsys.readouterr().out


@pytest.mark.parametrize("fmt", ["neuroml", "pynn", "nest", "brian2"])
def test_export_command_simulator_formats(bundle, tmp_path, fmt):
    require({"neuroml": "neuroml", "pynn": "pyNN", "nest": "nest",
             "brian2": "brian2"}[fmt])
    from eidecomp.cli import main

    out = tmp_path / ("c.net.nml" if fmt == "neuroml" else "c")
    assert main(["export", str(bundle), "--format", fmt, "-o", str(out)]) == 0
    if fmt == "neuroml":
        from eidecomp.export.neuroml2 import read_blocks
        from eidecomp.io import read_circuit

        c, _ = read_circuit(bundle)
        for name, J in read_blocks(out).items():
            np.testing.assert_allclose(J, getattr(c, name), rtol=1e-13, atol=0)
    else:
        # the script, its data, and the folder's manifest (README, "Provenance")
        assert sorted(p.name.rsplit(".", 1)[-1] if p.name != "eidecomp-manifest"
                      ".json" else p.name for p in out.iterdir()) == [
            "eidecomp-manifest.json", "npz", "py"]


@pytest.mark.parametrize("simulator", ["nest", "brian2"])
def test_exported_script_runs_the_drive_it_was_given(bundle, tmp_path, simulator):
    # the export takes simulate's drive options; run standalone in a clean
    # environment, the script's stdout is its JSON alone and its rates are
    # the analytic fixed point (I - W_full)^-1 H of that drive (numpy)
    require(simulator)
    import json
    import os
    import subprocess
    import sys

    from eidecomp.cli import main
    from eidecomp.io import read_circuit
    from eidecomp.simulation import random_drive

    out = tmp_path / "c"
    assert main(["export", str(bundle), "--format", simulator, "-o", str(out),
                 "-q", "--input", "random", "--seed", "4"]) == 0
    env = {k: v for k, v in os.environ.items() if k != "PYNEST_QUIET"}
    run = subprocess.run([sys.executable, str(out / f"circuit_{simulator}.py")],
                         capture_output=True, text=True, timeout=600, env=env)
    assert run.returncode == 0, run.stderr[-2000:]
    rates = np.array(json.loads(run.stdout)["rates"])   # nothing else on stdout
    c, _ = read_circuit(bundle)
    h = random_drive(c.n_w_units, 4).values[:, 0]
    H = np.r_[h, np.zeros(c.n_inhibitory)]
    target = np.linalg.solve(np.eye(H.size) - c.signed_weights(), H)
    assert _rel(rates, target) < 1e-6


def test_if_curr_exp_defaults_are_pynns():
    # reference: PyNN's own default parameters of its standard cell model
    # (pyNN.standardmodels.cells.IF_curr_exp.default_parameters), read here,
    # against the copy the exports keep (the NeuroML2 export writes them,
    # the rheobase and rate formulas use them)
    require("pyNN")
    from pyNN.standardmodels.cells import IF_curr_exp

    from eidecomp.export.pynn_script import IF_CURR_EXP

    defaults = IF_curr_exp.default_parameters
    assert {k: defaults[k] for k in IF_CURR_EXP} == IF_CURR_EXP


@pytest.mark.parametrize("tau_m", [10.0, 5.0])
def test_pynn_operating_point_rate_is_nests(tau_m):
    # reference: NEST's iaf_psc_exp with PyNN's IF_curr_exp defaults (c_m
    # 1 nF, v_rest = v_reset = -65 mV, v_thresh -50 mV, t_ref 0.1 ms) under
    # the bias current the export gives an unconnected unit
    nest = require("nest")
    from eidecomp.export.pynn_script import BIAS_RATIO, rate_hz, rheobase_nA

    current = BIAS_RATIO * float(rheobase_nA(tau_m))
    nest.ResetKernel()
    nest.resolution = 0.01
    unit = nest.Create("iaf_psc_exp", params={
        "C_m": 1000.0, "tau_m": tau_m, "E_L": -65.0, "V_reset": -65.0,
        "V_th": -50.0, "t_ref": 0.1, "V_m": -65.0, "I_e": 1000.0 * current})
    rec = nest.Create("spike_recorder")
    nest.Connect(unit, rec)
    nest.Simulate(2000.0)
    assert rec.get("n_events") / 2.0 == pytest.approx(
        float(rate_hz(current, tau_m)), rel=0.01)


def test_pynn_inhibitory_weights_are_negative(circuit):
    # PyNN's rule (pyNN.standardmodels.base.check_weights): "Weights must be
    # negative for current-based, inhibitory synapses", positive otherwise
    import io

    from eidecomp.export import render

    c = circuit[0]
    with np.load(io.BytesIO(render("pynn", c)["circuit_pynn_data.npz"]),
                 allow_pickle=False) as z:
        for k in range(int(z["n_projections"])):
            w = z[f"proj_{k}"][:, 2]
            if str(z["proj_receptor"][k]) == "inhibitory":
                assert (w < 0).all()
            else:
                assert (w > 0).all()


@pytest.mark.parametrize("simulator", ["nest", "brian2"])
def test_pynn_spiking_rates_follow_the_rate_model(circuit, tmp_path, simulator):
    # the spiking export on PyNN's two backends, two seeded drives: the E
    # units' rate changes against the rate model's linear response,
    # rate_per_drive (I - W_full)^-1 dH (numpy). With the background the
    # units do not phase-lock, and with the synapse the slowest filter the
    # changes follow the prediction in shape and in size, and the mean rates
    # the operating point (benchmarks/spiking.py: r >= 0.99 on the demo and
    # planted circuits)
    require("pyNN")
    require(simulator)
    import json
    import os
    import subprocess
    import sys

    from eidecomp.export._lists import population_taus
    from eidecomp.export.pynn_script import (
        BIAS_RATIO,
        RATE_PER_DRIVE_HZ,
        rate_hz,
        rheobase_nA,
        write_pynn,
    )
    from eidecomp.simulation import random_drive

    c, _, W_full, _ = circuit
    rates = []
    for seed in (0, 1):
        h = random_drive(c.n_excitatory, seed).values[:, 0]
        folder = tmp_path / str(seed)
        write_pynn(c, folder, h)
        run = subprocess.run([sys.executable, str(folder / "circuit_pynn.py"),
                              "--simulator", simulator, "--t-stop", "3000"],
                             capture_output=True, text=True, timeout=600,
                             env={**os.environ, "PYNEST_QUIET": "1"})
        assert run.returncode == 0, run.stderr[-2000:]
        out = json.loads(run.stdout.strip().splitlines()[-1])
        assert all(n > 0 for n in out["spikes"].values()), out
        rates.append(np.array(out["rates_hz"]["E"]))
        # each population's mean rate: r0 (its operating point) plus the
        # linear response to the drive
        taus = population_taus(c)
        r0 = rate_hz(BIAS_RATIO * rheobase_nA(taus), taus)
        response = RATE_PER_DRIVE_HZ * np.linalg.solve(
            np.eye(W_full.shape[0]) - W_full, np.r_[h, np.zeros(c.n_inhibitory)])
        start = 0
        for p, base in zip(c.populations, r0, strict=True):
            predicted = base + response[start:start + p.size].mean()
            start += p.size
            assert np.mean(out["rates_hz"][p.name]) == pytest.approx(
                predicted, rel=0.05), p.name
    dh = (random_drive(c.n_excitatory, 1).values
          - random_drive(c.n_excitatory, 0).values)[:, 0]
    n_i = c.n_inhibitory
    predicted = RATE_PER_DRIVE_HZ * np.linalg.solve(
        np.eye(W_full.shape[0]) - W_full, np.r_[dh, np.zeros(n_i)])[:c.n_excitatory]
    measured = rates[1] - rates[0]
    assert np.corrcoef(measured, predicted)[0, 1] >= 0.95
    slope = np.polyfit(predicted, measured, 1)[0]
    assert 0.8 <= slope <= 1.25, slope


@pytest.mark.parametrize("tau_m", [10.0, 5.0])
def test_pynn_background_current_has_the_stated_sd(tau_m):
    # reference: NEST's own iaf_psc_exp driven by two poisson_generators with
    # the export's weights (the threshold out of reach, so the unit never
    # fires); the recorded synaptic currents' sd against BACKGROUND_SD x the
    # rheobase, which background_weight_nA derives from Campbell's theorem
    # (the variance of shot noise, common practice) on NEST's 0.1 ms grid
    nest = require("nest")
    from eidecomp.export.pynn_script import (
        BACKGROUND_HZ,
        BACKGROUND_SD,
        TAU_SYN_RATIO,
        background_weight_nA,
        rheobase_nA,
    )

    tau_syn = TAU_SYN_RATIO * tau_m
    w = float(background_weight_nA(tau_m, tau_syn))
    nest.ResetKernel()
    nest.rng_seed = 3
    unit = nest.Create("iaf_psc_exp", params={
        "tau_m": tau_m, "C_m": 1000.0, "V_th": 1e9, "tau_syn_ex": tau_syn,
        "tau_syn_in": tau_syn})
    for sign in (1.0, -1.0):
        train = nest.Create("poisson_generator", params={"rate": BACKGROUND_HZ})
        nest.Connect(train, unit, syn_spec={"weight": sign * w * 1e3,  # pA
                                            "delay": 0.1})
    meter = nest.Create("multimeter", params={
        "record_from": ["I_syn_ex", "I_syn_in"], "interval": 0.5})
    nest.Connect(meter, unit)
    nest.Simulate(60000.0)
    ev = meter.get("events")
    keep = ev["times"] > 50.0                       # past the start
    current = (ev["I_syn_ex"] + ev["I_syn_in"])[keep] * 1e-3   # nA
    assert abs(current.mean()) < 0.05 * BACKGROUND_SD * float(rheobase_nA(tau_m))
    assert current.std() == pytest.approx(
        BACKGROUND_SD * float(rheobase_nA(tau_m)), rel=0.02)


def test_unstable_choice_is_refused(tmp_path, capsys):
    # the inhibition-stabilised pair of test_dynamics: stable iff tau_I < tau_E
    from eidecomp.analysis import interneuron_pools
    from eidecomp.cli import main
    from eidecomp.dynamics import stability_summary
    from eidecomp.io import bundles
    from eidecomp.types import AssemblyReport, Circuit

    c = Circuit(J_EE=np.array([[2.0]]), J_EU=np.array([[1.0]]),
                J_UE=np.array([[2.0]]), J_ET=np.zeros((1, 0)),
                J_TE=np.zeros((0, 1)),
                report=AssemblyReport(relative_error=0.0, ee_density=1.0,
                                      share_rule="written by hand"))
    W = c.effective_weights()
    doc = bundles.circuit_doc(c, source={"path": "by hand"}, decomposition={},
                              stability=stability_summary(c, W),
                              pools=interneuron_pools(c), parameters={})
    bundles.write_circuit(tmp_path / "isn", c, doc)
    assert main(["simulate", str(tmp_path / "isn"), "--tau-i", "8"]) == 0
    capsys.readouterr()
    assert main(["simulate", str(tmp_path / "isn"), "--tau-i", "12"]) == 2
    err = capsys.readouterr().err
    assert "unstable at gain 1 and tau_I/tau_E = 1.2" in err
    # stable iff tau_I < tau_E (test_dynamics' pair): up to ratio 1
    assert "stable up to tau_I/tau_E = 1:" in err
    import re
    import shlex

    command = re.search(r"run `eidecomp (simulate [^`]+)`", err).group(1)
    flag, value = shlex.split(command)[2:]
    assert flag == "--tau-i" and 9 <= float(value) < 10     # below tau_E
    assert main(shlex.split(command)) == 0          # the advice, as printed


# --- one time-constant rule ------------------------------------------------------

def _builders():
    from eidecomp import pipeline
    from eidecomp.export import (
        REGISTRY,
        _lists,
        brian2_builder,
        nest_builder,
        neuroml2,
        pynn_script,
        rate_scripts,
    )

    named = {"nest_builder.build_rate": nest_builder.build_rate,
             "brian2_builder.build_rate": brian2_builder.build_rate,
             "rate_scripts.rate_script_files": rate_scripts.rate_script_files,
             "pynn_script.pynn_files": pynn_script.pynn_files,
             "neuroml2.to_document": neuroml2.to_document,
             "_lists.tau_vector": _lists.tau_vector,
             "_lists.population_taus": _lists.population_taus,
             "pipeline.run_export": pipeline.run_export}
    named.update({f"registry[{f.name}]": f.render for f in REGISTRY})
    return named


@pytest.mark.parametrize("name", list(_builders()))
def test_default_time_constants_are_the_params_ones(name):
    """Every builder's default tau_e, tau_i is eidecomp.params.TAU_E_MS /
    TAU_I_MS (read from the signature by Python's inspect module)."""
    import inspect

    from eidecomp.params import TAU_E_MS, TAU_I_MS

    sig = inspect.signature(_builders()[name])
    assert sig.parameters["tau_e"].default == TAU_E_MS
    assert sig.parameters["tau_i"].default == TAU_I_MS


def test_default_time_constants_reach_the_files():
    """The rendered data hold the defaults: numpy's npz reader for the
    scripts' data, Python's xml.etree for the NeuroML2 cells' tau."""
    import io
    import xml.etree.ElementTree as ET

    from eidecomp.export import render
    from eidecomp.params import TAU_E_MS, TAU_I_MS
    from eidecomp.types import Circuit

    c = Circuit(J_EE=np.eye(2), J_EU=np.ones((2, 1)), J_UE=np.ones((1, 2)),
                J_ET=np.ones((2, 1)), J_TE=np.ones((1, 2)))
    with np.load(io.BytesIO(render("nest", c)["circuit_rate_data.npz"]),
                 allow_pickle=False) as z:
        assert z["tau_ms"].tolist() == [TAU_E_MS] * 2 + [TAU_I_MS] * 2
    with np.load(io.BytesIO(render("pynn", c)["circuit_pynn_data.npz"]),
                 allow_pickle=False) as z:
        assert z["tau_ms"].tolist() == [TAU_E_MS, TAU_I_MS, TAU_I_MS]
    require("neuroml")
    root = ET.fromstring(render("neuroml", c))
    taus = {el.get("id"): float(el.get("tau_m")) for el in root.iter()
            if el.tag.endswith("IF_curr_exp")}
    assert taus == {"E_cell": TAU_E_MS, "I_untuned_cell": TAU_I_MS,
                    "I_tuned_cell": TAU_I_MS}


def test_neuroml_validates_against_the_xsd(circuit):
    """The rendered document against the NeuroML2 XSD that libNeuroML ships,
    by lxml's XMLSchema (the schema itself, not libNeuroML's object check)."""
    require("neuroml")
    import os

    import lxml.etree as LET
    import neuroml

    from eidecomp.export import render

    xsd = os.path.join(os.path.dirname(neuroml.__file__), "nml",
                       f"NeuroML_{neuroml.current_neuroml_version}.xsd")
    schema = LET.XMLSchema(LET.parse(xsd))
    doc = LET.fromstring(render("neuroml", circuit[0],
                                unit_ids=[f"<u{i}> & ]]>" for i in range(100)]))
    assert schema.validate(doc), schema.error_log


def test_pynn_data_name_the_populations(circuit):
    """Population names and receptors are data of the npz (numpy's reader),
    from eidecomp.types; the script is the same text for every circuit."""
    import io

    from eidecomp.export import pynn_script, render
    from eidecomp.io.provenance import stamp
    from eidecomp.types import POPULATION_NAMES

    files = render("pynn", circuit[0])
    assert files["circuit_pynn.py"] == stamp(pynn_script.SCRIPT.encode(), "hash")
    for name in POPULATION_NAMES.values():  # no string literal of a name
        assert f'"{name}"' not in pynn_script.SCRIPT
    with np.load(io.BytesIO(files["circuit_pynn_data.npz"]),
                 allow_pickle=False) as z:
        assert z["populations"].tolist() == list(POPULATION_NAMES.values())
        assert z["sizes"].tolist() == [100, 3, 22]
        for k in range(int(z["n_projections"])):
            assert z["proj_receptor"][k] == (
                "excitatory" if z["proj_pre"][k] == "E" else "inhibitory")


def test_neuroml_carries_the_positions_the_user_gave(circuit, tmp_path):
    # reference: libNeuroML's own reader (read_neuroml2_file) and its schema
    # check; the E units' instances hold the unit table's x, y (um)
    require("neuroml")
    from neuroml.loaders import read_neuroml2_file

    from eidecomp.export import render
    from eidecomp.export.neuroml2 import read_blocks

    c = circuit[0]
    xy = np.random.default_rng(5).uniform(-300, 300, (c.n_excitatory, 2))
    path = tmp_path / "c.net.nml"
    path.write_bytes(render("neuroml", c, positions=xy))
    E = read_neuroml2_file(str(path)).networks[0].populations[0]
    assert E.type == "populationList" and len(E.instances) == c.n_excitatory
    got = np.array([[i.location.x, i.location.y] for i in E.instances])
    np.testing.assert_allclose(got, xy, rtol=0, atol=1e-9)  # um, as written
    for name, J in read_blocks(path).items():        # the weights unchanged
        np.testing.assert_allclose(J, getattr(c, name), rtol=1e-13, atol=0)
