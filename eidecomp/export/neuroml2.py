"""NeuroML2 through libNeuroML (imported only inside these functions).

The document holds one cell type per synapse sign (``iafTauCell``
placeholders whose tau is the population's time constant: NeuroML2 has no
core rate unit, and the network structure is what this file carries), one
population per entry of :data:`eidecomp.types.POPULATION_NAMES` (E,
I_untuned, I_tuned; empty ones left out), and one ``continuousProjection``
per nonzero block of :data:`eidecomp.types.BLOCKS`, with a
``continuousConnectionInstanceW`` per synapse: the pre component is a
``silentSynapse``, the post component ``exc_syn`` or ``inh_syn`` (the
synapse kind, Dale's law), and the weight the block's nonnegative magnitude.

libNeuroML writes floats as fixed point with 15 decimals ("%.15f"), which
loses digits of small weights; the connections here are written with
Python's shortest round-trip form (repr) instead, so reading the file back
gives the weights bit for bit.

Unit names go into the notes of the excitatory population as a JSON object
``{"unit_ids": [...]}`` whose text holds no markup character and no raw
control character: JSON escapes quotes, backslashes and every control
character (CR, LF and tab included: an XML parser would turn a raw CR into
LF), and ``<``, ``>`` and ``&`` are written as the JSON escapes ``\\u003c``,
``\\u003e``, ``\\u0026``. libNeuroML's writer keeps ``<![CDATA[...]]>``
sections of a text unescaped, so a name holding one would otherwise come
back changed; here ``json.loads`` of the notes gives every name exactly.
"""

import json

import numpy as np

from ..params import TAU_E_MS, TAU_I_MS
from ..types import BLOCKS, EXCITATORY, POPULATION_NAMES
from ._names import unit_id_list

__all__ = ["notes_unit_ids", "read_blocks", "render_neuroml", "to_document",
           "unit_ids_notes", "write_neuroml"]

_EXC_CELL, _INH_CELL = "eidecomp_exc_unit", "eidecomp_inh_unit"
_MARKUP = str.maketrans({"<": "\\u003c", ">": "\\u003e", "&": "\\u0026"})


def unit_ids_notes(unit_ids):
    """The notes text of the excitatory population: ASCII JSON, no markup.

    >>> unit_ids_notes(["<![CDATA[x]]>", "a\\r\\nb"])
    '{"unit_ids": ["\\\\u003c![CDATA[x]]\\\\u003e", "a\\\\r\\\\nb"]}'
    >>> notes_unit_ids(unit_ids_notes(["<![CDATA[x]]>"]))
    ['<![CDATA[x]]>']
    """
    return json.dumps({"unit_ids": list(unit_ids)}, ensure_ascii=True) \
        .translate(_MARKUP)


def notes_unit_ids(notes):
    """The unit ids held by :func:`unit_ids_notes` text."""
    return json.loads(notes)["unit_ids"]


def _exact_connection_class():
    import neuroml

    class ExactConnection(neuroml.ContinuousConnectionInstanceW):
        def gds_format_float(self, input_data, input_name=""):
            return repr(float(input_data))

    return ExactConnection


def _cell(kind):
    return _EXC_CELL if kind == EXCITATORY else _INH_CELL


