"""Every folder eidecomp writes, with one writer and one reader for each kind.

A bundle is a folder with one manifest (a JSON file) that names its format
and version and holds the SHA-256 of every other file in the folder; the
readers check the format, the version and every checksum before they use a
byte, so a changed, swapped or truncated file is refused with one line.

The five kinds are the :class:`BundleKind` constants below (:data:`KINDS`:
DECOMPOSITION, DASK_DECOMPOSITION, KERNEL_DECOMPOSITION, CIRCUIT, TILED),
each with its format name, version, manifest and the files it must hold;
the files a kind may also hold are listed by its writer.

Every array is stored [post, pre] (W[post, pre]: row = target, column =
source); circuit blocks are nonnegative magnitudes whose sign is that of the
presynaptic population (Dale's law). :func:`identify` tells what a folder is;
the command line asks it, and ``--force`` replaces only a folder of the same
kind (:func:`replaceable_by`).
"""

import dataclasses
import hashlib
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .._version import __version__
from ..errors import InputError
from ..params import DEFAULT_PERIOD, EIRatio, silent_pool
from ..types import (
    BLOCK_NAMES,
    EXCITATORY,
    II_BLOCK_NAMES,
    POPULATION_NAMES,
    TUNED,
    UNTUNED,
    Circuit,
    Decomposition,
    KernelDecomposition,
    adopting_arrays,
)
from . import staging
from .binary import npy_header, read_npy
from .jsondoc import load_json, require
from .matrices import file_checksum
from .provenance import stamp_doc, unedited_folder, verify_doc
from .staging import check_output, file_bytes, staged_folder
from .text import require_present

__all__ = [
    "CIRCUIT",
    "CIRCUIT_FORMAT",
    "CIRCUIT_VERSION",
    "DECOMPOSITION",
    "DASK_DECOMPOSITION",
    "KERNEL_DECOMPOSITION",
    "KINDS",
    "TILED",
    "BundleKind",
    "CircuitBundle",
    "check_bundle_output",
    "circuit_doc",
    "circuit_files",
    "expect_kind",
    "dask_decomposition_doc",
    "identify",
    "json_number",
    "read_bundle",
    "read_circuit",
    "read_circuit_bundle",
    "read_decomposition",
    "read_dask_decomposition",
    "read_kernel_decomposition",
    "read_tiled",
    "replaceable_by",
    "staged_bundle",
    "tiled_doc",
    "write_bundle",
    "write_circuit",
    "write_decomposition",
    "write_kernel_decomposition",
    "write_tiled",
]


@dataclass(frozen=True)
class BundleKind:
    """One kind of folder: its format name and version, its manifest, the
    files it must hold, and the words used for it in messages."""

    name: str
    format: str
    version: int
    manifest: str
    required: tuple
    what: str
    convention: str


_POST_PRE = "W[post, pre]: row = target, column = source"
DECOMPOSITION = BundleKind(
    "decomposition", "eidecomp-decomposition", 4, "summary.json",
    ("low_rank.npy", "sparse.npy"), "decomposition folder", _POST_PRE)
DASK_DECOMPOSITION = BundleKind(
    "dask decomposition", "eidecomp-dask-decomposition", 3, "summary.json",
    ("low_rank_U.npy", "low_rank_s.npy", "low_rank_Vt.npy", "sparse.npy"),
    "decomposition folder (dask engine)",
    _POST_PRE + "; L = (U * s) @ Vt from the three low_rank_*.npy factors")
KERNEL_DECOMPOSITION = BundleKind(
    "kernel decomposition", "eidecomp-kernel-decomposition", 3, "summary.json",
    ("low_rank_kernel.npy", "sparse_kernel.npy", "ranks.npy"),
    "kernel decomposition folder",
    "full-grid kernels K[post_feature, pre_feature, offset mod grid] (F, F, H, "
    "W); the tiled matrix is W[post, pre]; ranks.npy is the rank of L at each "
    "spatial frequency")
CIRCUIT = BundleKind(
    "circuit", "eidecomp-circuit", 3, "circuit.json",
    tuple(f"{b}.npy" for b in BLOCK_NAMES), "circuit bundle",
    "blocks are nonnegative magnitudes, [post, pre]; the sign is the "
    "presynaptic population's")
TILED_LAYOUT = "full-grid kernels (P, Q, H, W), [post, pre, offset mod grid]"
"""How a tiled bundle's kernels are laid out (its convention and tiled.json)."""
HYPOTHESIS = "a model circuit consistent with W, not a measurement"
"""What every circuit bundle says it is (circuit.json and tiled.json)."""
TILED = BundleKind(
    "tiled circuit", "eidecomp-tiled-circuit", 3, "tiled.json",
    tuple(f"{b}_kernel.npy" for b in BLOCK_NAMES), "tiled circuit bundle",
    f"{TILED_LAYOUT}; nonnegative magnitudes, the sign the presynaptic "
    "population's")
