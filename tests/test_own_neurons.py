"""A W that already obeys Dale's law becomes a circuit of its own neurons
(docs/assembly.md, "A W that already obeys Dale's law"; issue 27), checked
against references outside the project:

* the open C. elegans connectomes the registry package cect ships
  (eidecomp.datasets.signed_connectome: chemical synapse counts signed by
  the presynaptic neuron's transmitter, so every column has one sign): the
  circuit's full matrix must be W itself, entry for entry;
* numpy.linalg.solve: the fixed point (I - g W)^-1 h of the original
  network, which the circuit's simulated rates must reach;
* libNeuroML's reader and networkx: the exported files hold the
  inhibitory-to-inhibitory synapses W has.

Cook 2019 and Varshney are the rows of the issue; Witvliet 8 and White's
whole-animal data are checked the same way as held-out members.
"""

import re
import shlex
import warnings

import numpy as np
import pytest

pytest.importorskip("cect")

from eidecomp import assemble  # noqa: E402
from eidecomp.datasets import signed_connectome  # noqa: E402
from eidecomp.dynamics import largest_stable_gain  # noqa: E402
from eidecomp.graph import circuit_from_graph, neuron_graph  # noqa: E402
from eidecomp.simulation import compare_with_original  # noqa: E402
from eidecomp.types import active_interneurons  # noqa: E402

READERS = ("Cook2019HermReader", "VarshneyDataReader", "WitvlietDataReader8",
           "White_whole")


@pytest.fixture(scope="module", params=READERS)
def connectome(request):
    W, _ = signed_connectome(request.param)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return W, assemble(W)


def test_the_circuit_is_w_itself(connectome):
    W, c = connectome
    inhibitory = (W < 0).any(axis=0)
    assert c.own_neurons
    assert sorted(c.w_index) == list(range(W.shape[0]))   # each unit once
    np.testing.assert_array_equal(c.e_units(), np.flatnonzero(~inhibitory))
    assert sorted(c.w_index[c.n_excitatory:]) == list(np.flatnonzero(inhibitory))
    np.testing.assert_array_equal(c.reconstruction(), W)
    assert c.report.relative_error <= 1e-9
    # the full matrix in W's order is W, inhibitory-to-inhibitory included
    order = np.asarray(c.w_index)
    full = np.empty_like(W)
    full[np.ix_(order, order)] = c.signed_weights()
    np.testing.assert_array_equal(full, W)
    ii = W[np.ix_(inhibitory, inhibitory)]
    assert np.count_nonzero(c.J_II) == np.count_nonzero(ii)
    assert c.params["ei_ratio"] == f"{(~inhibitory).sum()}:{inhibitory.sum()}"
    assert c.report.autapses == 0 and c.report.cancelling_share == 0.0


def test_every_unit_has_a_role(connectome):
    W, c = connectome
    # an interneuron is silent only where W itself gives it no input
    silent = ~active_interneurons(c.J_EI, c.J_IE, c.J_II)
    rows = np.asarray(c.w_index[c.n_excitatory:])
    np.testing.assert_array_equal(silent, ~W[rows].any(axis=1))
    # every inhibitory neuron has a target (its column is negative)
    assert (c.J_EI.any(axis=0) | c.J_II.any(axis=0)).all()


def test_an_explicit_ratio_is_met_by_division_and_stays_exact(connectome):
    W, _ = connectome
    n_e = int((~(W < 0).any(axis=0)).sum())
    c = assemble(W, ei_ratio="4:1")
    assert c.n_excitatory == n_e and c.n_inhibitory == round(n_e / 4)
    np.testing.assert_array_equal(c.reconstruction(), W)
    assert any("were divided" in note for note in c.report.notes)
    # copies of one neuron take the same inputs and share its targets
    index = np.asarray(c.w_index)
    full = c.signed_weights()
    for j in np.unique(index[np.bincount(index)[index] > 1]):
        k = np.flatnonzero(index == j)
        for a in k[1:]:
            np.testing.assert_array_equal(full[a], full[k[0]])
        targets = (full[:, k] != 0).sum(axis=1)
        assert targets.max() <= 1          # no target twice


