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
``{"unit_ids": [...]}`` (with ``"features"`` too when the unit table gives
them; an interneuron population's notes hold its pool features) whose text
holds no markup character and no raw control character: JSON escapes quotes,
backslashes and every control character (CR, LF and tab included: an XML
parser would turn a raw CR into LF), and ``<``, ``>`` and ``&`` are written
as the JSON escapes ``\\u003c``, ``\\u003e``, ``\\u0026``. libNeuroML's
writer keeps ``<![CDATA[...]]>`` sections of a text unescaped, so a name
holding one would otherwise come back changed; here ``json.loads`` of the
notes gives every name exactly (:func:`notes_values`).
"""

import json

import numpy as np

from ..analysis.tuning import pool_features
from ..io.provenance import stamp
from ..params import DEFAULT_PERIOD, TAU_E_MS, TAU_I_MS
from ..types import BLOCKS, EXCITATORY, POPULATION_NAMES, TUNED, UNTUNED
from ._names import per_unit, per_unit_xy, unit_id_list

__all__ = ["notes_values", "population_notes", "read_blocks",
           "render_neuroml", "to_document", "write_neuroml"]

_EXC_CELL, _INH_CELL = "eidecomp_exc_unit", "eidecomp_inh_unit"
_MARKUP = str.maketrans({"<": "\\u003c", ">": "\\u003e", "&": "\\u0026"})


def population_notes(unit_ids=None, features=None):
    """The notes text of a population: ASCII JSON, no markup, holding the
    unit ids and the features (null where undefined) that are given.

    >>> population_notes(["<![CDATA[x]]>", "a\\r\\nb"])
    '{"unit_ids": ["\\\\u003c![CDATA[x]]\\\\u003e", "a\\\\r\\\\nb"]}'
    >>> notes_values(population_notes(["<![CDATA[x]]>"]))["unit_ids"]
    ['<![CDATA[x]]>']
    >>> population_notes(features=[10.0, float("nan")])
    '{"features": [10.0, null]}'
    """
    values = {}
    if unit_ids is not None:
        values["unit_ids"] = list(unit_ids)
    if features is not None:
        values["features"] = [float(f) if np.isfinite(f) else None
                              for f in features]
    return json.dumps(values, ensure_ascii=True, allow_nan=False) \
        .translate(_MARKUP)


def notes_values(notes):
    """The values held by :func:`population_notes` text (a dict)."""
    return json.loads(notes)


def _exact_connection_class():
    import neuroml

    class ExactConnection(neuroml.ContinuousConnectionInstanceW):
        def gds_format_float(self, input_data, input_name=""):
            return repr(float(input_data))

    return ExactConnection


def _cell(kind):
    return _EXC_CELL if kind == EXCITATORY else _INH_CELL


def _population(pop, feats, where, names):
    """The neuroml.Population of ``pop``: notes with its names and
    features, instance locations when every unit has a position."""
    import neuroml

    population = neuroml.Population(id=pop.name, component=_cell(pop.kind),
                                    size=pop.size)
    if names is not None or feats is not None:
        population.notes = population_notes(names, feats)
    if where is not None and np.isfinite(where).all():
        population.type = "populationList"
        for k, (x, y) in enumerate(where):
            population.instances.append(neuroml.Instance(
                id=k, location=neuroml.Location(x=float(x), y=float(y), z=0.0)))
    return population


def to_document(circuit, *, tau_e=TAU_E_MS, tau_i=TAU_I_MS,
                name="eidecomp_circuit", unit_ids=None, positions=None,
                features=None, period=DEFAULT_PERIOD):
    """A neuroml.NeuroMLDocument of the circuit (``unit_ids``: see the
    module's docstring). With ``positions`` (N x 2, micrometres, from the
    unit table) the E population is a populationList whose instances carry
    each unit's location (z = 0), and so is an interneuron population whose
    units all have input: at its input pool's weighted mean position
    (:func:`eidecomp.analysis.pool_features`). ``features`` go into the
    populations' notes, an interneuron's as its pool's weighted circular
    mean over ``period`` degrees (null for one with no input)."""
    import neuroml

    n = circuit.n_excitatory
    ids = unit_id_list(circuit.named(unit_ids), n)
    features = per_unit(features, n, "features")
    pos = per_unit_xy(positions, n)
    f_i, p_i = (pool_features(circuit, features, pos, period)
                if features is not None or pos is not None else (None, None))
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
    start = {UNTUNED: 0, TUNED: circuit.n_untuned}
    for pop in circuit.populations:
        if not pop.size:
            continue
        if pop.kind == EXCITATORY:
            values = (features, pos, ids)
        else:
            part = slice(start[pop.kind], start[pop.kind] + pop.size)
            values = (None if f_i is None else f_i[part],
                      None if p_i is None else p_i[part], None)
        net.populations.append(_population(pop, *values))
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
                   tau_e=TAU_E_MS, tau_i=TAU_I_MS, raw_csv=False, drive=None,
                   period=DEFAULT_PERIOD):
    """The ``.net.nml`` file as UTF-8 bytes, read back by libNeuroML and
    validated by its schema check; ``positions`` become instance locations
    and ``features`` notes (:func:`to_document`; the drive and ``raw_csv``
    do not apply)."""
    import io

    from neuroml.nml.nml import parseString
    from neuroml.writers import NeuroMLWriter

    doc = to_document(circuit, tau_e=tau_e, tau_i=tau_i, unit_ids=unit_ids,
                      positions=positions, features=features, period=period)
    buf = io.StringIO()
    NeuroMLWriter.write(doc, buf, close=False)
    text = buf.getvalue()
    # read back and checked by libNeuroML (ValueError on a schema violation);
    # its string loader would print the document, so the parser is called
    parseString(text, silence=True).validate(recursive=True)
    return stamp(text.encode("utf-8"), "xml")


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
