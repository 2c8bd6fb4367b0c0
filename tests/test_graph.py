"""The circuit graph and its file exports.

References: networkx's own GraphML and node-link readers, and Python's csv
module, read back what we wrote; networkx.utils.graphs_equal compares.
"""

import csv
import io
import json

import networkx as nx
import numpy as np
import pytest
from conftest import require

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


def _csv_lines(text):
    """An exported CSV for Python's csv module: all but its last line, the
    provenance comment (eidecomp.io.provenance), checked to be there (cells
    may hold line breaks, so the text is cut at the comment, not split)."""
    at = text.rindex("# eidecomp provenance sha256:")
    assert at > 0 and text[at - 1] == "\n" and text.endswith("\n")
    assert text[at:].count("\n") == 1
    return io.StringIO(text[:at], newline="")


def test_edge_csv(circuit, tmp_path):
    c, _ = circuit
    G = neuron_graph(c)
    write_edge_csv(G, tmp_path / "e.csv")
    with open(tmp_path / "e.csv", encoding="utf-8", newline="") as fh:
        rows = list(csv.DictReader(_csv_lines(fh.read())))
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


# --- the export registry -------------------------------------------------------

@pytest.fixture(scope="module")
def small():
    """A 20-unit circuit (1 untuned, 4 tuned interneurons)."""
    W, _, features = make_planted_circuit(20, n_untuned=1, n_tuned=4, pool=3,
                                          seed=0)
    return assemble(W, baselines=False), features


def test_graph_reads_the_population_and_block_tables(small):
    """Population names and blocks come from eidecomp.types (one table);
    checked against networkx's own view of the graph."""
    from eidecomp.types import BLOCKS, POPULATION_NAMES

    c, _ = small
    P = population_graph(c)
    assert tuple(P.nodes) == tuple(POPULATION_NAMES.values())
    for b in BLOCKS:
        J = getattr(c, b.name)
        if np.count_nonzero(J):
            assert P.edges[b.pre_name, b.post_name]["count"] == np.count_nonzero(J)
    G = neuron_graph(c)
    by_pop = {}
    for _, a in G.nodes(data=True):
        by_pop[a["population"]] = by_pop.get(a["population"], 0) + 1
    assert by_pop == {p.name: p.size for p in c.populations if p.size}


def test_registry_lists_every_format_once():
    from eidecomp.export import FILE_FORMATS, FOLDER_FORMATS, FORMATS, REGISTRY

    assert FORMATS == tuple(f.name for f in REGISTRY)
    assert len(set(FORMATS)) == len(FORMATS)
    assert set(FILE_FORMATS) | set(FOLDER_FORMATS) == set(FORMATS)
    assert not set(FILE_FORMATS) & set(FOLDER_FORMATS)
    for f in REGISTRY:
        assert f.help and "\n" not in f.help


def _read_back(fmt, data):
    """Each format's own reader: networkx (GraphML, node-link JSON), Python's
    csv module, libNeuroML, numpy's npz reader; returns the blocks."""
    import io
    import json

    from eidecomp.graph import circuit_from_graph

    if fmt == "graphml":
        return circuit_from_graph(nx.read_graphml(io.BytesIO(data)))
    if fmt == "json":
        return circuit_from_graph(nx.node_link_graph(json.loads(data),
                                                     edges="edges"))
    return None


@pytest.mark.parametrize("fmt", ["graphml", "json", "csv", "neuroml", "pynn",
                                 "nest", "brian2"])
