"""NeuroML2 through libNeuroML (imported only inside these functions).

The document holds one cell type per population kind (``iafTauCell``
placeholders whose tau is the population's time constant: NeuroML2 has no
core rate unit, and the network structure is what this file carries), the
populations E, I_untuned and I_tuned, and one ``continuousProjection`` per
nonzero block, with a ``continuousConnectionInstanceW`` per synapse: the
pre component is a ``silentSynapse``, the post component ``exc_syn`` or
``inh_syn`` (the synapse kind, Dale's law), and the weight the block's
nonnegative magnitude.

libNeuroML writes floats as fixed point with 15 decimals ("%.15f"), which
loses digits of small weights; the connections here are written with
Python's shortest round-trip form (repr) instead, so reading the file back
gives the weights bit for bit.
"""

import json

import numpy as np

__all__ = ["read_blocks", "to_document", "write_neuroml"]

# projection id: (post population, pre population, block)
_PROJECTIONS = (("E", "E", "J_EE"), ("E", "I_untuned", "J_EU"),
                ("I_untuned", "E", "J_UE"), ("E", "I_tuned", "J_ET"),
                ("I_tuned", "E", "J_TE"))
_CELL = {"E": "eidecomp_exc_unit", "I_untuned": "eidecomp_inh_unit",
         "I_tuned": "eidecomp_inh_unit"}


def _exact_connection_class():
    import neuroml

    class ExactConnection(neuroml.ContinuousConnectionInstanceW):
        def gds_format_float(self, input_data, input_name=""):
            return repr(float(input_data))

    return ExactConnection


def to_document(circuit, *, tau_e=10.0, tau_i=10.0, name="eidecomp_circuit",
                unit_ids=None):
    """A neuroml.NeuroMLDocument of the circuit.

    ``unit_ids`` (the unit table's names) go into the notes of population E
    as a JSON object ``{"unit_ids": [...]}``: text content, escaped by the
    XML writer, so newlines and quotes survive and nothing is markup.
    """
    import neuroml

    Conn = _exact_connection_class()
    doc = neuroml.NeuroMLDocument(id=name)
    doc.iaf_tau_cells.append(neuroml.IafTauCell(
        id="eidecomp_exc_unit", leak_reversal="-65mV", thresh="-50mV",
        reset="-65mV", tau=f"{float(tau_e)!r}ms"))
    doc.iaf_tau_cells.append(neuroml.IafTauCell(
        id="eidecomp_inh_unit", leak_reversal="-65mV", thresh="-50mV",
        reset="-65mV", tau=f"{float(tau_i)!r}ms"))
    doc.silent_synapses.append(neuroml.SilentSynapse(id="silent"))
    doc.linear_graded_synapses.append(
        neuroml.LinearGradedSynapse(id="exc_syn", conductance="1nS"))
    doc.linear_graded_synapses.append(
        neuroml.LinearGradedSynapse(id="inh_syn", conductance="1nS"))
    net = neuroml.Network(id="network")
    doc.networks.append(net)
    sizes = {"E": circuit.n_excitatory, "I_untuned": circuit.n_untuned,
             "I_tuned": circuit.n_tuned}
    for pop, size in sizes.items():
        if size:
            population = neuroml.Population(id=pop, component=_CELL[pop],
                                            size=size)
            if pop == "E" and unit_ids is not None:
                population.notes = json.dumps({"unit_ids": list(unit_ids)})
            net.populations.append(population)
    for post, pre, block in _PROJECTIONS:
        J = getattr(circuit, block)
        rows, cols = np.nonzero(J)
        if not len(rows):
            continue
        proj = neuroml.ContinuousProjection(
            id=f"{pre}_to_{post}", presynaptic_population=pre,
            postsynaptic_population=post)
        syn = "exc_syn" if pre == "E" else "inh_syn"
        for k, (i, j) in enumerate(zip(rows, cols, strict=True)):
            proj.continuous_connection_instance_ws.append(Conn(
                id=k, pre_cell=f"../{pre}[{int(j)}]",
                post_cell=f"../{post}[{int(i)}]", pre_component="silent",
                post_component=syn, weight=float(J[i, j])))
        net.continuous_projections.append(proj)
    return doc


def write_neuroml(circuit, path, **kwargs):
    """Write ``path`` (.net.nml) and validate it against the NeuroML2 schema."""
    from neuroml.utils import validate_neuroml2
    from neuroml.writers import NeuroMLWriter

    NeuroMLWriter.write(to_document(circuit, **kwargs), str(path))
    validate_neuroml2(str(path))  # raises on a schema violation
    return path


def _index(ref):
    return int(ref.split("[")[1].rstrip("]"))


def read_blocks(path):
    """The five blocks of a file written by :func:`write_neuroml`."""
    from neuroml.loaders import read_neuroml2_file

    doc = read_neuroml2_file(str(path))
    net = doc.networks[0]
    sizes = {"E": 0, "I_untuned": 0, "I_tuned": 0}
    for pop in net.populations:
        sizes[pop.id] = int(pop.size)
    blocks = {block: np.zeros((sizes[post], sizes[pre]))
              for post, pre, block in _PROJECTIONS}
    which = {(pre, post): block for post, pre, block in _PROJECTIONS}
    for proj in net.continuous_projections:
        J = blocks[which[(proj.presynaptic_population,
                          proj.postsynaptic_population)]]
        for c in proj.continuous_connection_instance_ws:
            J[_index(c.post_cell), _index(c.pre_cell)] = float(c.weight)
    return blocks