KINDS = (DECOMPOSITION, DASK_DECOMPOSITION, KERNEL_DECOMPOSITION, CIRCUIT, TILED)
_BY_FORMAT = {k.format: k for k in KINDS}
CIRCUIT_FORMAT, CIRCUIT_VERSION = CIRCUIT.format, CIRCUIT.version


# --- what a folder is -------------------------------------------------------------

def identify(folder):
    """The BundleKind of an eidecomp folder, or None for any other path.

    Reads only the manifest's ``format`` field (bounded in size and depth);
    checksums are checked by the readers, not here.
    """
    folder = Path(folder)
    if not folder.is_dir():
        return None
    for manifest in dict.fromkeys(k.manifest for k in KINDS):
        path = folder / manifest
        if not path.is_file():
            continue
        try:
            doc = load_json(path, what=manifest)
        except InputError:
            return None
        kind = _BY_FORMAT.get(doc.get("format")) if isinstance(doc, dict) else None
        if kind is not None and kind.manifest == manifest:
            return kind
    return None


def replaceable_by(*kinds):
    """The ``replaceable`` rule of :func:`eidecomp.io.staging.check_output`
    for an output of one of ``kinds``: an eidecomp folder of the same kind
    that nobody has changed (its manifest's stamp and every file's SHA-256
    as written, nothing added: :func:`eidecomp.io.provenance.unedited_folder`);
    anything else is a reason string."""
    def rule(path):
        path = Path(path)
        found = identify(path)
        wanted = " or ".join(k.what for k in kinds)
        if found is not None and found not in kinds:
            return f"holds an eidecomp {found.what}, not a {wanted}"
        reason = unedited_folder(path, kinds[0].manifest if found is None
                                 else found.manifest)
        if reason is None and found is None:
            reason = f"is not an eidecomp {wanted}"
        return reason
    return rule


def check_bundle_output(out, kind, *, force=False, inputs=()):
    """Refuse, before any work, an output folder that may not be written."""
    return check_output(out, force=force, folder=True,
                        replaceable=replaceable_by(kind), inputs=inputs)


# --- writing ----------------------------------------------------------------------

class _BundleWriter:
    """The files of a bundle being written into its temporary folder."""

    def __init__(self, tmp):
        self.folder = Path(tmp)
        self.sums = {}

    def add(self, name, value):
        """Write one file (staging.file_bytes: ndarray as .npy, str as UTF-8)."""
        data = file_bytes(value)
        staging._write_bytes(self.folder / name, data)  # the one flushed write
        self.sums[name] = hashlib.sha256(data).hexdigest()

    def placed(self, name):
        """Record a file that a solver wrote into the folder itself."""
        self.sums[name] = file_checksum(self.folder / name)

    def seal(self, kind, doc):
        missing = [f for f in kind.required if f not in self.sums]
        if missing:  # a writer's bug, never the user's
            raise RuntimeError(f"{kind.what} written without {missing}")
        try:
            _finite_numbers(doc, kind.manifest)
        except InputError as exc:  # a writer's bug too: readers refuse it
            raise RuntimeError(str(exc)) from None
        manifest = stamp_doc({**doc, "format": kind.format,
                              "format_version": kind.version,
                              "eidecomp_version": __version__,
                              "convention": kind.convention,
                              "sha256": dict(sorted(self.sums.items()))})
        staging._write_bytes(self.folder / kind.manifest, file_bytes(manifest))
        return manifest


@contextmanager
def staged_bundle(out, kind, *, force=False, inputs=()):
    """Write a bundle of ``kind`` into a temporary folder renamed to ``out``.

    Yields a writer with ``add(name, value)``, ``placed(name)`` (a file put
    into ``writer.folder`` by someone else) and ``folder``; set
    ``writer.doc`` to the manifest's contents. On leaving, the manifest is
    written with the format, version and the SHA-256 of every file.
    """
    with staged_folder(out, force=force, replaceable=replaceable_by(kind),
                       inputs=inputs) as tmp:
        pending = _BundleWriter(tmp)
        pending.doc = {}
        yield pending
        pending.manifest = pending.seal(kind, pending.doc)


def write_bundle(out, kind, files, doc, *, force=False, inputs=()):
    """Write ``files`` (name -> ndarray | str | bytes) and the manifest
    ``doc`` as a bundle of ``kind``; returns the manifest as written."""
    with staged_bundle(out, kind, force=force, inputs=inputs) as b:
        for name, value in files.items():
            b.add(name, value)
        b.doc = doc
    return b.manifest


def circuit_files(circuit):
    """The block files of a circuit bundle (name -> array): the five every
    circuit has, and the inhibitory-to-inhibitory ones of a circuit that has
    any (one of W's own neurons)."""
    names = BLOCK_NAMES + (II_BLOCK_NAMES if circuit.J_II.any() else ())
    return {f"{b}.npy": np.asarray(getattr(circuit, b)) for b in names}


# --- reading ----------------------------------------------------------------------