def test_every_registry_entry_renders(small, fmt, tmp_path):
    """Every format renders a small circuit without writing anything, and its
    output is read by the format's own reader (networkx, csv, libNeuroML,
    numpy's npz reader, Python's compile for scripts)."""
    import io

    from eidecomp.export import get_format, render

    c, features = small
    spec = get_format(fmt)
    if spec.requires:
        require(spec.requires)
    before = sorted(tmp_path.iterdir())
    data = render(fmt, c, features=features, unit_ids=[f"u{i}" for i in range(20)])
    assert sorted(tmp_path.iterdir()) == before
    if spec.folder:
        assert isinstance(data, dict)
        scripts = [n for n in data if n.endswith(".py")]
        assert len(scripts) == 1
        compile(data[scripts[0]], scripts[0], "exec")
        (npz,) = [n for n in data if n.endswith(".npz")]
        with np.load(io.BytesIO(data[npz]), allow_pickle=False) as z:
            assert z["unit_ids"].tolist() == [f"u{i}" for i in range(20)]
        return
    assert isinstance(data, bytes)
    back = _read_back(fmt, data)
    if back is not None:
        _blocks_equal(back, c)
    elif fmt == "csv":
        rows = list(csv.DictReader(_csv_lines(data.decode("utf-8"))))
        assert len(rows) == sum(np.count_nonzero(getattr(c, b)) for b in
                                ("J_EE", "J_EU", "J_UE", "J_ET", "J_TE"))
    else:
        from eidecomp.export.neuroml2 import read_blocks

        (tmp_path / "c.net.nml").write_bytes(data)
        # currents in nA back to weights: to rounding, as docs/simulators.md
        # promises (1e-13 relative) and the other NeuroML2 tests check; not
        # bit for bit, since (w x) / x need not be w in floating point
        # (IEEE 754)
        for name, J in read_blocks(tmp_path / "c.net.nml").items():
            np.testing.assert_allclose(J, getattr(c, name), rtol=1e-13, atol=0)


@pytest.mark.parametrize("name", ["x", "GraphML", "", " json", "neuroml2", None])
def test_unknown_format_is_refused(small, name):
    from eidecomp.errors import InputError
    from eidecomp.export import FORMATS, get_format, render

    msg = (f"unknown export format {name!r} (choose from "
           f"{', '.join(FORMATS)})")
    with pytest.raises(InputError) as exc:
        get_format(name)
    assert str(exc.value) == msg
    with pytest.raises(InputError):
        render(name, small[0])


def test_missing_optional_module_is_one_line(small, monkeypatch):
    """The import check is importlib.util.find_spec (Python's own)."""
    import importlib.util

    from eidecomp.errors import InputError
    from eidecomp.export import render

    real = importlib.util.find_spec
    monkeypatch.setattr(importlib.util, "find_spec",
                        lambda name, *a: None if name == "neuroml"
                        else real(name, *a))
    with pytest.raises(InputError) as exc:
        render("neuroml", small[0])
    assert str(exc.value) == ("neuroml is not installed; it comes with the "
                              "simulator extra: pip install 'eidecomp[sim]'")
    assert isinstance(render("graphml", small[0]), bytes)  # needs nothing


def test_positions_become_node_attributes(small):
    """x, y from the bundle's positions, read back by networkx's GraphML
    reader; a wrong shape is refused."""
    import io

    from eidecomp.errors import InputError
    from eidecomp.export import render

    c, features = small
    pos = np.column_stack([np.arange(20) * 0.1, np.arange(20) / 3.0])
    G = nx.read_graphml(io.BytesIO(render("graphml", c, features=features,
                                          positions=pos)))
    assert [G.nodes[f"E{i}"]["y"] for i in range(20)] == pos[:, 1].tolist()
    assert [G.nodes[f"E{i}"]["feature"] for i in range(20)] == features.tolist()
    with pytest.raises(InputError, match="positions have shape"):
        render("graphml", c, positions=pos[:5])
    with pytest.raises(InputError, match="unit ids for a circuit of 20"):
        render("json", c, unit_ids=["a", "b"])


# --- CSV injection (OWASP "CSV Injection") -------------------------------------

_TRIGGERS = ["=", "+", "-", "@", "\t", "\r"]


def _csv_rows(data):
    return list(csv.DictReader(_csv_lines(data.decode("utf-8"))))


