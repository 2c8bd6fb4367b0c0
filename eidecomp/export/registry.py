"""The export formats: one entry each, the one table the command line, the
pipeline and the tests read.

An entry names its format, says whether it writes one file or a folder,
names the optional module it needs (checked with importlib.util.find_spec
before rendering), gives a one-line help text, and holds a pure renderer::

    render(circuit, *, features=None, positions=None, unit_ids=None,
           tau_e=TAU_E_MS, tau_i=TAU_I_MS, raw_csv=False, drive=None,
           period=DEFAULT_PERIOD)
        -> bytes                              (one file)
        -> {file name: bytes | str | ndarray} (a folder)

which writes nothing (:func:`render` stamps what it returns, and gives a
folder its ``eidecomp-manifest.json``: eidecomp.io.provenance);
:func:`eidecomp.io.write_file` and :func:`eidecomp.io.write_folder` write,
atomically. Options a format has no use
for are accepted and ignored. A new format is one module with its renderer
and one line in :data:`REGISTRY`.

Examples
--------
>>> import numpy as np
>>> from eidecomp.types import Circuit
>>> c = Circuit(J_EE=np.eye(2), J_EU=np.ones((2, 1)), J_UE=np.ones((1, 2)),
...             J_ET=np.zeros((2, 0)), J_TE=np.zeros((0, 2)))
>>> FORMATS
('graphml', 'json', 'csv', 'populations', 'neuroml', 'pynn', 'nest', 'brian2')
>>> get_format("pynn").folder, sorted(render("nest", c))
(True, ['circuit_nest.py', 'circuit_rate_data.npz', 'eidecomp-manifest.json'])
>>> render("csv", c, unit_ids=["=1+1", "b"]).decode().splitlines()[1]
'"E0","E0","E","E","excitatory",1.0,"\\'=1+1","\\'=1+1"'
"""

import importlib.util
from collections.abc import Callable
from dataclasses import dataclass

from ..errors import InputError, entry
from ..io.provenance import stamp_folder
from ..io.staging import file_bytes
from . import edges_csv, graph_files, neuroml2, pynn_script, rate_scripts

__all__ = ["FILE_FORMATS", "FILE_SUFFIXES", "FOLDER_FORMATS", "FORMATS", "REGISTRY",
           "ExportFormat", "folder_kind", "get_format", "render",
           "require_module"]

SIM_EXTRA = "pip install 'eidecomp[sim]'"


def require_module(module):
    """InputError, one line, when the optional ``module`` is not installed."""
    if importlib.util.find_spec(module) is None:
        raise InputError(f"{module} is not installed; it comes with the "
                         f"simulator extra: {SIM_EXTRA}")


@dataclass(frozen=True)
class ExportFormat:
    """One export format.

    Attributes
    ----------
    name : str
        As given to ``--format``.
    folder : bool
        True when the renderer gives a folder's files, False for one file.
    render : callable
        The pure renderer (see the module's docstring).
    help : str
        One line for the command line's help.
    requires : str or None
        The optional module the renderer imports, or None.
    suffix : str
        The usual file name ending of a one-file format ("" for a folder).
    options : tuple of str
        The render options this format uses beyond the circuit, its unit ids,
        features and positions; the command refuses the others.
    """

    name: str
    folder: bool
    render: Callable
    help: str
    requires: str | None = None
    suffix: str = ""
    options: tuple = ()

    def check_available(self):
        """InputError when the module this format needs is not installed."""
        if self.requires is not None:
            require_module(self.requires)


_TAUS = ("tau_e", "tau_i")
_SCRIPT = _TAUS + ("drive", "seed", "gain", "allow_unstable")
# the simulator scripts take a drive and a gain, and refuse an unstable circuit
REGISTRY = (
    ExportFormat("graphml", False, graph_files.render_graphml,
                 "neuron-level graph, GraphML (networkx)", suffix=".graphml"),
    ExportFormat("json", False, graph_files.render_json,
                 "neuron-level graph, node-link JSON (networkx)", suffix=".json"),
    ExportFormat("csv", False, edges_csv.render_csv,
                 "edge list, one row per synapse", suffix=".csv",
                 options=("raw_csv",)),
    ExportFormat("populations", False, edges_csv.render_populations,
                 "population-level table: connection probability and mean "
                 "weight per pair of populations, CSV", suffix=".csv"),
    ExportFormat("neuroml", False, neuroml2.render_neuroml,
                 "NeuroML2 spiking network with its drive (libNeuroML; the "
                 "sim extra), schema-validated",
                 requires="neuroml", suffix=".net.nml", options=_SCRIPT),
    ExportFormat("pynn", True, pynn_script.render_pynn,
                 "folder: PyNN script (spiking) and its data", options=_SCRIPT),
    ExportFormat("nest", True, rate_scripts.render_nest,
                 "folder: NEST script (rate model) and its data",
                 options=_SCRIPT),
    ExportFormat("brian2", True, rate_scripts.render_brian2,
                 "folder: Brian2 script (rate model) and its data",
                 options=_SCRIPT),
)
"""Every export format, in the order they are listed."""

_BY_NAME = {f.name: f for f in REGISTRY}
FILE_SUFFIXES = frozenset({".py", ".npz", ".npy", ".html", ".svg"}
                          | {f.suffix for f in REGISTRY if not f.folder}
                          | {"." + f.suffix.rsplit(".", 1)[-1]
                             for f in REGISTRY if not f.folder})
"""Endings of file names that no folder export is given (a script's, its
data's, a report's, and every file format's, ".nml" of ".net.nml" too)."""
FORMATS = tuple(_BY_NAME)
FILE_FORMATS = tuple(f.name for f in REGISTRY if not f.folder)
FOLDER_FORMATS = tuple(f.name for f in REGISTRY if f.folder)


def get_format(name):
    """The :class:`ExportFormat` called ``name``, or InputError."""
    return entry(_BY_NAME, name, "export format")


def render(name, circuit, **options):
    """Render ``circuit`` in format ``name``: bytes, or {file name: data}
    for a folder format. Refuses a format whose optional module is missing.
    Every renderer writes the circuit's own ``unit_ids`` unless ``unit_ids``
    is given (:meth:`eidecomp.types.Circuit.named`)."""
    fmt = get_format(name)
    fmt.check_available()
    out = fmt.render(circuit, **options)
    if not fmt.folder:
        return out                  # stamped by its renderer
    return stamp_folder({n: file_bytes(v) for n, v in out.items()},
                        kind=folder_kind(fmt.name))


def folder_kind(name):
    """The kind an export folder's manifest names (eidecomp.io.provenance):
    ``--force`` replaces a folder export only with one of the same format."""
    return f"eidecomp {name} export"