def _manifest(folder, kind):
    """The parsed manifest of ``folder``, refused unless it is ``kind``'s."""
    require_present(folder)
    if not folder.is_dir():
        raise InputError(f"{folder}: not a folder (expected a {kind.what})")
    path = folder / kind.manifest
    if not path.is_file():
        found = identify(folder)
        raise InputError(f"{folder}: " + (f"a {found.what}, not a {kind.what}"
                                          + _instead(folder, found, kind)
                                          if found else f"no {kind.manifest}; "
                                          f"not a {kind.what}"))
    doc = load_json(path, what=kind.manifest)
    found = _BY_FORMAT.get(doc.get("format")) if isinstance(doc, dict) else None
    if found is not kind:
        raise InputError(f"{path}: " + (f"a {found.what}, not a {kind.what}"
                                        if found else f"not an eidecomp {kind.what}"))
    _check_version(doc, path, kind)
    doc = verify_doc(doc, path)
    _finite_numbers(doc, path)
    return doc


def _instead(folder, found, kind):
    """What to run instead when a tiled circuit bundle is given where a
    circuit bundle is read: the exact command that writes it expanded (its
    kernel, grid and parameters, from tiled.json), or "" for other kinds."""
    if found is not TILED or kind is not CIRCUIT:
        return ""
    import shlex

    try:
        doc = load_json(Path(folder) / TILED.manifest, what=TILED.manifest)
        source, p = doc["input"], doc["parameters"]
        words = ["eidecomp", "assemble", "--kernel",
                 str(source.get("abspath", source["path"])),
                 *(["--key", str(source["key"])] if source.get("key") else []),
                 "--grid", "x".join(str(int(g)) for g in source["grid"]),
                 "--ei-ratio", str(p["ei_ratio"]),
                 *(["--untuned-share", repr(float(p["untuned_share"]))]
                   if p.get("untuned_share", "auto") != "auto" else []),
                 "--alpha", repr(p["alpha"]), "--lam", repr(p["lam"]),
                 "--seed", str(int(p["seed"])), "--expand", "-o",
                 str(Path(folder).resolve().with_name(
                     f"{Path(folder).resolve().name}-expanded"))]
    except (InputError, KeyError, TypeError, ValueError):
        return ("; assemble its kernel again with --expand for an explicit "
                "circuit bundle")
    return (f"; its kernels expand to an explicit circuit bundle that every "
            f"command reads: run `{shlex.join(words)}`")


def _check_version(doc, path, kind):
    version = doc.get("format_version")
    if not isinstance(version, int) or isinstance(version, bool) or version < 1:
        raise InputError(f"{path}: format version {version!r} is not a version "
                         "eidecomp writes")
    if version > kind.version:
        raise InputError(f"{path}: format version {version} is newer than this "
                         f"eidecomp reads ({kind.version}); upgrade")
    if version < kind.version:
        raise InputError(f"{path}: format version {version} was written by an "
                         "older eidecomp, whose manifests carry no provenance "
                         "stamp; write it again with this one")


def _check_sums(folder, doc, path, kind):
    sums = require(doc, "sha256", dict, path)
    for name in kind.required:
        if name not in sums:
            raise InputError(f"{path}: no checksum for {name}")
    for name, digest in sums.items():
        if Path(name).name != name or name in (kind.manifest, "", ".", ".."):
            raise InputError(f"{path}: 'sha256' lists {name!r}, not a file of "
                             "the bundle")
        p = folder / name
        if not p.is_file():
            raise InputError(f"{p}: missing from the {kind.what}")
        if name.endswith(".npy"):  # the input files' header checks, first
            npy_header(p, what=name)
        if digest != file_checksum(p):
            raise InputError(f"{p}: checksum does not match {kind.manifest} "
                             "(the file was changed, swapped or truncated)")


def expect_kind(folder, kind):
    """Refuse, from its manifest alone, a folder that is not of ``kind``
    (the full check, checksums included, is :func:`read_bundle`'s)."""
    _manifest(Path(folder), kind)


def read_bundle(folder, kind):
    """The checked manifest of a bundle of ``kind``: format, version and the
    SHA-256 of every file it lists (all of ``kind.required`` among them)."""
    folder = Path(folder)
    doc = _manifest(folder, kind)
    path = folder / kind.manifest
    _check_sums(folder, doc, path, kind)
    return doc


def _array(folder, doc, name, ndim=None):
    """A listed (so checked) array of a bundle, or None when not listed."""
    if name not in doc["sha256"]:
        return None
    arr = read_npy(Path(folder) / name, what=name, ndim=ndim)
    if not np.isfinite(arr).all():
        raise InputError(f"{Path(folder) / name}: holds NaN or Inf")
    return arr


def _number(doc, key, where, kinds=float):
    value = require(doc, key, kinds, where)
    if isinstance(value, bool):
        raise InputError(f"{where}: key {key!r} must be a number (got bool)")
    return value


