"""A circuit as a networkx graph: the one place that turns [post, pre] into
pre -> post edges.

Two levels:

* :func:`neuron_graph`: a node per unit (attributes ``population``, ``kind``,
  ``sign``, ``index`` within its population, and ``feature``, ``x``, ``y``
  where a unit table gave them), an edge pre -> post per nonzero weight with
  its nonnegative ``weight`` and its ``synapse`` kind (``"excitatory"`` or
  ``"inhibitory"``, the presynaptic population's sign);
* :func:`population_graph`: a node per population (``kind``, ``size``), an
  edge per connected pair with ``count``, connection ``probability``
  (count / (n_pre n_post)) and ``mean_weight`` over the existing synapses.

:func:`circuit_from_graph` inverts :func:`neuron_graph`.
"""

import networkx as nx
import numpy as np

from .types import EXCITATORY, TUNED, UNTUNED, Circuit

__all__ = ["circuit_from_graph", "neuron_graph", "population_graph"]

_PREFIX = {EXCITATORY: "E", UNTUNED: "U", TUNED: "T"}
_POP = {EXCITATORY: "E", UNTUNED: "I_untuned", TUNED: "I_tuned"}
# (post kind, pre kind, block name)
_BLOCKS = ((EXCITATORY, EXCITATORY, "J_EE"), (EXCITATORY, UNTUNED, "J_EU"),
           (UNTUNED, EXCITATORY, "J_UE"), (EXCITATORY, TUNED, "J_ET"),
           (TUNED, EXCITATORY, "J_TE"))


def _sizes(circuit):
    return {EXCITATORY: circuit.n_excitatory, UNTUNED: circuit.n_untuned,
            TUNED: circuit.n_tuned}


def node_name(kind, index):
    """``E0``, ``U3``, ``T12``: the node name of a unit."""
    return f"{_PREFIX[kind]}{index}"


def neuron_graph(circuit, *, features=None, x=None, y=None, unit_ids=None):
    """The neuron-level directed graph of a Circuit.

    ``features``, ``x``, ``y`` and ``unit_ids`` (the unit table's names,
    kept as string data) become attributes of the excitatory nodes.

    Examples
    --------
    >>> import numpy as np
    >>> c = Circuit(J_EE=np.array([[0, 2.0], [0, 0]]), J_EU=np.ones((2, 1)),
    ...             J_UE=np.array([[0.5, 0]]), J_ET=np.zeros((2, 0)),
    ...             J_TE=np.zeros((0, 2)))
    >>> G = neuron_graph(c)
    >>> G.edges["E1", "E0"]      # J_EE[0, 1]: from unit 1 onto unit 0
    {'weight': 2.0, 'synapse': 'excitatory'}
    >>> sorted(G.predecessors("U0"))
    ['E0']
    """
    G = nx.DiGraph(convention="edges run pre -> post; weights are "
                   "nonnegative, the sign is the synapse kind")
    extras = {"feature": features, "x": x, "y": y}
    for kind, n in _sizes(circuit).items():
        for i in range(n):
            attrs = {"population": _POP[kind], "kind": kind,
                     "sign": 1 if kind == EXCITATORY else -1, "index": i}
            if kind == EXCITATORY:
                for key, values in extras.items():
                    if values is not None:
                        attrs[key] = float(values[i])
                if unit_ids is not None:
                    attrs["unit_id"] = str(unit_ids[i])
            G.add_node(node_name(kind, i), **attrs)
    for post_kind, pre_kind, block in _BLOCKS:
        J = getattr(circuit, block)
        synapse = "excitatory" if pre_kind == EXCITATORY else "inhibitory"
        posts, pres = np.nonzero(J)
        G.add_edges_from(
            (node_name(pre_kind, int(j)), node_name(post_kind, int(i)),
             {"weight": float(J[i, j]), "synapse": synapse})
            for i, j in zip(posts, pres, strict=True))
    return G


def population_graph(circuit):
    """The population-level graph: counts, connection probability, mean weight."""
    G = nx.DiGraph()
    sizes = _sizes(circuit)
    for kind, n in sizes.items():
        G.add_node(_POP[kind], kind=kind, size=n)
    for post_kind, pre_kind, block in _BLOCKS:
        J = getattr(circuit, block)
        count = int(np.count_nonzero(J))
        if count == 0:
            continue
        G.add_edge(_POP[pre_kind], _POP[post_kind], count=count,
                   probability=count / J.size,
                   mean_weight=float(J[J != 0].mean()),
                   synapse="excitatory" if pre_kind == EXCITATORY
                   else "inhibitory")
    return G


def circuit_from_graph(G):
    """Rebuild the Circuit's blocks from a :func:`neuron_graph`."""
    sizes = {k: 0 for k in _PREFIX}
    for _, attrs in G.nodes(data=True):
        sizes[attrs["kind"]] = max(sizes[attrs["kind"]], int(attrs["index"]) + 1)
    blocks = {block: np.zeros((sizes[post], sizes[pre]))
              for post, pre, block in _BLOCKS}
    which = {(pre, post): block for post, pre, block in _BLOCKS}
    for u, v, attrs in G.edges(data=True):
        pu, pv = G.nodes[u], G.nodes[v]
        block = which[(pu["kind"], pv["kind"])]
        blocks[block][int(pv["index"]), int(pu["index"])] = float(attrs["weight"])
    return Circuit(**blocks)