@pytest.mark.parametrize("first", _TRIGGERS)
def test_csv_cells_that_start_a_formula_are_quoted(small, first):
    """OWASP CSV Injection guidance: a text cell beginning with = + - @ tab or
    CR is written with a leading single quote, inside double quotes; read
    back with Python's csv module."""
    from eidecomp.export import render
    from eidecomp.export.edges_csv import restore_cell

    c, _ = small
    name = first + 'cmd|"/c calc"!A1'
    ids = [name] + [f"u{i}" for i in range(1, 20)]
    data = render("csv", c, unit_ids=ids)
    rows = [r for r in _csv_rows(data) if r["pre"] == "E0"]
    assert rows
    for r in rows:
        assert r["pre_unit_id"] == "'" + name
        assert restore_cell(r["pre_unit_id"]) == name
    # in the file itself the cell opens with a double quote, then the quote
    assert ('"\'' + first) in data.decode("utf-8")
    raw = [r for r in _csv_rows(render("csv", c, unit_ids=ids, raw_csv=True))
           if r["pre"] == "E0"]
    assert {r["pre_unit_id"] for r in raw} == {name}


@pytest.mark.parametrize("name", ["a=b", " =1", "u1", "'quoted", "''", "x-y"])
def test_csv_safe_cells_and_the_quote_rule(small, name):
    """Only a leading trigger (or a leading single quote, so the rule can be
    undone) is prefixed; the csv module reads the cell back."""
    from eidecomp.export import render
    from eidecomp.export.edges_csv import restore_cell

    c, _ = small
    ids = [name] + [f"u{i}" for i in range(1, 20)]
    cells = {r["pre_unit_id"] for r in _csv_rows(render("csv", c, unit_ids=ids))
             if r["pre"] == "E0"}
    assert cells == {"'" + name if name.startswith("'") else name}
    assert {restore_cell(x) for x in cells} == {name}


def test_csv_weights_are_bare_exact_numbers(small):
    """The weight column is never quoted or prefixed: Python's csv module
    reads every other cell of a row as quoted text, the weight as a number
    (QUOTE_NONNUMERIC), and float() gives the weight bit for bit."""

    from eidecomp.export import render
    from eidecomp.graph import neuron_graph

    c, _ = small
    data = render("csv", c, unit_ids=["-" + str(i) for i in range(20)])
    reader = csv.reader(_csv_lines(data.decode("utf-8")),
                        quoting=csv.QUOTE_NONNUMERIC)
    header = next(reader)
    G = neuron_graph(c)
    n = 0
    for row in reader:
        w = row[header.index("weight")]
        assert isinstance(w, float)
        assert w == G.edges[row[0], row[1]]["weight"]
        assert all(isinstance(x, str) for k, x in enumerate(row)
                   if header[k] != "weight")
        n += 1
    assert n == G.number_of_edges()


@pytest.mark.parametrize("spelling", ["edges", "links"])
def test_node_link_json_reads_at_both_networkx_spellings(small, spelling):
    # reference: networkx's own node_link_graph, at the edges= keyword of
    # networkx >= 3.4 ("edges") and of its older default ("links")
    import json

    from eidecomp.export import render
    from eidecomp.graph import circuit_from_graph

    c, _ = small
    G = nx.node_link_graph(json.loads(render("json", c)), edges=spelling)
    back = circuit_from_graph(G)
    for name in ("J_EE", "J_EU", "J_UE", "J_ET", "J_TE"):
        assert np.allclose(getattr(back, name), getattr(c, name))