def _observed(folder, doc, where, shape):
    """observed.npy (True where W was observed), checked against the
    manifest's count of unobserved entries; None when every one was."""
    block = require(doc, "unobserved", dict, where)
    n = int(_number(block, "n_unobserved", where, int))
    require(block, "path", (str, type(None)), where)
    ignored = require(block, "ignore_diagonal", bool, where)
    obs = _array(folder, doc, "observed.npy", ndim=2)
    if obs is None:
        if n:
            raise InputError(f"{where}: n_unobserved is {n} but observed.npy "
                             "is not listed")
        return None
    if obs.shape != tuple(shape) or not np.isin(obs, (0, 1)).all():
        raise InputError(f"{Path(folder) / 'observed.npy'}: expected 0/1 "
                         f"(True/False) of shape {tuple(shape)}")
    obs = obs.astype(bool)
    if int((~obs).sum()) != n or n == 0:
        raise InputError(f"{where}: n_unobserved is {n} but observed.npy "
                         f"leaves out {int((~obs).sum())} entries")
    if ignored and (shape[0] != shape[1] or np.diagonal(obs).any()):
        raise InputError(f"{where}: ignore_diagonal is true but observed.npy "
                         "does not leave the diagonal out")
    return obs


def read_decomposition(folder):
    """(Decomposition, summary) from a decomposition folder."""
    doc = read_bundle(folder, DECOMPOSITION)
    where = Path(folder) / DECOMPOSITION.manifest
    L = _array(folder, doc, "low_rank.npy", ndim=2)
    S = _array(folder, doc, "sparse.npy", ndim=2)
    if L.shape != S.shape:
        raise InputError(f"{folder}: low_rank.npy is {L.shape} and sparse.npy "
                         f"{S.shape}; they must agree")
    _check_split_doc(doc, where, L.shape)
    observed = _observed(folder, doc, where, L.shape)
    dec = Decomposition(low_rank=L, sparse=S, observed=observed,
                        rank=int(_number(doc, "rank", where, int)),
                        lam=float(_number(doc, "lam", where)),
                        objective=float(_number(doc, "objective", where)),
                        n_iter=int(_number(doc, "n_iter", where, int)),
                        converged=bool(require(doc, "converged", bool, where)),
                        verdict=read_verdict(doc, where),
                        report=_read_report(doc, where),
                        **_split_values(doc, where))
    return dec, doc


def _check_split_doc(doc, where, shape):
    """summary.json's input shape and rank as the arrays allow: the shape
    of L and S, a rank between 0 and the smaller side."""
    given = require(require(doc, "input", dict, where), "shape", list,
                    f"{where}: input")
    if given != list(shape):
        raise InputError(f"{where}: input: 'shape' is {given!r} but the "
                         f"arrays are {shape[0]} x {shape[1]}")
    rank = _number(doc, "rank", where, int)
    if not 0 <= rank <= min(shape):
        raise InputError(f"{where}: 'rank' is {rank}, outside 0 to "
                         f"{min(shape)} for a {shape[0]} x {shape[1]} matrix")


def read_dask_decomposition(folder):
    """((U, s, Vt), S, summary) from a dask-engine decomposition folder;
    S is memory-mapped (read only)."""
    doc = read_bundle(folder, DASK_DECOMPOSITION)
    U = _array(folder, doc, "low_rank_U.npy", ndim=2)
    s = _array(folder, doc, "low_rank_s.npy", ndim=1)
    Vt = _array(folder, doc, "low_rank_Vt.npy", ndim=2)
    S = np.load(Path(folder) / "sparse.npy", mmap_mode="r", allow_pickle=False)
    if U.shape[1] != s.size or Vt.shape[0] != s.size or \
            (U.shape[0], Vt.shape[1]) != S.shape:
        raise InputError(f"{folder}: the factors' shapes do not fit sparse.npy")
    return (U, s, Vt), S, doc


def read_kernel_decomposition(folder):
    """(KernelDecomposition, summary) from a kernel decomposition folder."""
    doc = read_bundle(folder, KERNEL_DECOMPOSITION)
    where = Path(folder) / KERNEL_DECOMPOSITION.manifest
    L = _array(folder, doc, "low_rank_kernel.npy", ndim=4)
    S = _array(folder, doc, "sparse_kernel.npy", ndim=4)
    ranks = _array(folder, doc, "ranks.npy", ndim=2)
    inp = require(doc, "input", dict, where)
    grid = tuple(require(inp, "grid", list, where))
    if L.shape != S.shape or grid != L.shape[2:] or ranks.shape != grid:
        raise InputError(f"{folder}: the kernels, ranks and grid do not agree")
    dec = KernelDecomposition(low_rank=L, sparse=S, ranks=ranks.astype(int),
                              lam=float(_number(doc, "lam", where)),
                              objective=float(_number(doc, "objective", where)),
                              n_iter=int(_number(doc, "n_iter", where, int)),
                              converged=bool(require(doc, "converged", bool,
                                                     where)),
                              grid=grid)
    return dec, doc


