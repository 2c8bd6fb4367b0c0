"""GraphML and node-link JSON of the neuron-level graph (networkx).

Both round-trip exactly: floats are written with Python's shortest
round-trip representation (repr), which networkx's GraphML writer uses and
JSON keeps.
"""

import json

import networkx as nx

__all__ = ["read_graphml", "read_json", "to_graphml_bytes", "to_json_bytes",
           "write_graphml", "write_json"]


def to_graphml_bytes(G):
    return "\n".join(nx.generate_graphml(G)).encode() + b"\n"


def to_json_bytes(G):
    data = nx.node_link_data(G, edges="edges")
    return (json.dumps(data, indent=1, sort_keys=True) + "\n").encode()


def write_graphml(G, path):
    with open(path, "wb") as fh:
        fh.write(to_graphml_bytes(G))


def write_json(G, path):
    with open(path, "wb") as fh:
        fh.write(to_json_bytes(G))


def read_graphml(path):
    return nx.read_graphml(path)


def read_json(path):
    with open(path, encoding="utf-8") as fh:
        return nx.node_link_graph(json.load(fh), edges="edges")