def test_a_ratio_with_fewer_interneurons_than_w_has_is_honoured_and_said(
        connectome):
    # W's inhibitory neurons cannot become excitatory: the ratio is met by
    # the construction for any W (all units excitatory), and a note says why
    W, _ = connectome
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        c = assemble(W, ei_ratio="50:1", baselines=False)
    assert not c.own_neurons
    assert (c.n_excitatory, c.n_inhibitory) == (W.shape[0],
                                                round(W.shape[0] / 50))
    assert any("fewer than W's own" in note for note in c.report.notes)


def test_own_neurons_off_assembles_it_like_any_w():
    W, _ = signed_connectome("WitvlietDataReader8")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        c = assemble(W, own_neurons=False, baselines=False)
    assert not c.own_neurons and c.n_excitatory == W.shape[0]
    assert any("--no-own-neurons" in note for note in c.report.notes)


def test_the_circuit_reaches_ws_fixed_point(connectome):
    W, c = connectome
    g = 0.5 * largest_stable_gain(W)       # the connectome's W is unstable
    h = np.random.default_rng(0).uniform(0.5, 1.5, W.shape[0])
    reference = np.linalg.solve(np.eye(W.shape[0]) - g * W, h)
    M = g * c.signed_weights()
    r = np.linalg.solve(np.eye(M.shape[0]) - M, c.full_drive(h))
    np.testing.assert_allclose(c.w_rates(r), reference, rtol=1e-9, atol=1e-12)
    out = compare_with_original(c, W, h, tau_e=10.0, tau_i=10.0, gain=g)
    assert out["circuit_vs_fixed_point_W"] < 1e-6   # the simulated run
    assert out["reconstruction_error"] < 1e-12


def test_graph_and_neuroml_carry_the_inhibitory_to_inhibitory_synapses(
        connectome, tmp_path):
    pytest.importorskip("neuroml")
    from eidecomp.export.neuroml2 import read_blocks, write_neuroml

    W, c = connectome
    back = circuit_from_graph(neuron_graph(c))
    np.testing.assert_array_equal(back.signed_weights(), c.signed_weights())
    write_neuroml(c, tmp_path / "c.net.nml")
    blocks = read_blocks(tmp_path / "c.net.nml")   # libNeuroML's reader
    for name in ("J_TT", "J_ET", "J_TE", "J_EE"):
        np.testing.assert_allclose(blocks[name], getattr(c, name))


def test_the_commands_keep_w_unit_for_unit(tmp_path, capsys):
    from eidecomp.cli import main
    from eidecomp.io.bundles import read_circuit_bundle

    W, names = signed_connectome("WitvlietDataReader8")
    np.save(tmp_path / "w.npy", W)
    with open(tmp_path / "units.csv", "w") as fh:
        fh.write("id,feature\n")
        for k, name in enumerate(names):
            fh.write(f"{name},{(7.0 * k) % 180}\n")
    out = tmp_path / "c"
    assert main(["run", str(tmp_path / "w.npy"), "-o", str(out),
                 "--units", str(tmp_path / "units.csv")]) == 0
    summary = capsys.readouterr().out
    assert summary.splitlines()[0].startswith("this circuit is W itself")
    b = read_circuit_bundle(out)
    # the command assembles L + S of its split, equal to W to rounding
    scale = np.abs(W).max()
    np.testing.assert_allclose(b.circuit.reconstruction(), W, rtol=0,
                               atol=1e-12 * scale)
    np.testing.assert_allclose(b.original_weights(), W, rtol=0,
                               atol=1e-12 * scale)
    e = b.circuit.e_units()
    assert b.unit_ids == [names[i] for i in e]
    np.testing.assert_array_equal(b.features, (7.0 * e) % 180)
    g = 0.5 * largest_stable_gain(W)
    assert main(["simulate", str(out), "--gain", f"{g:.6g}", "-q"]) == 0
    capsys.readouterr()
    assert main(["run", str(tmp_path / "w.npy"), "-o", str(tmp_path / "d"),
                 "--ei-ratio", "40:1"]) == 0
    assert "fewer than W's own" in capsys.readouterr().out