def read_tiled(folder):
    """(blocks, grid, manifest) of a tiled circuit bundle: the five block
    kernels by name (eidecomp.assemble.TiledCircuit takes them), the grid."""
    doc = read_bundle(folder, TILED)
    where = Path(folder) / TILED.manifest
    grid = require(require(doc, "input", dict, where), "grid", list, where)
    blocks = {b: _array(folder, doc, f"{b}_kernel.npy", ndim=4)
              for b in BLOCK_NAMES}
    if any(a.shape[2:] != tuple(grid) for a in blocks.values()):
        raise InputError(f"{folder}: the kernels do not match the grid {grid}")
    return blocks, tuple(grid), doc


# what the report and the command line read of circuit.json, by section
_CIRCUIT_SCHEMA = {"parameters": dict, "counts": dict, "metrics": dict,
                   "baselines": list, "stability": dict, "interneurons": list,
                   "input": dict, "decomposition": dict}
_BASELINE_KEYS = {"name": str, "n_inhibitory": int,
                  "relative_error": float, "ee_density": float}


_NUMBER_OR_NULL = (float, type(None))  # float: any JSON number (jsondoc)
_OPTIONAL_NUMBERS = {  # section -> keys the report formats as numbers
    "stability": ("original_spectral_abscissa",
                  "circuit_spectral_abscissa_equal_taus", "max_stable_tau_ratio"),
    "parameters": ("period", "alpha", "lam", "rank"),
    "decomposition": ("lam", "rank", "n_iter"),
}


def _check_optional_numbers(doc, where):
    """The numbers a report shows: absent, null or a number, nothing else."""
    for section, keys in _OPTIONAL_NUMBERS.items():
        for key in keys:
            if key in doc[section]:
                require(doc[section], key, _NUMBER_OR_NULL, f"{where}: {section}")
    period = doc["parameters"].get("period")
    if period is not None and not (np.isfinite(period) and period > 0):
        raise InputError(f"{where}: parameters: 'period' must be a positive "
                         f"number of degrees, got {period!r}")


def _check_counts(doc, where, circuit):
    """counts, the input's shape and the asked ratio as the blocks have them:
    a manifest may not contradict its arrays."""
    for kind, size in circuit.sizes.items():
        if doc["counts"][kind] != size:
            raise InputError(f"{where}: counts: {kind!r} is "
                             f"{doc['counts'][kind]} but the blocks hold {size}")
    n_w = circuit.n_w_units
    shape = doc["input"].get("shape")     # None: a circuit made in Python
    if shape is not None and shape != [n_w, n_w]:
        raise InputError(f"{where}: input: 'shape' is {shape!r} but the "
                         f"blocks are of a {n_w} x {n_w} W")
    params = doc["parameters"]
    n_i = circuit.n_inhibitory
    if params.get("own_neurons") is not None:
        own = require(params, "own_neurons", bool, f"{where}: parameters")
        if own != circuit.own_neurons:
            raise InputError(f"{where}: parameters: 'own_neurons' is "
                             f"{str(own).lower()} but the blocks are "
                             + ("" if circuit.own_neurons else "not ")
                             + "a circuit of W's own neurons")
    if circuit.own_neurons:       # W's own inhibitory neurons: no ratio asked
        return
    if "n_inhibitory" in params and params["n_inhibitory"] != n_i:
        raise InputError(f"{where}: parameters: 'n_inhibitory' is "
                         f"{params['n_inhibitory']!r} but the blocks hold "
                         f"{n_i} interneurons")
    if "ei_ratio" in params and "per_site" in doc:   # an expanded tiled circuit:
        per_site = require(doc, "per_site", dict, where)   # the ratio per site
        sites = circuit.n_excitatory // max(int(per_site.get(EXCITATORY, 1)), 1)
        expected = sites * (int(per_site.get(UNTUNED, 0))
                            + int(per_site.get(TUNED, 0)))
        if expected != n_i:
            raise InputError(f"{where}: per_site gives {expected} interneurons, "
                             f"but the blocks hold {n_i}")
    elif "ei_ratio" in params:
        ratio = EIRatio.parse(require(params, "ei_ratio", str,
                                      f"{where}: parameters"))
        if ratio.interneurons(circuit.n_excitatory) != n_i:
            raise InputError(f"{where}: parameters: 'ei_ratio' {ratio.text} "
                             f"gives {ratio.interneurons(circuit.n_excitatory)}"
                             f" interneurons, but the blocks hold {n_i}")


def _finite_numbers(doc, where):
    """Every number of a manifest finite (NaN, Infinity and 1e999, which
    JSON readers take as infinity, refused) and every integer within 2**53
    (a float64 holds it exactly; 10**400 would overflow later); iterative."""
    stack = [(doc, "")]
    while stack:
        node, place = stack.pop()
        if isinstance(node, float) and not np.isfinite(node):
            raise InputError(f"{where}: {place or 'a value'} is {node!r}, not "
                             "a finite number")
        if (isinstance(node, int) and not isinstance(node, bool)
                and abs(node) > 2**53):
            raise InputError(f"{where}: {place or 'a value'} is an integer of "
                             f"{len(str(abs(node)))} digits, beyond 2**53 (no "
                             "count or size eidecomp writes is)")
        if isinstance(node, dict):
            stack.extend((v, f"{place}.{k}" if place else str(k))
                         for k, v in node.items())
        elif isinstance(node, list):
            stack.extend((v, f"{place}[{i}]") for i, v in enumerate(node))