def test_population_table_csv_counts_each_block(small):
    # reference: numpy's count of each block's nonzeros over its size, read
    # back with Python's csv module from the "populations" export
    import csv
    import io

    from eidecomp.export import render
    from eidecomp.types import BLOCKS

    c, _ = small
    rows = list(csv.DictReader(io.StringIO(render("populations", c).decode())))
    by_pair = {(r["pre_population"], r["post_population"]): r for r in rows}
    for b in BLOCKS:
        J = getattr(c, b.name)
        if not J.any():
            assert (b.pre_name, b.post_name) not in by_pair
            continue
        r = by_pair[(b.pre_name, b.post_name)]
        assert int(r["count"]) == np.count_nonzero(J)
        assert float(r["probability"]) == np.count_nonzero(J) / J.size
        assert float(r["mean_weight"]) == pytest.approx(J[J > 0].mean(), rel=1e-15)
        assert r["synapse"] == ("excitatory" if b.sign > 0 else "inhibitory")


def test_load_circuit_is_public(tmp_path):
    import eidecomp
    from eidecomp.cli import main

    W, _, _ = make_planted_circuit(40, n_untuned=2, n_tuned=6, pool=3, seed=1)
    np.save(tmp_path / "w.npy", W)
    assert main(["run", str(tmp_path / "w.npy"), "-o", str(tmp_path / "c"),
                 "-q"]) == 0
    c, doc = eidecomp.load_circuit(tmp_path / "c")
    assert c.n_excitatory == 40 and doc["counts"]["excitatory"] == 40
    assert c.unit_ids is None                  # no unit table: no names


def test_load_circuit_names_the_units_of_the_unit_table(tabled):
    d, circuit, _, _ = tabled
    assert circuit.unit_ids == tuple(f"u{i}" for i in range(40))


# --- what the unit table gave, in every graph format ---------------------------
# References: networkx's GraphML and node-link readers, igraph's GraphML
# reader, Python's csv module and libNeuroML read the files back; the
# interneurons' values are checked against the weighted mean direction of
# their input pool computed here from its formula (Mardia and Jupp 2000,
# Directional Statistics, section 2.2.1, from memory: the argument of
# sum w exp(i 2 pi f / P), mapped back to [0, P)) and numpy's weighted
# average of the pool's positions.

@pytest.fixture(scope="module")
def tabled(tmp_path_factory):
    """A bundle made by ``run --units`` with features and positions."""
    from eidecomp.cli import main

    d = tmp_path_factory.mktemp("tabled")
    W, _, features = make_planted_circuit(40, n_untuned=2, n_tuned=8, pool=4,
                                          seed=3)
    # scaled to max Re eig 0.5 (numpy): stable, as the script exports require
    np.save(d / "w.npy", 0.5 * W / np.linalg.eigvals(W).real.max())
    pos = np.column_stack([np.arange(40) * 12.5, (np.arange(40) % 7) * 20.0])
    with open(d / "units.csv", "w") as fh:
        fh.write("id,feature,x,y\n")
        for i, (f, (x, y)) in enumerate(zip(features, pos, strict=True)):
            fh.write(f"u{i},{float(f)!r},{float(x)!r},{float(y)!r}\n")
    assert main(["run", str(d / "w.npy"), "--units", str(d / "units.csv"),
                 "-o", str(d / "c"), "-q"]) == 0
    circuit, _ = __import__("eidecomp").load_circuit(d / "c")
    return d, circuit, features, pos


def _expected_interneurons(circuit, features, pos, period=180.0):
    J = circuit.J_IE
    z = (J * np.exp(2j * np.pi * features / period)).sum(axis=1)
    feats = np.mod(np.angle(z) * period / (2 * np.pi), period)
    has_input = J.sum(axis=1) > 0
    where = np.array([np.average(pos, axis=0, weights=row) if row.sum() > 0
                      else [np.nan, np.nan] for row in J])
    names = ([f"U{i}" for i in range(circuit.n_untuned)]
             + [f"T{i}" for i in range(circuit.n_tuned)])
    return names, feats, where, has_input


def _export(d, fmt, suffix):
    from eidecomp.cli import main

    out = d / f"out{suffix}"
    assert main(["export", str(d / "c"), "--format", fmt, "-o", str(out),
                 "--force", "-q"]) == 0
    return out


