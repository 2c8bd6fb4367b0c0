"""A circuit as a networkx graph: the one place that turns [post, pre] into
pre -> post edges.

Two levels:

* :func:`neuron_graph`: a node per unit (attributes ``population``, ``kind``,
  ``sign``, ``index`` within its population, and ``feature``, ``x``, ``y``,
  ``unit_id`` where a unit table gave them), an edge pre -> post per nonzero
  weight with its nonnegative ``weight`` and its ``synapse`` kind
  (``"excitatory"`` or ``"inhibitory"``, the presynaptic population's sign);
* :func:`population_graph`: a node per population (``kind``, ``size``), an
  edge per connected pair with ``count``, connection ``probability``
  (count / (n_pre n_post)) and ``mean_weight`` over the existing synapses.

Populations and blocks are those of :data:`eidecomp.types.POPULATION_NAMES`
and :data:`eidecomp.types.BLOCKS`. :func:`circuit_from_graph` inverts
:func:`neuron_graph`.
"""

import networkx as nx
import numpy as np

from .types import BLOCKS, EXCITATORY, POPULATION_NAMES, TUNED, UNTUNED, Circuit

__all__ = ["POPULATION_COLUMNS", "circuit_from_graph", "neuron_graph",
           "node_name", "population_graph", "population_table", "synapse_kind"]

_PREFIX = {EXCITATORY: "E", UNTUNED: "U", TUNED: "T"}
"""Node names: this prefix and the unit's index within its population."""


def node_name(kind, index):
    """``E0``, ``U3``, ``T12``: the node name of a unit."""
    return f"{_PREFIX[kind]}{index}"


def synapse_kind(block):
    """``"excitatory"`` or ``"inhibitory"``: the sign of the block's
    presynaptic population (Dale's law)."""
    return "excitatory" if block.sign > 0 else "inhibitory"


def neuron_graph(circuit, *, features=None, x=None, y=None, unit_ids=None,
                 interneurons=None):
    """The neuron-level directed graph of a Circuit.

    ``features``, ``x``, ``y`` and ``unit_ids`` (the unit table's names,
    kept as string data; by default the circuit's own) become attributes of
    the excitatory nodes.
    A circuit of W's own neurons gives every node ``w_unit``, its row of W
    (and of the unit table).
    ``interneurons`` is ``(features, positions)`` of the interneurons,
    untuned first (each may be None), as
    :func:`eidecomp.analysis.pool_features` derives them from their input
    pools; a finite value becomes the node's ``feature`` or ``x`` and ``y``
    (an interneuron with no input has none).

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
    unit_ids = circuit.named(unit_ids)
    G = nx.DiGraph(convention="edges run pre -> post; weights are "
                   "nonnegative, the sign is the synapse kind")
    extras = {"feature": features, "x": x, "y": y}
    offset = 0
    for pop in circuit.populations:
        for i in range(pop.size):
            attrs = {"population": pop.name, "kind": pop.kind,
                     "sign": pop.sign, "index": i}
            if circuit.own_neurons:     # the row of W (and of the unit table)
                attrs["w_unit"] = int(circuit.w_index[offset + i])
            if pop.kind == EXCITATORY:
                for key, values in extras.items():
                    if values is not None:
                        attrs[key] = float(values[i])
                if unit_ids is not None:
                    attrs["unit_id"] = str(unit_ids[i])
            else:
                attrs.update(_derived(interneurons, circuit, pop.kind, i))
            G.add_node(node_name(pop.kind, i), **attrs)
        offset += pop.size
    for b in BLOCKS:
        J = getattr(circuit, b.name)
        synapse = synapse_kind(b)
        posts, pres = np.nonzero(J)
        G.add_edges_from(
            (node_name(b.pre, int(j)), node_name(b.post, int(i)),
             {"weight": float(J[i, j]), "synapse": synapse})
            for i, j in zip(posts, pres, strict=True))
    return G


def _derived(interneurons, circuit, kind, i):
    """The feature and position attributes of interneuron i of ``kind``."""
    if interneurons is None:
        return {}
    k = i if kind == UNTUNED else circuit.n_untuned + i
    feats, pos = interneurons
    out = {}
    if feats is not None and np.isfinite(feats[k]):
        out["feature"] = float(feats[k])
    if pos is not None and np.all(np.isfinite(pos[k])):
        out["x"], out["y"] = float(pos[k][0]), float(pos[k][1])
    return out


def population_graph(circuit):
    """The population-level graph: counts, connection probability, mean weight."""
    G = nx.DiGraph()
    for pop in circuit.populations:
        G.add_node(pop.name, kind=pop.kind, size=pop.size)
    for b in BLOCKS:
        J = getattr(circuit, b.name)
        count = int(np.count_nonzero(J))
        if count == 0:
            continue
        G.add_edge(b.pre_name, b.post_name, count=count,
                   probability=count / J.size,
                   mean_weight=float(J[J != 0].mean()), synapse=synapse_kind(b))
    return G


POPULATION_COLUMNS = ("pre_population", "post_population", "synapse",
                      "pre_size", "post_size", "count", "probability",
                      "mean_weight")
"""The columns of :func:`population_table`."""


def population_table(circuit):
    """One row (a dict of POPULATION_COLUMNS) per connected pair of
    populations, read off :func:`population_graph`: the synapse kind, the
    sizes, the number of connections, the connection probability and the
    mean nonzero weight. ``pandas.DataFrame(population_table(c))`` gives a
    DataFrame.

    >>> from eidecomp.types import Circuit
    >>> c = Circuit(J_EE=np.eye(2), J_EU=np.ones((2, 1)), J_UE=np.ones((1, 2)),
    ...             J_ET=np.zeros((2, 0)), J_TE=np.zeros((0, 2)))
    >>> [(r["pre_population"], r["post_population"], r["probability"])
    ...  for r in population_table(c)]
    [('E', 'E', 0.5), ('E', 'I_untuned', 1.0), ('I_untuned', 'E', 1.0)]
    """
    P = population_graph(circuit)
    return [{"pre_population": u, "post_population": v,
             "synapse": a["synapse"], "pre_size": P.nodes[u]["size"],
             "post_size": P.nodes[v]["size"], "count": a["count"],
             "probability": a["probability"], "mean_weight": a["mean_weight"]}
            for u, v, a in P.edges(data=True)]


def circuit_from_graph(G):
    """Rebuild the Circuit's blocks from a :func:`neuron_graph`."""
    sizes = dict.fromkeys(POPULATION_NAMES, 0)
    for _, attrs in G.nodes(data=True):
        sizes[attrs["kind"]] = max(sizes[attrs["kind"]], int(attrs["index"]) + 1)
    blocks = {b.name: np.zeros((sizes[b.post], sizes[b.pre])) for b in BLOCKS}
    which = {(b.pre, b.post): b.name for b in BLOCKS}
    for u, v, attrs in G.edges(data=True):
        pu, pv = G.nodes[u], G.nodes[v]
        block = which[(pu["kind"], pv["kind"])]
        blocks[block][int(pv["index"]), int(pu["index"])] = float(attrs["weight"])
    return Circuit(**blocks)