def _check_circuit_doc(doc, where, n_e):
    for key, kinds in _CIRCUIT_SCHEMA.items():
        require(doc, key, kinds, where)
    for key in POPULATION_NAMES:
        require(doc["counts"], key, int, f"{where}: counts")
    for key, kinds in (("relative_error", float),
                       ("ee_density", float), ("share_rule", str),
                       ("converged", bool)):
        require(doc["metrics"], key, kinds, f"{where}: metrics")
    for k, b in enumerate(doc["baselines"]):
        if not isinstance(b, dict):
            raise InputError(f"{where}: baselines[{k}] must be an object")
        for key, kinds in _BASELINE_KEYS.items():
            require(b, key, kinds, f"{where}: baselines[{k}]")
    _check_optional_numbers(doc, where)
    ids = doc.get("unit_ids")
    if ids is not None and not (isinstance(ids, list) and len(ids) == n_e
                                and all(isinstance(u, str) for u in ids)):
        raise InputError(f"{where}: 'unit_ids' must be a list of {n_e} names "
                         "(one per excitatory unit) or null")
    if ids is not None and len(set(ids)) != len(ids):
        seen = set()
        twice = next(u for u in ids if u in seen or seen.add(u))
        raise InputError(f"{where}: 'unit_ids' names {twice!r} twice")


@dataclass(frozen=True)
class CircuitBundle:
    """A circuit bundle as read: the circuit, its manifest, and the optional
    arrays stored beside it (None when absent)."""

    path: Path
    circuit: Circuit
    doc: dict = field(repr=False)
    low_rank: np.ndarray | None = field(default=None, repr=False)
    sparse: np.ndarray | None = field(default=None, repr=False)
    features: np.ndarray | None = field(default=None, repr=False)
    positions: np.ndarray | None = field(default=None, repr=False)

    @property
    def unit_ids(self):
        return self.doc.get("unit_ids")

    @property
    def period(self):
        """The features' period in degrees (the unit table's, as stored)."""
        return float(self.doc["parameters"].get("period") or DEFAULT_PERIOD)

    def original_weights(self):
        """W = L + S, the matrix the circuit was built from; the circuit's
        reconstruction of it (W_eff, or the full matrix of a circuit of W's
        own neurons) when the bundle does not hold its split."""
        if self.low_rank is not None and self.sparse is not None:
            return self.low_rank + self.sparse
        return self.circuit.reconstruction()


def _w_index(doc, where):
    """circuit.json's w_index (the W unit of each unit of a circuit of W's
    own neurons): a list of nonnegative ints, or absent or null."""
    index = doc.get("w_index")
    if index is None:
        return None
    if not (isinstance(index, list) and all(
            isinstance(i, int) and not isinstance(i, bool) and i >= 0
            for i in index)):
        raise InputError(f"{where}: 'w_index' must be a list of nonnegative "
                         "integers (the W unit of each unit) or null")
    return tuple(index)


def read_circuit_bundle(folder):
    """A :class:`CircuitBundle`, every file checked against circuit.json."""
    folder = Path(folder)
    doc = read_bundle(folder, CIRCUIT)
    where = folder / CIRCUIT.manifest
    params = require(doc, "parameters", dict, where)
    blocks = {b: _array(folder, doc, f"{b}.npy", ndim=2)
              for b in BLOCK_NAMES + II_BLOCK_NAMES}
    try:
        circuit = Circuit(**blocks, params=params,
                          w_index=_w_index(doc, where))
    except ValueError as exc:
        raise InputError(f"{folder}: {exc}") from None
    _check_circuit_doc(doc, where, circuit.n_excitatory)
    _check_counts(doc, where, circuit)
    if doc.get("unit_ids") is not None:   # checked above: one per E unit
        with adopting_arrays():              # the blocks just read, now named
            circuit = dataclasses.replace(circuit, unit_ids=doc["unit_ids"])
    n, n_w = circuit.n_excitatory, circuit.n_w_units
    extra = {name: _array(folder, doc, f"{name}.npy")
             for name in ("low_rank", "sparse", "features", "positions")}
    expected = {"low_rank": (n_w, n_w), "sparse": (n_w, n_w), "features": (n,),
                "positions": (n, 2)}
    for name, arr in extra.items():
        if arr is not None and arr.shape != expected[name]:
            raise InputError(f"{folder / (name + '.npy')}: shape {arr.shape}, "
                             f"expected {expected[name]} for {n} units")
    return CircuitBundle(path=folder, circuit=circuit, doc=doc, **extra)


