"""GraphML and node-link JSON of the neuron-level graph (networkx).

Both round-trip exactly: floats are written with Python's shortest
round-trip representation (repr), which networkx's GraphML writer uses and
JSON keeps. Unit names are node attributes (``unit_id``), escaped by each
format's writer; in GraphML a carriage return is written as the character
reference ``&#13;``, since an XML parser turns a literal CR (and CRLF) into
LF (W3C XML 1.0, 2.11 "End-of-Line Handling"). A name XML 1.0 cannot hold is
refused (:func:`eidecomp.export._names.unit_id_list`).
"""

import json

import networkx as nx

from ..analysis.tuning import pool_features
from ..errors import InputError
from ..graph import neuron_graph
from ..io.provenance import stamp
from ..params import DEFAULT_PERIOD, TAU_E_MS, TAU_I_MS
from ._names import NOT_XML_CHAR, per_unit, per_unit_xy, unit_id_list

__all__ = ["graph_of", "read_graphml", "read_json", "render_graphml",
           "render_json", "to_graphml_bytes", "to_json_bytes", "write_graphml",
           "write_json"]


def graph_of(circuit, *, features=None, positions=None, unit_ids=None,
             period=DEFAULT_PERIOD):
    """The :func:`eidecomp.graph.neuron_graph` of ``circuit`` with the unit
    table's values checked: ``features`` (n_E,), ``positions`` (n_E, 2) as
    ``x`` and ``y``, ``unit_ids`` (n_E names). The interneurons get their
    input pool's weighted circular mean feature (over ``period`` degrees)
    and weighted mean position (:func:`eidecomp.analysis.pool_features`)."""
    n = circuit.n_excitatory
    features = per_unit(features, n, "features")
    pos = per_unit_xy(positions, n)
    x, y = (None, None) if pos is None else (pos[:, 0], pos[:, 1])
    pools = None
    if features is not None or pos is not None:
        pools = pool_features(circuit, features, pos, period)
    return neuron_graph(circuit, features=features, x=x, y=y,
                        unit_ids=unit_id_list(circuit.named(unit_ids), n),
                        interneurons=pools)


def _check_xml_text(G):
    for node, attrs in G.nodes(data=True):
        for key, value in attrs.items():
            if isinstance(value, str) and NOT_XML_CHAR.search(value):
                bad = NOT_XML_CHAR.search(value).group()
                raise InputError(f"node {node} {key} ({value!r}): "
                                 f"U+{ord(bad):04X} cannot be written "
                                 "(XML 1.0 cannot hold it)")


def to_graphml_bytes(G):
    """GraphML of any graph whose text attributes XML 1.0 can hold."""
    from networkx.readwrite.graphml import GraphMLWriter

    _check_xml_text(G)
    writer = GraphMLWriter(encoding="utf-8", prettyprint=True)
    writer.add_graph_element(G)
    # not nx.generate_graphml: it breaks the text into lines, turning a CR
    # (and U+0085, U+2028...) of a value into a line break. The writer emits
    # no CR of its own: every CR is from a value, written as a reference so
    # that a parser does not read it as LF.
    text = str(writer).replace("\r", "&#13;")
    return stamp((text if text.endswith("\n") else text + "\n").encode("utf-8"),
                 "xml")


def to_json_bytes(G):
    """Node-link JSON that ``networkx.node_link_graph`` reads at either of
    its spellings: the edges under "edges" (networkx >= 3.4's default) and,
    the same list again, under "links" (the older default, still accepted
    with ``edges="links"``)."""
    data = nx.node_link_data(G, edges="edges")
    data["links"] = data["edges"]
    return stamp((json.dumps(data, indent=1, sort_keys=True, allow_nan=False)
                  + "\n").encode(), "json")


def render_graphml(circuit, *, features=None, positions=None, unit_ids=None,
                   tau_e=TAU_E_MS, tau_i=TAU_I_MS, raw_csv=False, drive=None,
                   period=DEFAULT_PERIOD):
    """The GraphML file of the circuit's neuron graph, as bytes (the time
    constants and ``raw_csv`` do not apply)."""
    return to_graphml_bytes(graph_of(circuit, features=features,
                                     positions=positions, unit_ids=unit_ids,
                                     period=period))


def render_json(circuit, *, features=None, positions=None, unit_ids=None,
                tau_e=TAU_E_MS, tau_i=TAU_I_MS, raw_csv=False, drive=None,
                period=DEFAULT_PERIOD):
    """The node-link JSON file of the circuit's neuron graph, as bytes (the
    time constants and ``raw_csv`` do not apply)."""
    return to_json_bytes(graph_of(circuit, features=features,
                                  positions=positions, unit_ids=unit_ids,
                                  period=period))


def write_graphml(G, path):
    from ..io.staging import any_file, write_file

    return write_file(path, to_graphml_bytes(G), force=True,
                      replaceable=any_file)


def write_json(G, path):
    from ..io.staging import any_file, write_file

    return write_file(path, to_json_bytes(G), force=True,
                      replaceable=any_file)


def read_graphml(path):
    return nx.read_graphml(path)


def read_json(path):
    with open(path, encoding="utf-8") as fh:
        return nx.node_link_graph(json.load(fh), edges="edges")