def test_graphml_and_json_carry_every_units_feature_and_position(tabled):
    d, circuit, features, pos = tabled
    names, feats, where, has_input = _expected_interneurons(circuit, features,
                                                            pos)
    assert has_input.any()
    for G in (nx.read_graphml(_export(d, "graphml", ".graphml")),
              read_json(_export(d, "json", ".json"))):
        for i in range(40):
            node = G.nodes[f"E{i}"]
            assert (node["feature"], node["x"], node["y"]) == (
                features[i], pos[i, 0], pos[i, 1])
        for k, name in enumerate(names):
            node = G.nodes[name]
            if not has_input[k]:
                assert "feature" not in node and "x" not in node
                continue
            diff = (node["feature"] - feats[k] + 90.0) % 180.0 - 90.0
            assert abs(diff) < 1e-9, name
            assert node["x"] == pytest.approx(where[k, 0], rel=1e-12)
            assert node["y"] == pytest.approx(where[k, 1], rel=1e-12)


def test_igraph_reads_the_graphml_export(tabled):
    import igraph  # in the test extra
    d, circuit, features, pos = tabled
    g = igraph.Graph.Read_GraphML(str(_export(d, "graphml", ".graphml")))
    assert g.is_directed()
    assert g.vcount() == circuit.n_excitatory + circuit.n_untuned + circuit.n_tuned
    n_edges = sum(np.count_nonzero(getattr(circuit, b)) for b in
                  ("J_EE", "J_EU", "J_UE", "J_ET", "J_TE"))
    assert g.ecount() == n_edges
    by_name = {v["id"]: v for v in g.vs}
    assert [by_name[f"E{i}"]["x"] for i in range(40)] == pos[:, 0].tolist()
    names, feats, _, has_input = _expected_interneurons(circuit, features, pos)
    k = int(np.flatnonzero(has_input)[0])
    diff = (by_name[names[k]]["feature"] - feats[k] + 90.0) % 180.0 - 90.0
    assert abs(diff) < 1e-9
    # the weights of E -> E edges, pre -> post, as J_EE[post, pre]
    for e in g.es.select(synapse="excitatory")[:50]:
        pre, post = g.vs[e.source]["id"], g.vs[e.target]["id"]
        if pre[0] == post[0] == "E":
            assert e["weight"] == circuit.J_EE[int(post[1:]), int(pre[1:])]


def test_csv_export_carries_both_ends_values(tabled):
    d, circuit, features, pos = tabled
    with open(_export(d, "csv", ".csv"), newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(_csv_lines(fh.read())))
    ee = [r for r in rows if r["pre_population"] == r["post_population"] == "E"]
    assert ee
    for r in ee:
        i, j = int(r["pre"][1:]), int(r["post"][1:])
        assert float(r["pre_feature"]) == features[i]
        assert (float(r["post_x"]), float(r["post_y"])) == tuple(pos[j])


def test_neuroml_export_carries_positions_and_features(tabled):
    require("neuroml")
    import json

    from neuroml.loaders import read_neuroml2_file

    d, circuit, features, pos = tabled
    names, feats, where, has_input = _expected_interneurons(circuit, features,
                                                            pos)
    doc = read_neuroml2_file(str(_export(d, "neuroml", ".net.nml")))
    pops = {p.id: p for p in doc.networks[0].populations}
    E = pops["E"]
    assert [(i.location.x, i.location.y) for i in E.instances] == [
        tuple(p) for p in pos]
    assert json.loads(E.notes)["features"] == features.tolist()
    start = 0
    for pop_name, size in (("I_untuned", circuit.n_untuned),
                           ("I_tuned", circuit.n_tuned)):
        part = slice(start, start + size)
        start += size
        got = json.loads(pops[pop_name].notes)["features"]
        for g, f, h in zip(got, feats[part], has_input[part], strict=True):
            if not h:
                assert g is None
                continue
            assert abs((g - f + 90.0) % 180.0 - 90.0) < 1e-9
        if has_input[part].all():
            locs = np.array([(i.location.x, i.location.y)
                             for i in pops[pop_name].instances])
            np.testing.assert_allclose(locs, where[part], rtol=1e-12)
        else:
            assert not pops[pop_name].instances


