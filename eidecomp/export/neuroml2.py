"""NeuroML2 through libNeuroML (imported only inside these functions).

The document is the spiking model of the PyNN export, in NeuroML2's own
PyNN-compatible elements (eidecomp.export.pynn_script.spiking_data, the
mapping of docs/simulators.md), so that cells, synapses and inputs are all
of one kind, spiking:

* one ``IF_curr_exp`` cell per population (E, I_untuned, I_tuned; empty
  ones left out), tau_m its time constant, PyNN's defaults otherwise
  (:data:`eidecomp.export.pynn_script.IF_CURR_EXP`);
* one ``expCurrSynapse`` per receiving population (tau_syn = 1.5 tau_m of
  the receiver); a ``projection`` per nonzero block of
  :data:`eidecomp.types.BLOCKS` with a ``connectionWD`` per synapse, its
  weight the current in nA (negative from an inhibitory population: Dale's
  law, PyNN's sign convention) and a delay of one time step;
* the drive carried in the file: each unit's constant current (its bias
  plus rate_per_drive / gain x h) as a ``pulseGeneratorDL`` of amplitude 1
  lasting :data:`DRIVE_MS`, given through an ``inputList`` of ``inputW``
  whose weight is that current in nA; and the zero-mean background, two
  ``poissonFiringSynapse`` inputs per unit on the unit's synapse with
  opposite weights.

:func:`read_blocks` reads the nonnegative block magnitudes back from the
currents (dividing by each receiving population's scale). libNeuroML writes
floats as fixed point with 15 decimals ("%.15f"), which loses digits of
small currents; connections and inputs are written with Python's shortest
round-trip form (repr) instead.

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
from .pynn_script import IF_CURR_EXP, gain_hz_per_nA, spiking_data

__all__ = ["notes_values", "population_notes", "read_blocks",
           "render_neuroml", "to_document", "write_neuroml"]

DRIVE_MS = 1e9
"""How long the drive's current generators last (ms): longer than any run."""
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


def _exact(cls):
    """``cls`` writing its floats in Python's shortest round-trip form."""
    class Exact(cls):
        def gds_format_float(self, input_data, input_name=""):
            return repr(float(input_data))

        def gds_format_double(self, input_data, input_name=""):
            return repr(float(input_data))

    Exact.__name__ = cls.__name__
    return Exact


def _cell(name):
    return f"{name}_cell"


def _synapse(name):
    return f"{name}_syn"


def _population(pop, feats, where, names):
    """The neuroml.Population of ``pop``: notes with its names and
    features, instance locations when every unit has a position."""
    import neuroml

    population = neuroml.Population(id=pop.name, component=_cell(pop.name),
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
                features=None, period=DEFAULT_PERIOD, drive=None):
    """A neuroml.NeuroMLDocument of the circuit's spiking model (the
    module's docstring), driven by ``drive`` (the drive of W's units, N
    values; None: zero, the units at their bias). ``unit_ids``: see the
    module's docstring. With ``positions`` (N x 2, micrometres, from the
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
    h = None if drive is None else np.asarray(getattr(drive, "values", drive),
                                              float).reshape(-1)
    data = spiking_data(circuit, h, tau_e=tau_e, tau_i=tau_i)
    doc = neuroml.NeuroMLDocument(id=name)
    net = neuroml.Network(id="network")
    doc.networks.append(net)
    start = {UNTUNED: 0, TUNED: circuit.n_untuned}
    offset, pops = 0, {}
    for k, pop in enumerate(circuit.populations):
        pops[pop.name] = (k, offset)
        offset += pop.size
        if not pop.size:
            continue
        _cell_and_synapse(doc, data, k, pop.name)
        if pop.kind == EXCITATORY:
            values = (features, pos, ids)
        else:
            part = slice(start[pop.kind], start[pop.kind] + pop.size)
            values = (None if f_i is None else f_i[part],
                      None if p_i is None else p_i[part], None)
        net.populations.append(_population(pop, *values))
        _inputs(doc, net, data, k, pop, offset - pop.size)
    _projections(net, data)
    return doc


def _cell_and_synapse(doc, data, k, name):
    """The population's IF_curr_exp cell and the synapse it receives on."""
    import neuroml

    tau_syn = float(data["tau_syn_ms"][k])
    doc.IF_curr_exp.append(_exact(neuroml.IF_curr_exp)(
        id=_cell(name), cm=IF_CURR_EXP["cm"], i_offset=0.0,
        tau_syn_E=tau_syn, tau_syn_I=tau_syn, v_init=IF_CURR_EXP["v_rest"],
        tau_m=float(data["tau_ms"][k]), tau_refrac=IF_CURR_EXP["tau_refrac"],
        v_reset=IF_CURR_EXP["v_reset"], v_rest=IF_CURR_EXP["v_rest"],
        v_thresh=IF_CURR_EXP["v_thresh"]))
    doc.exp_curr_synapses.append(_exact(neuroml.ExpCurrSynapse)(
        id=_synapse(name), tau_syn=tau_syn))


