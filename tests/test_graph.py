"""The circuit graph and its file exports.

References: networkx's own GraphML and node-link readers, and Python's csv
module, read back what we wrote; networkx.utils.graphs_equal compares.
"""

import csv

import networkx as nx
import numpy as np
import pytest

from eidecomp import assemble
from eidecomp.datasets import make_planted_circuit
from eidecomp.export import (
    read_graphml,
    read_json,
    write_edge_csv,
    write_graphml,
    write_json,
)
from eidecomp.graph import circuit_from_graph, neuron_graph, population_graph


@pytest.fixture(scope="module")
def circuit():
    W, _, features = make_planted_circuit(100, n_untuned=3, n_tuned=22, pool=6,
                                          seed=2)
    return assemble(W, ei_ratio="4:1", baselines=False), features


def _blocks_equal(a, b):
    for name in ("J_EE", "J_EU", "J_UE", "J_ET", "J_TE"):
        np.testing.assert_array_equal(getattr(a, name), getattr(b, name))


def test_edges_are_pre_to_post(circuit):
    c, features = circuit
    G = neuron_graph(c, features=features)
    i, j = map(int, np.argwhere(c.J_EE > 0)[0])
    assert G.edges[f"E{j}", f"E{i}"]["weight"] == c.J_EE[i, j]
    assert G.number_of_edges() == sum(
        np.count_nonzero(getattr(c, b)) for b in ("J_EE", "J_EU", "J_UE",
                                                  "J_ET", "J_TE"))
    for u, _, a in G.edges(data=True):  # Dale: the synapse follows the source
        assert a["weight"] > 0
        assert a["synapse"] == ("excitatory" if G.nodes[u]["sign"] > 0
                                else "inhibitory")
    _blocks_equal(circuit_from_graph(G), c)


@pytest.mark.parametrize("fmt", ["graphml", "json"])
def test_file_round_trip_is_exact(circuit, tmp_path, fmt):
    c, features = circuit
    G = neuron_graph(c, features=features)
    path = tmp_path / f"c.{fmt}"
    (write_graphml if fmt == "graphml" else write_json)(G, path)
    H = (read_graphml if fmt == "graphml" else read_json)(path)
    # nodes, edges and every attribute (GraphML's reader adds its default-
    # attribute tables to the graph's own attributes)
    for key in ("node_default", "edge_default"):
        H.graph.pop(key, None)
    assert nx.utils.graphs_equal(G, H)
    _blocks_equal(circuit_from_graph(H), c)


def test_edge_csv(circuit, tmp_path):
    c, _ = circuit
    G = neuron_graph(c)
    write_edge_csv(G, tmp_path / "e.csv")
    with open(tmp_path / "e.csv", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == G.number_of_edges()
    for r in rows[:200]:
        assert float(r["weight"]) == G.edges[r["pre"], r["post"]]["weight"]


def test_population_graph(circuit):
    c, _ = circuit
    P = population_graph(c)
    e = P.edges["E", "I_tuned"]
    assert e["count"] == np.count_nonzero(c.J_TE)
    assert e["probability"] == pytest.approx(np.count_nonzero(c.J_TE) / c.J_TE.size)
    assert e["mean_weight"] == pytest.approx(c.J_TE[c.J_TE > 0].mean())
    assert P.nodes["I_untuned"]["size"] == c.n_untuned


def test_export_command(tmp_path, capsys):
    from eidecomp.cli import main

    W, _, _ = make_planted_circuit(60, n_untuned=2, n_tuned=13, pool=4, seed=3)
    np.save(tmp_path / "w.npy", W)
    assert main(["run", str(tmp_path / "w.npy"), "-o", str(tmp_path / "c"),
                 "-q"]) == 0
    out = tmp_path / "c.graphml"
    assert main(["export", str(tmp_path / "c"), "--format", "graphml", "-o",
                 str(out)]) == 0
    H = read_graphml(out)
    assert H.number_of_nodes() == 60 + 15
    capsys.readouterr()
    assert main(["export", str(tmp_path / "c"), "--format", "graphml", "-o",
                 str(out)]) == 2
    assert "already exists" in capsys.readouterr().err
    assert main(["export", str(tmp_path / "nope"), "--format", "csv", "-o",
                 str(tmp_path / "e.csv")]) == 2
    assert not (tmp_path / "e.csv").exists()