def test_the_smallest_dale_w_worked_by_hand():
    # W = [[0, -0.3], [0.2, 0]]: unit 0 excites unit 1, which inhibits it;
    # by hand: one E unit (0), one interneuron (1), J_EE = 0, J_EI = 0.3,
    # J_IE = 0.2, and W_eff = -0.06
    W = np.array([[0.0, -0.3], [0.2, 0.0]])
    c = assemble(W)
    assert c.w_index == (0, 1) and (c.n_excitatory, c.n_inhibitory) == (1, 1)
    assert c.J_EI.item() == 0.3 and c.J_IE.item() == 0.2 and c.J_EE.item() == 0
    assert c.effective_weights().item() == pytest.approx(-0.06)
    np.testing.assert_array_equal(c.reconstruction(), W)
    # every column negative: no E unit, so the assembler adds interneurons
    assert not assemble(np.array([[-0.5]]), ei_ratio=1,
                        baselines=False).own_neurons


@pytest.mark.parametrize("simulator", ["nest", "brian2"])
def test_simulators_run_the_circuit_to_ws_fixed_point(simulator):
    # NEST's and Brian2's rate runs of the exported circuit (scaled to a
    # stable gain) against numpy's fixed point of the original network
    from conftest import require

    require(simulator)
    from importlib import import_module

    from eidecomp.dynamics import scaled_circuit

    runner = import_module(f"eidecomp.export.{simulator}_builder")
    W, _ = signed_connectome("WitvlietDataReader8")
    g = 0.5 * largest_stable_gain(W)
    c = scaled_circuit(assemble(W), g)
    h = np.random.default_rng(1).uniform(0.5, 1.5, W.shape[0])
    target = np.linalg.solve(np.eye(W.shape[0]) - g * W, h)
    full_rates, _ = runner.run_rate(c, h, tau_e=10.0, tau_i=5.0, t_ms=4000.0)
    E = c.n_excitatory
    assert np.linalg.norm(full_rates[:E] - target[c.e_units()]) \
        < 1e-6 * np.linalg.norm(target)


# --- small hand-made Dale matrices (worked by hand, eigenvalues by numpy) ---

UNSTABLE_WHEN_FAST = np.array([[0.498, -0.005, -0.227, -3.379],
                               [0.0, -0.07, -2.726, -0.679],
                               [1.234, -0.617, -0.986, -1.713],
                               [1.769, -1.315, -2.721, -0.004]])
"""One E unit and three interneurons: W is stable (numpy's eigenvalues),
so is the circuit at tau_I = tau_E, where its dynamics are W's, but its
inhibitory loops grow at tau_I/tau_E = 0.5."""


def _abscissa(c, tau_i):
    M = c.signed_weights()
    tau = np.r_[np.full(c.n_excitatory, 10.0), np.full(c.n_inhibitory, tau_i)]
    return np.linalg.eigvals((M - np.eye(len(M))) / tau[:, None]).real.max()