def _inputs(doc, net, data, k, pop, first):
    """Each unit's constant current (bias and drive) and its background."""
    import neuroml

    InputW = _exact(neuroml.InputW)
    doc.pulse_generator_dls.append(neuroml.PulseGeneratorDL(
        id=f"{pop.name}_current", delay="0ms", duration=f"{DRIVE_MS:.0f}ms",
        amplitude="1"))
    currents = neuroml.InputList(id=f"{pop.name}_drive", populations=pop.name,
                                 component=f"{pop.name}_current")
    for i in range(pop.size):
        currents.input_ws.append(InputW(
            id=i, target=f"../{pop.name}[{i}]", destination="synapses",
            weight=float(data["i_offset"][first + i])))
    net.input_lists.append(currents)
    w = float(data["background_weight_nA"][k])
    if w == 0.0:
        return
    rate = f"{float(data['background_hz'])!r}Hz"
    for side, sign in (("up", 1.0), ("down", -1.0)):
        source = f"{pop.name}_background_{side}"
        doc.poisson_firing_synapses.append(neuroml.PoissonFiringSynapse(
            id=source, average_rate=rate, synapse=_synapse(pop.name),
            spike_target=f"./{_synapse(pop.name)}"))
        inputs = neuroml.InputList(id=source + "s", populations=pop.name,
                                   component=source)
        for i in range(pop.size):
            inputs.input_ws.append(InputW(
                id=i, target=f"../{pop.name}[{i}]", destination="synapses",
                weight=sign * w))
        net.input_lists.append(inputs)


def _projections(net, data):
    """A projection per nonzero block, a connectionWD per synapse (nA)."""
    import neuroml

    Conn = _exact(neuroml.ConnectionWD)
    for k in range(int(data["n_projections"])):
        pre, post = str(data["proj_pre"][k]), str(data["proj_post"][k])
        proj = neuroml.Projection(id=f"{pre}_to_{post}",
                                  presynaptic_population=pre,
                                  postsynaptic_population=post,
                                  synapse=_synapse(post))
        for c, (j, i, nA, delay) in enumerate(data[f"proj_{k}"]):
            proj.connection_wds.append(Conn(
                id=c, pre_cell_id=f"../{pre}[{int(j)}]",
                post_cell_id=f"../{post}[{int(i)}]", weight=float(nA),
                delay=f"{float(delay)!r}ms"))
        net.projections.append(proj)


def render_neuroml(circuit, *, features=None, positions=None, unit_ids=None,
                   tau_e=TAU_E_MS, tau_i=TAU_I_MS, raw_csv=False, drive=None,
                   period=DEFAULT_PERIOD, **_):
    """The ``.net.nml`` file as UTF-8 bytes, read back by libNeuroML and
    validated by its schema check; ``positions`` become instance locations,
    ``features`` notes and ``drive`` the units' currents
    (:func:`to_document`; ``raw_csv`` does not apply)."""
    import io

    from neuroml.nml.nml import parseString
    from neuroml.writers import NeuroMLWriter

    doc = to_document(circuit, tau_e=tau_e, tau_i=tau_i, unit_ids=unit_ids,
                      positions=positions, features=features, period=period,
                      drive=drive)
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
    """The five nonnegative blocks of a file written by :func:`write_neuroml`:
    each connection's current divided by its receiving population's scale
    (coupling / (gain x tau_syn x 1e-3) nA per unit of weight, from the
    file's cells: eidecomp.export.pynn_script.gain_hz_per_nA)."""
    from neuroml.loaders import read_neuroml2_file

    doc = read_neuroml2_file(str(path))
    net = doc.networks[0]
    kind_of = {name: kind for kind, name in POPULATION_NAMES.items()}
    cells = {c.id: c for c in doc.IF_curr_exp}
    sizes = dict.fromkeys(POPULATION_NAMES, 0)
    scale = {}
    for pop in net.populations:
        sizes[kind_of[pop.id]] = int(pop.size)
        cell = cells[pop.component]
        tau_m, tau_syn = float(cell.tau_m), float(cell.tau_syn_E)
        scale[pop.id] = 1.0 / (float(gain_hz_per_nA(tau_m)) * tau_syn * 1e-3)
    blocks = {b.name: np.zeros((sizes[b.post], sizes[b.pre])) for b in BLOCKS}
    which = {(b.pre_name, b.post_name): b.name for b in BLOCKS}
    for proj in net.projections:
        pre, post = proj.presynaptic_population, proj.postsynaptic_population
        J = blocks[which[(pre, post)]]
        for c in proj.connection_wds:
            J[_index(c.post_cell_id), _index(c.pre_cell_id)] = \
                abs(float(c.weight)) / scale[post]
    return blocks