# --- a labelled W: a pandas DataFrame --------------------------------------------
# Reference: pandas (in the test extra) holds the labels; the decomposition and
# the circuit must equal those of the bare numpy array, and the exports carry
# the DataFrame's index as the units' ids, read back by networkx.

def test_a_dataframes_index_becomes_the_unit_ids():
    import io

    import pandas as pd

    from eidecomp import robust_pca
    from eidecomp.export import render

    W, _, _ = make_planted_circuit(30, n_untuned=2, n_tuned=6, pool=3, seed=5)
    labels = [f"cell-{k:03d}" for k in range(30)]
    df = pd.DataFrame(W, index=labels, columns=labels)
    dec = robust_pca(df)
    assert dec.unit_ids == tuple(labels)
    np.testing.assert_array_equal(dec.low_rank, robust_pca(W).low_rank)
    c = assemble(df, baselines=False)
    assert c.unit_ids == tuple(labels)
    assert assemble(dec, baselines=False).unit_ids == tuple(labels)
    ref = assemble(W, baselines=False)
    np.testing.assert_array_equal(c.J_EE, ref.J_EE)
    assert ref.unit_ids is None
    G = nx.read_graphml(io.BytesIO(render("graphml", c)))
    assert [G.nodes[f"E{i}"]["unit_id"] for i in range(30)] == labels
    # given ids win over the circuit's own
    G = nx.read_graphml(io.BytesIO(render("graphml", c, unit_ids=list("abcdefghij"
                                                                      * 3))))
    assert G.nodes["E1"]["unit_id"] == "b"


def test_a_dataframe_whose_rows_and_columns_differ_is_refused():
    import pandas as pd

    from eidecomp import robust_pca
    from eidecomp.errors import InputError

    W, _, _ = make_planted_circuit(20, n_untuned=1, n_tuned=4, pool=3, seed=0)
    df = pd.DataFrame(W, index=[f"a{k}" for k in range(20)],
                      columns=[f"b{k}" for k in range(20)])
    with pytest.raises(InputError, match="different labels"):
        assemble(df, baselines=False)
    assert robust_pca(df).unit_ids is None   # not unit ids: a split still runs


def _hand_circuit():
    """6 E units, 1 untuned and 2 tuned interneurons; tuned 1 has no input."""
    from eidecomp.types import Circuit

    rng = np.random.default_rng(8)
    J_TE = np.zeros((2, 6))
    J_TE[0, :3] = [1.0, 2.0, 0.5]
    return Circuit(J_EE=rng.random((6, 6)) * (rng.random((6, 6)) < 0.4),
                   J_EU=rng.random((6, 1)), J_UE=rng.random((1, 6)),
                   J_ET=rng.random((6, 2)), J_TE=J_TE)