def to_document(circuit, *, tau_e=TAU_E_MS, tau_i=TAU_I_MS,
                name="eidecomp_circuit", unit_ids=None, positions=None):
    """A neuroml.NeuroMLDocument of the circuit (``unit_ids``: see the
    module's docstring). With ``positions`` (N x 2, micrometres, from the
    unit table) the E population is a populationList whose instances carry
    each unit's location (z = 0)."""
    import neuroml

    ids = unit_id_list(unit_ids, circuit.n_excitatory)
    Conn = _exact_connection_class()
    doc = neuroml.NeuroMLDocument(id=name)
    for cell, tau in ((_EXC_CELL, tau_e), (_INH_CELL, tau_i)):
        doc.iaf_tau_cells.append(neuroml.IafTauCell(
            id=cell, leak_reversal="-65mV", thresh="-50mV", reset="-65mV",
            tau=f"{float(tau)!r}ms"))
    doc.silent_synapses.append(neuroml.SilentSynapse(id="silent"))
    doc.linear_graded_synapses.append(
        neuroml.LinearGradedSynapse(id="exc_syn", conductance="1nS"))
    doc.linear_graded_synapses.append(
        neuroml.LinearGradedSynapse(id="inh_syn", conductance="1nS"))
    net = neuroml.Network(id="network")
    doc.networks.append(net)
    for pop in circuit.populations:
        if pop.size:
            population = neuroml.Population(id=pop.name, component=_cell(pop.kind),
                                            size=pop.size)
            if pop.kind == EXCITATORY and ids is not None:
                population.notes = unit_ids_notes(ids)
            if pop.kind == EXCITATORY and positions is not None:
                population.type = "populationList"
                for k, (x, y) in enumerate(np.asarray(positions, float)):
                    population.instances.append(neuroml.Instance(
                        id=k, location=neuroml.Location(
                            x=float(x), y=float(y), z=0.0)))
            net.populations.append(population)
    for b in BLOCKS:
        J = getattr(circuit, b.name)
        rows, cols = np.nonzero(J)
        if not len(rows):
            continue
        pre, post = b.pre_name, b.post_name
        proj = neuroml.ContinuousProjection(
            id=f"{pre}_to_{post}", presynaptic_population=pre,
            postsynaptic_population=post)
        syn = "exc_syn" if b.sign > 0 else "inh_syn"
        for k, (i, j) in enumerate(zip(rows, cols, strict=True)):
            proj.continuous_connection_instance_ws.append(Conn(
                id=k, pre_cell=f"../{pre}[{int(j)}]",
                post_cell=f"../{post}[{int(i)}]", pre_component="silent",
                post_component=syn, weight=float(J[i, j])))
        net.continuous_projections.append(proj)
    return doc


def render_neuroml(circuit, *, features=None, positions=None, unit_ids=None,
                   tau_e=TAU_E_MS, tau_i=TAU_I_MS, raw_csv=False, drive=None):
    """The ``.net.nml`` file as UTF-8 bytes, read back by libNeuroML and
    validated by its schema check; ``positions`` become the E units'
    instance locations (features, the drive and ``raw_csv`` do not apply)."""
    import io

    from neuroml.nml.nml import parseString
    from neuroml.writers import NeuroMLWriter

    doc = to_document(circuit, tau_e=tau_e, tau_i=tau_i, unit_ids=unit_ids,
                      positions=positions)
    buf = io.StringIO()
    NeuroMLWriter.write(doc, buf, close=False)
    text = buf.getvalue()
    # read back and checked by libNeuroML (ValueError on a schema violation);
    # its string loader would print the document, so the parser is called
    parseString(text, silence=True).validate(recursive=True)
    return text.encode("utf-8")


def write_neuroml(circuit, path, **kwargs):
    """Write ``path`` (.net.nml), validated against the NeuroML2 schema."""
    from ..io.staging import any_file, write_file

    return write_file(path, render_neuroml(circuit, **kwargs), force=True,
                      replaceable=any_file)


def _index(ref):
    return int(ref.split("[")[1].rstrip("]"))


def read_blocks(path):
    """The five blocks of a file written by :func:`write_neuroml`."""
    from neuroml.loaders import read_neuroml2_file

    doc = read_neuroml2_file(str(path))
    net = doc.networks[0]
    kind_of = {name: kind for kind, name in POPULATION_NAMES.items()}
    sizes = dict.fromkeys(POPULATION_NAMES, 0)
    for pop in net.populations:
        sizes[kind_of[pop.id]] = int(pop.size)
    blocks = {b.name: np.zeros((sizes[b.post], sizes[b.pre])) for b in BLOCKS}
    which = {(b.pre_name, b.post_name): b.name for b in BLOCKS}
    for proj in net.continuous_projections:
        J = blocks[which[(proj.presynaptic_population,
                          proj.postsynaptic_population)]]
        for c in proj.continuous_connection_instance_ws:
            J[_index(c.post_cell), _index(c.pre_cell)] = float(c.weight)
    return blocks