def read_circuit(folder):
    """(Circuit, circuit.json) of a circuit bundle: the short form of
    :func:`read_circuit_bundle`."""
    b = read_circuit_bundle(folder)
    return b.circuit, b.doc


# --- the manifests of each kind -----------------------------------------------------

def json_number(value):
    """JSON-safe: a non-finite float becomes None (null)."""
    if isinstance(value, float) and not np.isfinite(value):
        return None
    return value


def split_fields(dec):
    """What summary.json and circuit.json record of a split beyond its
    numbers: the certified gap, the reported support and rank band, and the
    verdict (one form, read back by :func:`read_verdict`)."""
    report, verdict = dec.report, dec.verdict
    return {"duality_gap": json_number(None if report is None
                                       else report.duality_gap),
            "rank_band": dec.rank_band,
            "support_density": json_number(dec.support_density),
            "verdict": None if verdict is None else
            {k: json_number(v) for k, v in verdict.as_dict().items()}}


_VERDICT_KEYS = (("fits", bool), ("rank", int), ("rank_share", float),
                 ("support_density", float), ("rank_band", (int, type(None))),
                 ("lam", float), ("reasons", list),
                 ("suggested_lam", (float, type(None))),
                 ("path_checked", bool), ("n_small", int),
                 ("converged", bool), ("line", str))


def read_verdict(doc, where):
    """The SplitVerdict recorded by :func:`split_fields`, or None (a summary
    written before verdicts were), each key checked for its JSON type."""
    from ..types import SplitVerdict

    if doc.get("verdict") is None:
        return None
    v = require(doc, "verdict", dict, where)
    at = f"{where}: 'verdict'"
    unknown = sorted(set(v) - {k for k, _ in _VERDICT_KEYS})
    if unknown:
        raise InputError(f"{at} has unknown key {unknown[0]!r}")
    values = {k: require(v, k, kinds, at) for k, kinds in _VERDICT_KEYS}
    if not all(isinstance(r, str) for r in values["reasons"]):
        raise InputError(f"{at}: 'reasons' must be a list of strings")
    if values["fits"] != (not values["reasons"]):
        raise InputError(f"{at}: 'fits' disagrees with its 'reasons'")
    values["reasons"] = tuple(values["reasons"])
    return SplitVerdict(**values)


def _read_report(doc, where):
    """The OptimalityReport of summary.json's "optimality", or None."""
    from ..types import OptimalityReport

    opt = doc.get("optimality")
    if opt is None:
        return None
    opt = require(doc, "optimality", dict, where)
    fields = OptimalityReport.__dataclass_fields__
    unknown = sorted(set(opt) - set(fields))
    if unknown:
        raise InputError(f"{where}: 'optimality' has unknown key {unknown[0]!r}")
    try:
        return OptimalityReport(**opt)
    except TypeError:
        missing = sorted(set(fields) - set(opt))
        raise InputError(f"{where}: 'optimality' lacks {missing[0]!r}") from None


def _split_values(doc, where):
    """rank_band and support_density of a decomposition's summary.json
    (absent in one written before them: 0 and None)."""
    band = 0
    if "rank_band" in doc:
        band = require(doc, "rank_band", (int, type(None)), where)
    support = doc.get("support_density")
    if support is not None:
        support = float(_number(doc, "support_density", where))
    return {"rank_band": band, "support_density": support}


def write_decomposition(out, dec, *, source, parameters, unobserved=None,
                        force=False, inputs=()):
    """A decomposition folder: low_rank.npy, sparse.npy and summary.json.

    ``source`` describes the input (path, sha256, key, transpose);
    ``unobserved`` the entries left out (path, ignore_diagonal), whose
    pattern is kept in observed.npy (True where observed) when there are
    any; ``parameters`` the options as given (None: the default).
    """
    from ..params import default_lam

    n_unobserved = 0 if dec.observed is None else int((~dec.observed).sum())
    doc = {"input": {**source, "shape": list(dec.shape)},
           "unobserved": {**(unobserved or {}), "n_unobserved": n_unobserved},
           "parameters": parameters, "lam": dec.lam,
           "lam_default": default_lam(dec.shape), "rank": dec.rank,
           "sparsity": dec.sparsity, "objective": dec.objective,
           "n_iter": dec.n_iter, "converged": dec.converged,
           "optimality": {k: json_number(v)
                          for k, v in dec.report.as_dict().items()},
           **split_fields(dec)}
    arrays = {"low_rank.npy": np.asarray(dec.low_rank),
              "sparse.npy": np.asarray(dec.sparse)}
    if dec.observed is not None:
        arrays["observed.npy"] = np.asarray(dec.observed, dtype=bool)
    return write_bundle(out, DECOMPOSITION, arrays, doc, force=force,
                        inputs=inputs)


def dask_decomposition_doc(dec, *, source, engine, parameters):
    """summary.json of a dask-engine folder (its files are placed by the
    solver: see :func:`staged_bundle`)."""
    return {"input": {**source, "shape": list(dec.sparse.shape)},
            "engine": engine, "parameters": parameters, "lam": dec.lam,
            "rank": dec.rank, "n_iter": dec.n_iter, "converged": dec.converged}