def test_stability_of_own_neurons_is_checked_where_it_is_used(tmp_path, capsys):
    from eidecomp.cli import main
    from eidecomp.dynamics import stability_summary

    W = UNSTABLE_WHEN_FAST
    assert np.linalg.eigvals(W).real.max() < 1
    c = assemble(W)
    assert c.own_neurons
    assert _abscissa(c, 10.0) < 0 < _abscissa(c, 5.0)
    s = stability_summary(c, W, tau_ratio=0.5)
    assert s["circuit_spectral_abscissa_equal_taus"] < 0
    assert s["circuit_spectral_abscissa_default_taus"] > 0
    assert "tau_I equal to tau_E" in s["why"]
    np.save(tmp_path / "w.npy", W)
    assert main(["run", str(tmp_path / "w.npy"), "-o", str(tmp_path / "c")]) == 0
    out = capsys.readouterr().out
    assert "unstable at every" not in out
    assert "stable at tau_I = tau_E, unstable at the default" in out
    # the advice the refusal gives works as printed
    assert main(["simulate", str(tmp_path / "c"), "-q"]) == 2
    err = capsys.readouterr().err
    command = re.search(r"run `eidecomp (simulate [^`]+)`", err).group(1)
    assert shlex.split(command)[2:] == ["--tau-i", "10"]
    assert main(shlex.split(command)) == 0


def test_threshold_linear_rectifies_ws_own_interneurons_too():
    # the original network rectifies every unit; so must the circuit of its
    # own neurons, which is then the same network (reference: the same run
    # of W itself by eidecomp.dynamics.simulate, checked elsewhere against
    # solve_ivp's own tests)
    W = np.array([[0.0, -1.0, 0.0], [0.5, 0.0, -2.0], [0.5, 0.0, 0.0]])
    c = assemble(W)
    out = compare_with_original(c, W, np.array([1.0, 0.2, 1.0]), tau_e=10.0,
                                tau_i=10.0, model="threshold-linear")
    assert out["circuit_vs_original"] < 1e-6


def test_options_own_neurons_cannot_honour_fall_back_with_a_note():
    W, _ = signed_connectome("WitvlietDataReader8")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for kwargs, said in (({"alpha": 0.5}, "alpha or ee_support"),
                             ({"ee_support": "any"}, "alpha or ee_support"),
                             ({"untuned_share": 0.5}, "untuned share"),
                             ({"decompose_kwargs": {"ignore_diagonal": True}},
                              "entries left out")):
            c = assemble(W, baselines=False, **kwargs)
            assert not c.own_neurons, kwargs
            assert any(said in note for note in c.report.notes), kwargs


def test_division_counts_the_targets_w_has_not_solver_noise(tmp_path, capsys):
    from eidecomp.cli import main

    # 4 E units, 2 interneurons with one target each: 4:2 and 4:3 are out of
    # reach by division (2 targets), 4:2 is W's own
    W = np.zeros((6, 6))
    W[:4, :4] = 0.2 * (np.ones((4, 4)) - np.eye(4))
    W[4, 0] = W[5, 1] = 0.5
    W[0, 4] = W[1, 5] = -0.7
    np.save(tmp_path / "w.npy", W)
    assert main(["run", str(tmp_path / "w.npy"), "-o", str(tmp_path / "c"),
                 "--ei-ratio", "4:3"]) == 0
    assert "only 2 targets" in capsys.readouterr().out
    assert main(["run", str(tmp_path / "w.npy"), "-o", str(tmp_path / "d")]) == 0
    assert "this circuit is W itself" in capsys.readouterr().out


def test_the_smallest_dale_w_on_the_command_line(tmp_path):
    from eidecomp.cli import main

    np.save(tmp_path / "w.npy", np.array([[0.0, -1.0], [1.0, 0.0]]))
    assert main(["run", str(tmp_path / "w.npy"), "-o", str(tmp_path / "c"),
                 "-q"]) == 0


def test_w_index_must_name_each_unit_consistently():
    from eidecomp.types import Circuit

    blocks = dict(J_EE=np.zeros((1, 1)), J_EU=np.zeros((1, 1)),
                  J_UE=np.zeros((1, 1)), J_ET=np.zeros((1, 0)),
                  J_TE=np.zeros((0, 1)))
    Circuit(**blocks, w_index=(1, 0))
    for bad in ((0, 2), (0, 0), (0,)):
        with pytest.raises(ValueError):
            Circuit(**blocks, w_index=bad)
