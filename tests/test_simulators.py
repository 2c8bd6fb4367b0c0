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


def test_nest_spiking_variant_spikes(circuit):
    nest = require("nest")
    from eidecomp.export import nest_builder

    c, h, W_full, _ = circuit
    pops = nest_builder.build_spiking(c, h)
    rec = nest.Create("spike_recorder")
    for p in pops.values():
        nest.Connect(p, rec)
    nest.Simulate(500.0)
    senders = set(rec.get("events")["senders"].tolist())
    for name, p in pops.items():
        assert senders & set(p.tolist()), f"no spikes from {name}"
    # the spiking network holds the same synapses, scaled
    units = pops["E"] + pops["I_untuned"] + pops["I_tuned"]
    conns = nest.GetConnections(source=units, target=units)
    assert len(conns) == np.count_nonzero(W_full)


@pytest.mark.parametrize("tau_i", [5.0, 10.0])
def test_brian2_rate_reaches_fixed_point(circuit, tau_i):
    require("brian2")
    from eidecomp.export import brian2_builder

    c, h, W_full, target = circuit
    rates, S = brian2_builder.run_rate(c, h, tau_e=10.0, tau_i=tau_i,
                                       t_ms=2000.0)
    assert _rel(rates, target) < 1e-6
    np.testing.assert_array_equal(brian2_builder.read_weights(S, 125), W_full)