def write_kernel_decomposition(out, dec, *, source, parameters, force=False,
                               inputs=()):
    """A kernel decomposition folder (periodic boundary: kernels only)."""
    from ..params import default_lam

    doc = {"input": source, "n_units": dec.n_units, "parameters": parameters,
           "lam": dec.lam, "lam_default": default_lam((dec.n_units,)),
           "rank": dec.rank, "objective": dec.objective, "n_iter": dec.n_iter,
           "converged": dec.converged}
    return write_bundle(out, KERNEL_DECOMPOSITION,
                        {"low_rank_kernel.npy": np.asarray(dec.low_rank),
                         "sparse_kernel.npy": np.asarray(dec.sparse),
                         "ranks.npy": np.asarray(dec.ranks)},
                        doc, force=force, inputs=inputs)


def circuit_doc(circuit, *, source, decomposition, stability, pools,
                parameters, unit_ids=None):
    """circuit.json of a circuit bundle, less the format fields and
    checksums that :func:`write_bundle` adds."""
    report = circuit.report
    metrics = {k: v for k, v in report.as_dict().items()
               if k not in ("history", "baselines")}
    metrics["silent_interneurons"] = sum(1 for p in pools if silent_pool(p))
    params = {k: json_number(v) if isinstance(v, float) else v
              for k, v in circuit.params.items()}
    return {"input": source,
            "parameters": {**params, **parameters},
            "decomposition": decomposition,
            "counts": {p.kind: p.size for p in circuit.populations},
            "populations": [{"name": p.name, "kind": p.kind, "size": p.size,
                             "sign": p.sign} for p in circuit.populations],
            "metrics": metrics,
            "baselines": report.as_dict()["baselines"],
            "stability": {k: json_number(v) for k, v in stability.items()},
            "interneurons": pools,
            "unit_ids": unit_ids,
            "w_index": (None if circuit.w_index is None
                        else list(circuit.w_index)),
            "hypothesis": HYPOTHESIS}


def write_circuit(out, circuit, doc, *, arrays=None, files=None, force=False,
                  inputs=()):
    """A circuit bundle: the blocks, optional ``arrays`` (low_rank, sparse,
    features, positions: name -> ndarray, stored as NAME.npy), other
    ``files`` (name -> str | bytes: report.html, the demo's inputs) and
    circuit.json (``doc``)."""
    data = circuit_files(circuit)
    data.update({f"{k}.npy": np.asarray(v) for k, v in (arrays or {}).items()
                 if v is not None})
    data.update(files or {})
    return write_bundle(out, CIRCUIT, data, doc, force=force, inputs=inputs)


def tiled_doc(tiled, dec, *, source, expanded_bytes, stability=None):
    """tiled.json (and circuit.json of an expanded tiled circuit): counts per
    site and in all, the error, the refinement's own convergence, and the
    memory the expansion takes; ``stability`` (an expanded circuit's, from
    eidecomp.dynamics.stability_summary) in place of "not computed"."""
    F, mu, mt = tiled.per_site
    h, w = tiled.grid
    per_site = dict(zip((EXCITATORY, UNTUNED, TUNED), tiled.per_site, strict=True))
    return {"input": {**source, "shape": [F * h * w] * 2},
            "parameters": {**tiled.params, "lam": dec.lam, "rank": dec.rank},
            "per_site": per_site,
            "counts": {kind: n * h * w for kind, n in per_site.items()},
            "metrics": {"relative_error": tiled.relative_error,
                        "ee_density": float(np.count_nonzero(tiled.J_EE)
                                            / tiled.J_EE.size),
                        "share_rule": f"per site: {mu} untuned, {mt} tuned",
                        "converged": bool(tiled.converged),
                        "ee_support": "any"},
            "baselines": [], "interneurons": [],
            "decomposition": {"lam": dec.lam, "rank": dec.rank,
                              "converged": dec.converged, "n_iter": dec.n_iter},
            "stability": ({k: json_number(v) for k, v in stability.items()}
                          if stability is not None else
                          {"original_spectral_abscissa": None,
                           "circuit_spectral_abscissa_equal_taus": None,
                           "max_stable_tau_ratio": None,
                           "note": "not computed for tiled circuits (kernels); "
                                   "computed once expanded (--expand)"}),
            "memory_estimate_expanded_bytes": expanded_bytes,
            "hypothesis": HYPOTHESIS}


def write_tiled(out, tiled, doc, *, force=False, inputs=()):
    """A tiled circuit bundle: the five block kernels and tiled.json."""
    return write_bundle(out, TILED,
                        {f"{b}_kernel.npy": np.asarray(getattr(tiled, b))
                         for b in BLOCK_NAMES},
                        {**doc, "layout": TILED_LAYOUT},
                        force=force, inputs=inputs)