def test_direction_features_and_an_interneuron_without_input(tmp_path):
    # reference: the mean-direction formula at period 360 (see above) and
    # numpy's weighted average; networkx, csv and libNeuroML read back
    import io
    import json

    from eidecomp.export import render

    c = _hand_circuit()
    features = np.array([350.0, 10.0, 40.0, 200.0, 120.0, 300.0])
    pos = np.column_stack([np.arange(6) * 30.0, np.zeros(6)])
    names, feats, where, has_input = _expected_interneurons(c, features, pos,
                                                            period=360.0)
    assert has_input.tolist() == [True, True, False]
    G = nx.read_graphml(io.BytesIO(render("graphml", c, features=features,
                                          positions=pos, period=360.0)))
    J = read_json_bytes(render("json", c, features=features, positions=pos,
                               period=360.0))
    for graph in (G, J):
        for k, name in enumerate(names[:2]):
            diff = (graph.nodes[name]["feature"] - feats[k] + 180.0) % 360.0 - 180.0
            assert abs(diff) < 1e-9
            assert graph.nodes[name]["x"] == pytest.approx(where[k, 0], rel=1e-12)
        assert not {"feature", "x", "y"} & set(graph.nodes["T1"])
    rows = list(csv.DictReader(io.StringIO(render(
        "csv", c, features=features, positions=pos, period=360.0).decode())))
    t1 = [r for r in rows if r["post"] == "T1" or r["pre"] == "T1"]
    assert t1 and all(r["post_feature"] == "" for r in t1 if r["post"] == "T1")
    require("neuroml")
    from neuroml.loaders import read_neuroml2_file

    path = tmp_path / "c.net.nml"
    path.write_bytes(render("neuroml", c, features=features, positions=pos,
                            period=360.0))
    pops = {p.id: p for p in read_neuroml2_file(str(path)).networks[0].populations}
    notes = json.loads(pops["I_tuned"].notes)["features"]
    assert notes[1] is None and abs((notes[0] - feats[1] + 180) % 360 - 180) < 1e-9
    assert not pops["I_tuned"].instances          # one position undefined
    assert len(pops["I_untuned"].instances) == 1


def read_json_bytes(data):
    return nx.node_link_graph(json.loads(data), edges="edges")


@pytest.mark.parametrize("fmt", ["graphml", "json", "csv", "neuroml"])
def test_a_non_finite_feature_or_position_is_refused(fmt):
    from eidecomp.errors import InputError
    from eidecomp.export import render

    if fmt == "neuroml":
        require("neuroml")
    c = _hand_circuit()
    features = np.array([350.0, np.nan, 40.0, 200.0, 120.0, 300.0])
    with pytest.raises(InputError,
                       match="features: unit 1 has nan, not a finite number"):
        render(fmt, c, features=features)
    pos = np.zeros((6, 2))
    pos[4, 1] = np.inf
    with pytest.raises(InputError,
                       match="positions: unit 4 has \\[0.0, inf\\], not a finite"):
        render(fmt, c, positions=pos)


def test_dataframe_labels_follow_the_unit_id_rules():
    import pandas as pd

    from eidecomp import robust_pca
    from eidecomp.errors import InputError

    W, _, _ = make_planted_circuit(20, n_untuned=1, n_tuned=4, pool=3, seed=0)
    assert robust_pca(pd.DataFrame(W)).unit_ids is None   # 0, 1, ...: unnamed
    twice = [f"u{k % 10}" for k in range(20)]
    with pytest.raises(InputError, match="units 0 and 10 have the same label"):
        assemble(pd.DataFrame(W, index=twice, columns=twice), baselines=False)
    odd = [f"u{k}" for k in range(19)] + ["bell\x07"]
    with pytest.raises(InputError, match="unit 19 .*U\\+0007"):
        robust_pca(pd.DataFrame(W, index=odd, columns=odd))


def test_the_readme_names_the_edge_attributes_the_files_carry(tabled, tmp_path):
    """README: edges carry `weight` and `synapse` (issue 30: it said "kind");
    reference: networkx's GraphML reader on the exported file."""
    from pathlib import Path

    from networkx import read_graphml

    from eidecomp.cli import main

    d, _, _, _ = tabled
    out = tmp_path / "g.graphml"
    assert main(["export", str(d / "c"), "--format", "graphml", "-o", str(out),
                 "-q"]) == 0
    keys = set().union(*(data for _, _, data in read_graphml(out).edges(data=True)))
    readme = (Path(__file__).parents[1] / "README.md").read_text("utf-8")
    assert {"weight", "synapse"} <= keys
    assert "nonnegative `weight` and its `synapse` attribute" in " ".join(
        readme.split())
