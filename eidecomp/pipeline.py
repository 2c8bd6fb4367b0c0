"""The jobs eidecomp runs, each from a config object: load, one library call,
write.

No argparse and no printing here: :mod:`eidecomp.cli` builds the config and
shows the result; a script can call these functions directly. The formats
of what they write live in :mod:`eidecomp.io.bundles`, the numerics in the
library (decompose, assemble, dynamics, analysis).
"""

import dataclasses
import importlib.util
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from . import datasets, dynamics
from .decompose import LOCAL_WORKERS, METHODS, SOLVERS
from .errors import InputError
from .io import (
    bundles,
    file_checksum,
    read_matrix,
    read_unit_table,
    read_unobserved,
    require_present,
)
from .io.bundles import (
    CIRCUIT,
    DASK_DECOMPOSITION,
    DECOMPOSITION,
    KERNEL_DECOMPOSITION,
    TILED,
    check_bundle_output,
)
from .io.units import POSITION_UNITS
from .params import (
    DEFAULT_EE_SUPPORT,
    DEFAULT_EI_RATIO,
    DEFAULT_PERIOD,
    TAU_E_MS,
    TAU_I_MS,
    EIRatio,
)
from .progress import announcer
from .types import adopting_arrays

__all__ = [
    "DECOMPOSE_ENGINES",
    "AssembleConfig",
    "MatrixOptions",
    "AssembleResult",
    "DecomposeConfig",
    "DecomposeResult",
    "run_assemble",
    "run_decompose",
    "run_demo",
    "run_export",
    "run_report",
    "REPORT_SVG_PREFIX",
    "report_figures_folder",
    "run_simulate",
]

EXAMPLE = "example"
REPORT_SVG_PREFIX = "report-"  # of a bundle's report figures (SVG files)
DECOMPOSE_ENGINES = ("memory", "dask")


# --- options that do not apply ---------------------------------------------------

_FLAGS = {"dtype": "--float32", "drive": "--input"}  # options not named as
                                                    # their fields


def _flag(name):
    return _FLAGS.get(name, "--" + name.replace("_", "-"))


def _refuse_set(given, allowed, what):
    """The one rule of options that do not apply: every option set away from
    its default (``given``: name -> whether it is) that is not in
    ``allowed`` is refused in one line, never ignored."""
    for name, is_set in given.items():
        if is_set and name not in allowed:
            raise InputError(f"{_flag(name)} does not apply to {what}")


def refuse_inapplicable(config, allowed, what):
    """:func:`_refuse_set` over a job's config (a dataclass whose defaults
    are the options' own)."""
    _refuse_set({f.name: getattr(config, f.name) != f.default
                 for f in dataclasses.fields(config)
                 if f.default is not dataclasses.MISSING}, allowed, what)


_MATRIX_OPTIONS = ("key", "transpose", "unobserved", "ignore_diagonal", "lam", "tol",
                   "stop", "gap_tol", "dtype", "target_rank", "method", "solver")


def _load_matrix(config, *, square, what="weight matrix"):
    """(W, source) from a matrix file or the built-in example."""
    if config.input == EXAMPLE and not Path(EXAMPLE).exists():
        refuse_inapplicable(config, set(f.name for f in dataclasses.fields(config))
                            - {"key", "transpose"}, "the built-in example")
        W, _ = datasets.example_lateral()
        return W, {"path": "built-in example (invented data)", "sha256": None,
                   "key": None, "transpose": False}
    W = read_matrix(config.input, key=config.key, transpose=config.transpose,
                    square=square, what=what)
    return W, {"path": str(config.input), "sha256": file_checksum(config.input),
               "key": config.key, "transpose": config.transpose}


def _load_observed(config, shape):
    """The observed entries of W (None: all) from --unobserved's file; a
    non-square matrix with --ignore-diagonal named with its file."""
    if config.ignore_diagonal and shape[0] != shape[1]:
        raise InputError(f"{config.input}: --ignore-diagonal needs a square "
                         f"matrix, got {shape[0]}x{shape[1]}")
    if config.unobserved is None:
        return None
    return read_unobserved(config.unobserved, shape, transpose=config.transpose,
                           ignore_diagonal=config.ignore_diagonal)


def _inputs(*paths):
    """The job's input paths (the built-in example left out), each checked
    to be there: a missing input is named before the output is looked at."""
    paths = tuple(p for p in paths if p is not None and p != EXAMPLE)
    require_present(*paths)
    return paths


# --- decompose -----------------------------------------------------------------

@dataclass(frozen=True, kw_only=True)
class MatrixOptions:
    """How a matrix is read and which entries count, shared by every job that
    decomposes one (None: the default of eidecomp.params)."""

    input: str | None
    output: str
    key: str | None = None
    transpose: bool = False
    unobserved: str | None = None
    ignore_diagonal: bool = False
    lam: float | None = None
    tol: float | None = None
    stop: str | None = None
    gap_tol: float | None = None
    seed: int = 0
    force: bool = False
    kernel: str | None = None
    grid: str | None = None
    dtype: str = "float64"
    target_rank: int | None = None
    method: str = METHODS[0]
    solver: str = SOLVERS[0]


@dataclass(frozen=True, kw_only=True)
class DecomposeConfig(MatrixOptions):
    """What ``eidecomp decompose`` does.

    ``input`` is a matrix file, or the string ``"example"`` for the built-in
    invented example matrix.
    """

    max_iter: int | None = None
    boundary: str = "periodic"
    engine: str = DECOMPOSE_ENGINES[0]
    scheduler: str | None = None


@dataclass(frozen=True)
class DecomposeResult:
    """What a decompose job wrote: the kind of folder, the result and its
    summary.json."""

    kind: bundles.BundleKind
    decomposition: object
    summary: dict
    output: Path


def _parameters(config, names):
    return {k: getattr(config, k) for k in names}


def _decompose_dense(config, out, progress):
    from .decompose import robust_pca

    inputs = _inputs(config.input, config.unobserved)
    check_bundle_output(out, DECOMPOSITION, force=config.force, inputs=inputs)
    W, source = _load_matrix(config, square=False)
    dec = robust_pca(W, lam=config.lam, method=config.method,
                     observed=_load_observed(config, W.shape),
                     ignore_diagonal=config.ignore_diagonal,
                     target_rank=config.target_rank, tol=config.tol,
                     max_iter=config.max_iter, solver=config.solver,
                     seed=config.seed, progress=progress, dtype=config.dtype,
                     **_stop_options(config))
    dec = _with_suggestion(W, dec, config, _stage_of(progress))
    summary = bundles.write_decomposition(
        out, dec, source=source,
        unobserved={"path": config.unobserved,
                    "ignore_diagonal": config.ignore_diagonal},
        parameters={**_parameters(config, ("lam", "target_rank", "method",
                                           "tol", "stop", "gap_tol", "max_iter",
                                           "seed", "dtype")),
                    # the cvxpy solver of the convex method; none for the ALM
                    "solver": config.solver if config.method == "convex" else None},
        force=config.force, inputs=inputs)
    return DecomposeResult(DECOMPOSITION, dec, summary, out)


def _stop_options(config):
    """robust_pca's stop and gap_tol from the config (None: the library's
    defaults, ``params.STOP_RULES[0]`` and ``params.GAP_TOL``)."""
    out = {} if config.stop is None else {"stop": config.stop}
    if config.gap_tol is not None:
        out["gap_tol"] = config.gap_tol
    return out


def _with_suggestion(W, dec, config, progress, points=None):
    """``dec`` with the lam path's suggestion in its verdict, when the
    verdict says W is not low-rank plus sparse at the lam chosen (the ALM
    only, and not when a target rank chose lam); ``points``, the report's
    path when there is one, saves solving another."""
    from .decompose import suggest_lam

    if (dec.verdict is None or dec.verdict.fits or dec.method != "ialm"
            or config.target_rank is not None):
        return dec
    verdict, _ = suggest_lam(W, dec, observed=dec.observed, seed=config.seed,
                             progress=progress, points=points)
    with adopting_arrays():
        return dataclasses.replace(dec, verdict=verdict)


def _stage_of(progress):
    """The stage callback beside a solver callback (``Progress.solver`` ->
    ``Progress.stage``), or None: the lam path announces stages."""
    return getattr(getattr(progress, "__self__", None), "stage", None)


def _decompose_dask(config, out, progress):
    """W read in blocks from a .npy file or a zarr array by the workers; L
    written as its factors and S moved to sparse.npy, inside the staged
    bundle (S and Y live there meanwhile)."""
    refuse_inapplicable(config, ("input", "output", "lam", "tol", "max_iter",
                                 "seed", "force", "dtype", "engine", "scheduler"),
                        "the dask engine (plain PCP with the ALM)")
    if importlib.util.find_spec("distributed") is None:
        raise InputError("the dask engine needs the dist extra: "
                         "pip install 'eidecomp[dist]'")
    if config.input is None or Path(config.input).suffix not in (".npy", ".zarr"):
        raise InputError(f"{config.input}: the dask engine reads a .npy file "
                         "or a .zarr array")
    from .decompose import robust_pca_dask

    inputs = _inputs(config.input)
    check_bundle_output(out, DASK_DECOMPOSITION, force=config.force, inputs=inputs)
    with bundles.staged_bundle(out, DASK_DECOMPOSITION, force=config.force,
                               inputs=inputs) as b:
        dec = robust_pca_dask(config.input, lam=config.lam, tol=config.tol,
                              max_iter=config.max_iter, dtype=config.dtype,
                              scheduler=config.scheduler, seed=config.seed,
                              progress=progress,
                              sparse_out=b.folder / "sparse.npy")
        for name, factor in zip(DASK_DECOMPOSITION.required[:3], dec.low_rank_factors,
                                strict=True):
            b.add(name, np.asarray(factor))
        b.placed("sparse.npy")
        b.doc = bundles.dask_decomposition_doc(
            dec, source={"path": str(config.input),
                         "sha256": file_checksum(config.input)},
            engine={"name": "dask", "scheduler": config.scheduler
                    or f"local cluster, {LOCAL_WORKERS} workers"},
            parameters=_parameters(config, ("lam", "tol", "max_iter", "dtype")))
        del dec  # release the memory map of sparse.npy before the rename
    return DecomposeResult(DASK_DECOMPOSITION, None, b.manifest, out)


def _load_kernel(config):
    from .io import read_kernel
    from .kernels import check_kernel, parse_grid

    if config.grid is None:
        raise InputError("--kernel needs --grid HxW")
    grid = parse_grid(config.grid)
    boundary = getattr(config, "boundary", "periodic")
    K = check_kernel(read_kernel(config.kernel, key=config.key), grid, boundary,
                     name=str(config.kernel))
    source = {"path": str(config.kernel), "abspath": os.path.abspath(config.kernel),
              "key": config.key, "sha256": file_checksum(config.kernel),
              "kernel_shape": list(K.shape), "grid": list(grid),
              "boundary": boundary}
    return K, grid, source


def _decompose_kernel(config, out, progress):
    from .decompose import robust_pca_kernel

    refuse_inapplicable(config, ("output", "kernel", "grid", "boundary", "key",
                                 "lam", "tol", "max_iter", "seed", "force"),
                        "a kernel (--kernel)")
    periodic = config.boundary == "periodic"
    kind = KERNEL_DECOMPOSITION if periodic else DECOMPOSITION
    inputs = _inputs(config.kernel)
    check_bundle_output(out, kind, force=config.force, inputs=inputs)
    K, grid, source = _load_kernel(config)
    dec = robust_pca_kernel(K, grid, lam=config.lam, boundary=config.boundary,
                            tol=config.tol, max_iter=config.max_iter,
                            progress=progress, seed=config.seed)
    parameters = _parameters(config, ("lam", "tol", "max_iter"))
    if periodic:
        summary = bundles.write_kernel_decomposition(
            out, dec, source=source, parameters=parameters, force=config.force,
            inputs=inputs)
    else:
        summary = bundles.write_decomposition(
            out, dec, source=source, parameters=parameters, force=config.force,
            inputs=inputs)
    return DecomposeResult(kind, dec, summary, out)


def run_decompose(config, *, progress=None):
    """Read W (or a kernel), run robust PCA, write a decomposition folder.

    Parameters
    ----------
    config : DecomposeConfig
    progress : callable or None
        Passed to the solver: ``progress(it, primal, dual, rank, mu)``.

    Returns
    -------
    DecomposeResult
    """
    out = Path(config.output)
    if config.engine not in DECOMPOSE_ENGINES:
        raise InputError(f"unknown engine {config.engine!r} (choose from "
                         f"{', '.join(DECOMPOSE_ENGINES)})")
    if (config.input is None) == (config.kernel is None):
        raise InputError("give either a matrix or --kernel")
    if config.kernel is not None:
        return _decompose_kernel(config, out, progress)
    if config.engine == "dask":
        return _decompose_dask(config, out, progress)
    refuse_inapplicable(config, set(f.name for f in dataclasses.fields(config))
                        - {"grid", "boundary", "scheduler"}, "a matrix")
    _check_split_options(config)
    return _decompose_dense(config, out, progress)


def _check_split_options(config):
    """The split's options that exclude each other, for every job that
    decomposes a matrix (decompose, assemble, run)."""
    if config.method != "convex":
        refuse_inapplicable(config, set(f.name for f in dataclasses.fields(config))
                            - {"solver"}, f"--method {config.method}")
    if config.target_rank is not None and config.lam is not None:
        raise InputError("--lam and --target-rank exclude each other (the rank "
                         "search chooses lam)")


# --- assemble / run ----------------------------------------------------------

@dataclass(frozen=True, kw_only=True)
class AssembleConfig(MatrixOptions):
    """What ``eidecomp assemble`` and ``eidecomp run`` do.

    ``input`` is a matrix file, ``"example"``, or (assemble only) a folder
    written by ``eidecomp decompose``.
    """

    ei_ratio: str | None = None     # DEFAULT_EI_RATIO, or W's own (Dale)
    untuned_share: str = "auto"
    alpha: float | None = None
    ee_support: str = DEFAULT_EE_SUPPORT
    no_stability_guard: bool = False
    no_own_neurons: bool = False
    units: str | None = None
    period: float = DEFAULT_PERIOD
    position_unit: str = POSITION_UNITS[0]
    magnification: float | None = None
    report: bool = False
    expand: bool = False


@dataclass(frozen=True)
class AssembleResult:
    """What an assemble job wrote: the kind of bundle, the circuit and its
    manifest."""

    kind: bundles.BundleKind
    circuit: object
    meta: dict
    output: Path


def _read_split_input(config):
    """(W, Decomposition or None, observed, source): a decomposition folder,
    or a matrix file and its observed entries (to decompose once every input
    has been read)."""
    if config.input is not None and Path(config.input).is_dir():
        kind = bundles.identify(config.input)
        if kind is None and (Path(config.input) / DECOMPOSITION.manifest).is_file():
            bundles.expect_kind(config.input, DECOMPOSITION)  # what is wrong in it
        if kind is not DECOMPOSITION:
            found = (f"a {kind.what}, not a {DECOMPOSITION.what}" if kind
                     else f"not an eidecomp {DECOMPOSITION.what}")
            raise InputError(f"{config.input}: {found}; assemble reads a matrix "
                             "or a folder written by 'eidecomp decompose'")
        refuse_inapplicable(config, set(f.name for f in dataclasses.fields(config))
                            - set(_MATRIX_OPTIONS) - {"kernel", "grid", "expand"},
                            "a decomposition folder (it was decomposed already: "
                            "decompose again, or give the matrix)")
        dec, summary = bundles.read_decomposition(config.input)
        source = {"path": str(config.input), "decomposition": str(config.input),
                  "sha256": summary["input"].get("sha256")}
        return np.asarray(dec.low_rank) + np.asarray(dec.sparse), dec, None, source
    W, source = _load_matrix(config, square=True)
    return W, None, _load_observed(config, W.shape), source


def _check_square(W, name):
    if W.shape[0] != W.shape[1]:
        raise InputError(f"{name}: W is {W.shape[0]}x{W.shape[1]}; a circuit "
                         "needs a square matrix (decompose takes any shape)")


def _e_unit_rows(units, circuit):
    """The unit table's rows of the circuit's E units, in their order: all
    of them, except for a circuit of W's own neurons, whose interneurons
    are W units too (circuit.json's w_index names every unit's row)."""
    if not circuit.own_neurons or units.path is None:
        return units
    e = circuit.e_units()

    def rows(a):
        return None if a is None else np.asarray(a)[e]

    return dataclasses.replace(
        units, features=rows(units.features), positions=rows(units.positions),
        ids=None if units.ids is None else [units.ids[i] for i in e])


def _assemble_dense(config, out, progress, stage_progress, extra_files):
    from .analysis import interneuron_pools
    from .analysis.report import render_report_files, report_lam_path
    from .assemble import assemble, inhibitory_count
    from .decompose import robust_pca

    refuse_inapplicable(config, set(f.name for f in dataclasses.fields(config))
                        - {"grid", "expand"}, "a matrix")
    _check_split_options(config)
    ratio = (None if config.ei_ratio is None   # bad options fail before any work
             else EIRatio.parse(config.ei_ratio))
    inputs = _inputs(config.input, config.unobserved, config.units)
    check_bundle_output(out, CIRCUIT, force=config.force, inputs=inputs)
    W, dec, observed, source = _read_split_input(config)
    _check_square(W, config.input)
    if ratio is not None:   # None: 4:1, or W's own (checked by assemble)
        inhibitory_count(W.shape[0], ratio)
    units = read_unit_table(config.units, W.shape[0], period=config.period,
                            position_unit=config.position_unit,
                            magnification=config.magnification)
    path = None  # the report's lam path, solved once
    if dec is None:  # every input read and checked: now the work
        # W is kept for the stability and the report at the split's precision
        if config.dtype == "float32":
            W = W.astype(np.float32)
        dec = robust_pca(W, lam=config.lam, observed=observed,
                         ignore_diagonal=config.ignore_diagonal, tol=config.tol,
                         target_rank=config.target_rank, method=config.method,
                         solver=config.solver, seed=config.seed,
                         progress=progress, dtype=config.dtype,
                         **_stop_options(config))
        W = dec.completed(W)   # a value left out never enters the circuit
        if config.report:
            announcer(stage_progress)("report: lambda path")
            path = report_lam_path(W, progress=stage_progress)
        dec = _with_suggestion(W, dec, config, stage_progress, points=path)
    circuit = assemble(dec, ei_ratio=ratio, untuned_share=config.untuned_share,
                       alpha=config.alpha, ee_support=config.ee_support,
                       stability_guard=not config.no_stability_guard,
                       own_neurons=not config.no_own_neurons,
                       seed=config.seed,
                       progress=stage_progress)
    tell = announcer(stage_progress)
    units = _e_unit_rows(units, circuit)
    pools = interneuron_pools(circuit, units.features, config.period)
    tell("stability")
    stability = dynamics.stability_summary(circuit, W,
                                           tau_ratio=TAU_I_MS / TAU_E_MS)
    doc = bundles.circuit_doc(
        circuit, source={**source, "shape": list(W.shape), "units": units.path,
                         "position_unit": config.position_unit,
                         "magnification_um_per_deg": config.magnification},
        decomposition={"lam": dec.lam, "rank": dec.rank,
                       "converged": dec.converged, "n_iter": dec.n_iter,
                       "dtype": str(np.asarray(dec.low_rank).dtype),
                       **bundles.split_fields(dec)},
        stability=stability, pools=pools,
        parameters={"period": config.period}, unit_ids=units.ids)
    files = dict(extra_files or {})
    if config.report:
        if path is None:  # a decomposition folder given: its path here
            tell("report: lambda path")
            path = report_lam_path(W, progress=stage_progress)
        files["report.html"], svgs = render_report_files(
            circuit, doc, W, low_rank=np.asarray(dec.low_rank),
            features=units.features, positions=units.positions,
            path_points=path, progress=stage_progress, link=REPORT_SVG_PREFIX)
        files.update({REPORT_SVG_PREFIX + name: v for name, v in svgs.items()})
    tell("writing the bundle")
    meta = bundles.write_circuit(
        out, circuit, doc, files=files, force=config.force, inputs=inputs,
        arrays={"low_rank": np.asarray(dec.low_rank),
                "sparse": np.asarray(dec.sparse), "features": units.features,
                "positions": units.positions})
    return AssembleResult(CIRCUIT, circuit, meta, out)


def _assemble_tiled(config, out, progress):
    """A tiled circuit from a kernel: its kernels, or with ``expand`` an
    explicit circuit bundle (after a memory estimate)."""
    from .assemble import assemble_tiled, inhibitory_count
    from .decompose import robust_pca_kernel
    from .kernels import dense_bytes, full_grid
    from .limits import check_fits

    # ee_support is accepted and recorded as "any": the kernel assembler
    # has no support rule yet (tiled.json says so, and so does the summary)
    refuse_inapplicable(config, ("output", "kernel", "grid", "expand", "key",
                                 "ei_ratio", "untuned_share", "alpha",
                                 "ee_support", "lam", "tol", "seed", "force"),
                        "a kernel (--kernel)")
    ratio = EIRatio.parse(config.ei_ratio or DEFAULT_EI_RATIO)
    kind = CIRCUIT if config.expand else TILED
    inputs = _inputs(config.kernel)
    check_bundle_output(out, kind, force=config.force, inputs=inputs)
    K, grid, source = _load_kernel(config)
    F = K.shape[0]
    n_total = (F + inhibitory_count(F, ratio, where=" per site",
                                    units="features")) * grid[0] * grid[1]
    need = dense_bytes(n_total, arrays=6)   # the circuit, W's L and S, W
    if config.expand:
        check_fits(need, f"the expanded circuit ({n_total} units)",
                   advice="; drop --expand to keep it as kernels")
    G = full_grid(K, grid)
    dec = robust_pca_kernel(G, grid, offsets=True, lam=config.lam,
                            tol=config.tol, progress=progress)
    tiled = assemble_tiled(dec, G, ei_ratio=ratio,
                           untuned_share=config.untuned_share,
                           alpha=config.alpha, seed=config.seed)
    if config.expand:
        from .kernels import expand_full

        circuit = tiled.expand()
        L, S = expand_full(dec.low_rank), expand_full(dec.sparse)
        stability = dynamics.stability_summary(
            circuit, L + S, tau_ratio=TAU_I_MS / TAU_E_MS)
        doc = bundles.tiled_doc(tiled, dec, source=source, expanded_bytes=need,
                                stability=stability)
        meta = bundles.write_circuit(out, circuit, doc, force=config.force,
                                     inputs=inputs,
                                     arrays={"low_rank": L, "sparse": S})
        return AssembleResult(CIRCUIT, circuit, meta, out)
    doc = bundles.tiled_doc(tiled, dec, source=source, expanded_bytes=need)
    meta = bundles.write_tiled(out, tiled, doc, force=config.force, inputs=inputs)
    return AssembleResult(TILED, tiled, meta, out)


def run_assemble(config, *, progress=None, stage_progress=None, extra_files=None):
    """Decompose W (unless given a decomposition folder), assemble, write the
    bundle.

    The bundle holds the nonnegative blocks J_EE.npy, J_EU.npy, J_UE.npy,
    J_ET.npy, J_TE.npy, the split it was built from (low_rank.npy,
    sparse.npy) and circuit.json (populations, parameters, metrics, the
    baselines, stability, per-interneuron pools, provenance, checksums):
    :mod:`eidecomp.io.bundles`. ``progress`` goes to robust_pca,
    ``stage_progress`` to assemble; ``extra_files`` (name -> bytes) are
    written into the bundle with the rest.
    """
    out = Path(config.output)
    if (config.input is None) == (config.kernel is None):
        raise InputError("give either a matrix or --kernel")
    if config.kernel is not None:
        return _assemble_tiled(config, out, progress)
    return _assemble_dense(config, out, progress, stage_progress, extra_files)


# --- export ------------------------------------------------------------------

def run_export(bundle, fmt, output, *, force=False, tau_e=TAU_E_MS,
               tau_i=TAU_I_MS, raw_csv=False, drive=None, seed=0, gain=1.0,
               allow_unstable=False, command=None, warn=None):
    """Write a circuit bundle in one export format; returns the path written.

    ``fmt`` is a name of :data:`eidecomp.export.FORMATS`: graphml, json,
    csv, populations and neuroml write one file; pynn, nest and brian2 a
    folder holding a script and its data, with the E units' drive: ``drive``
    as for :func:`run_simulate` ("random", seeded by ``seed``, or a file of
    N values; None: "random"), so that the script's run responds as
    ``eidecomp simulate`` does. Features and positions stored in the bundle
    (from ``--units``) become node attributes of the graph formats (and
    NeuroML2 instance locations and notes), the interneurons' derived from
    their input pools (:func:`eidecomp.analysis.pool_features`), and the
    unit ids data in every format. ``raw_csv`` writes CSV text cells without
    the CSV-injection quote (eidecomp.export.edges_csv). The script formats
    take ``gain`` (the circuit scaled as ``simulate --gain`` scales it) and
    refuse a circuit whose linear dynamics are unstable at that gain and
    these time constants, naming the largest stable gain and what to run
    (``command(**changes)``); ``allow_unstable`` writes it anyway, with
    one line to ``warn``.
    """
    from .export import get_format, render
    from .export.registry import FILE_SUFFIXES, folder_kind
    from .io import write_file, write_folder
    from .io.provenance import unedited_file, unedited_folder
    from .io.staging import check_output

    spec = get_format(fmt)
    given = {"tau_e": tau_e != TAU_E_MS, "tau_i": tau_i != TAU_I_MS,
             "raw_csv": bool(raw_csv), "drive": drive is not None,
             "seed": seed != 0, "gain": gain != 1.0,
             "allow_unstable": bool(allow_unstable)}
    _refuse_set(given, spec.options, f"the {fmt} format")
    spec.check_available()
    bundles.expect_kind(bundle, CIRCUIT)  # a wrong input is named first
    if spec.folder and Path(output).suffix.lower() in FILE_SUFFIXES:
        raise InputError(f"{output}: the {fmt} export is a folder (a script "
                         f"and its data), not a {Path(output).suffix} file; "
                         "give a folder name")
    folder_rule = lambda p: unedited_folder(p, kind=folder_kind(fmt))  # noqa: E731
    check_output(output, force=force, folder=spec.folder, inputs=(bundle,),
                 replaceable=folder_rule if spec.folder else unedited_file)
    b = bundles.read_circuit_bundle(bundle)
    circuit, extra = b.circuit, {}
    if "drive" in spec.options:        # the same drive and gain as simulate's
        circuit, extra = _script_circuit(bundle, fmt, circuit, drive, seed, gain,
                                         tau_e, tau_i, allow_unstable,
                                         command, warn)
    data = render(fmt, circuit, features=b.features, positions=b.positions,
                  unit_ids=b.unit_ids,  # names: data, never code
                  tau_e=tau_e, tau_i=tau_i, raw_csv=raw_csv, period=b.period,
                  **extra)
    if not spec.folder:
        return write_file(output, data, force=force,
                          replaceable=unedited_file, inputs=(bundle,))
    return write_folder(output, data, force=force, inputs=(bundle,),
                        replaceable=folder_rule)


def _script_circuit(bundle, fmt, circuit, drive, seed, gain, tau_e, tau_i,
                    allow_unstable, command, warn):
    """The circuit a script export runs (scaled by ``gain``, checked to be
    stable unless ``allow_unstable``) and the renderer's options: the drive
    and, for the rate scripts, eidecomp's own runs of every model."""
    from .dynamics import scaled_circuit
    from .simulation import (
        RANDOM,
        TooSlow,
        Unstable,
        check_stable,
        circuit_runs,
        explain,
        read_drive,
        rectified_units,
    )

    d = read_drive(RANDOM if drive is None else drive, circuit.n_w_units, seed)
    try:
        check_stable(circuit, gain=gain, tau_e=tau_e, tau_i=tau_i)
    except (Unstable, TooSlow) as exc:
        if not allow_unstable:
            raise InputError(f"{bundle}: {explain(exc, command)}") from None
        if warn is not None:
            warn(f"{bundle}: {exc}; written as asked (--allow-unstable)")
    circuit = scaled_circuit(circuit, gain)
    if fmt in ("pynn", "neuroml"):     # spiking: one constant drive
        if d.n_segments != 1:
            raise InputError(f"{drive}: the {fmt} export runs one drive (N "
                             f"values), not {d.n_segments} segments")
        return circuit, {"drive": d.values[:, 0]}
    expected, segment = circuit_runs(circuit, d, tau_e=tau_e, tau_i=tau_i)
    return circuit, {"drive": d, "expected": expected, "segment_ms": segment,
                     "n_rect": rectified_units(circuit, "threshold-linear")}


# --- simulate ----------------------------------------------------------------

def _advised(bundle, command):
    """A refusal of a run (simulation.Unstable, Diverged) as one line with
    the command to run instead (``command(**changes)``, None: words)."""
    from .simulation import Diverged, TooSlow, Unstable, explain

    class _Catch:
        def __enter__(self):
            return self

        def __exit__(self, kind, exc, tb):
            if isinstance(exc, (Unstable, Diverged, TooSlow)):
                raise InputError(f"{bundle}: {explain(exc, command)}") from None
            return False

    return _Catch()


def run_simulate(bundle, *, simulator="internal", drive="random", tau_e=TAU_E_MS,
                 tau_i=TAU_I_MS, seed=0, gain=1.0, model="linear", duration=None,
                 command=None):
    """Run the circuit and the original network on the same drive.

    The original with W = L + S from the bundle, the circuit with W_full,
    both scaled by ``gain`` (J_EE by it, J_EI and J_IE by its square root),
    on ``simulator`` (a name of :data:`eidecomp.simulation.SIMULATORS`)
    with ``model`` (:data:`eidecomp.simulation.MODELS`):
    :func:`eidecomp.simulation.compare_with_original`. ``drive`` is
    "random" (seeded by ``seed``) or a file (N values or (N, T), time along
    the columns). A run that cannot work is refused in one line that says
    what to run instead; ``command(**changes)`` renders that command (the
    command line's), None gives the words alone. Returns the comparison's
    dict with the drive's source.
    """
    from .simulation import compare_with_original, get_model, get_simulator, read_drive

    sim = get_simulator(simulator)
    get_model(model)
    if model not in sim.models:
        raise InputError(f"the {simulator} simulator does not run the {model} "
                         "model")
    sim.check_available()
    b = bundles.read_circuit_bundle(bundle)
    d = read_drive(drive, b.circuit.n_w_units, seed)
    with _advised(bundle, command):
        result = compare_with_original(
            b.circuit, b.original_weights(), d, tau_e=tau_e, tau_i=tau_i,
            simulator=simulator, gain=gain, model=model, t_ms=duration)
    return {"drive": d.source, **result}


# --- report and demo ---------------------------------------------------------

def run_report(bundle, output, *, force=False, progress=None):
    """Write the HTML report of a circuit bundle to ``output``, and its
    figures as SVG files in the folder beside it named after it
    (report.html: report-figures/); returns the page's path."""
    from .analysis.report import render_report_files, report_lam_path
    from .io import staged_folder, write_file
    from .io.provenance import stamp, stamp_folder, unedited_file, unedited_folder
    from .io.staging import check_output, file_bytes, fill_folder

    bundles.expect_kind(bundle, CIRCUIT)  # a wrong input is named first
    replaceable_page = unedited_file

    def replaceable_figures(path):
        return unedited_folder(path, kind=REPORT_FIGURES_KIND)
    out = check_output(output, force=force, folder=False, replaceable=replaceable_page,
                       inputs=(bundle,))
    figures = report_figures_folder(out)

    try:
        check_output(figures, force=force, replaceable=replaceable_figures,
                     inputs=(bundle,))
    except InputError as exc:   # a path the user did not type: say what it is
        raise InputError(f"{exc} (the folder of the report's SVG figures, "
                         f"beside {out.name})") from None
    b = bundles.read_circuit_bundle(bundle)
    W = b.original_weights()
    tell = announcer(progress)
    tell("report: lambda path")
    page, svgs = render_report_files(
        b.circuit, b.doc, W, low_rank=b.low_rank, features=b.features,
        positions=b.positions,
        path_points=report_lam_path(W, progress=progress),
        progress=progress, link=f"{figures.name}/")
    tell("report: writing")
    # the page is written while the new figures wait under a temporary name:
    # a failed write of either leaves the old page and figures as they were
    # (only the folder's own rename comes after the page's)
    with staged_folder(figures, force=force, replaceable=replaceable_figures,
                       inputs=(bundle,)) as staged:
        fill_folder(staged, stamp_folder(
            {name: file_bytes(svg) for name, svg in svgs.items()},
            kind=REPORT_FIGURES_KIND))
        return write_file(out, stamp(file_bytes(page), "xml"),
                          force=force, replaceable=replaceable_page, inputs=(bundle,))


REPORT_FIGURES_KIND = "eidecomp report figures"
"""The kind the manifest of a report's figures folder names."""


def report_figures_folder(page):
    """Where the SVG figures of the report ``page`` go: beside it, named
    after it (``out/report.html`` -> ``out/report-figures``)."""
    page = Path(page)
    return page.with_name(f"{page.stem}-figures")


def run_demo(output, *, force=False, progress=None):
    """Write the demo inputs and run decompose + assemble + report on them;
    ``progress`` is an :class:`eidecomp.progress.Progress` (or None).

    The inputs are read by file name from inside a temporary folder, so
    circuit.json and the report name them as their copies in the bundle
    (demo_weights.npy, demo_units.csv), not by a folder that is gone.
    """
    import os
    import tempfile

    out = Path(output).absolute()
    check_bundle_output(out, CIRCUIT, force=force)
    W, units_csv = datasets.demo_inputs()
    names = ("demo_weights.npy", "demo_units.csv")
    with tempfile.TemporaryDirectory() as tmp:
        np.save(Path(tmp) / names[0], W)
        (Path(tmp) / names[1]).write_text(units_csv, encoding="utf-8")
        config = AssembleConfig(input=names[0], output=str(out), units=names[1],
                                ignore_diagonal=True, report=True, force=force)
        # the inputs go beside the bundle's files, for the reader, in the
        # same all-or-nothing write
        inputs = {name: (Path(tmp) / name).read_bytes() for name in names}
        here = os.getcwd()
        os.chdir(tmp)
        try:
            result = run_assemble(
                config, progress=progress and progress.solver,
                stage_progress=progress and progress.stage, extra_files=inputs)
        finally:
            os.chdir(here)
    return dataclasses.replace(result, output=Path(output))  # as the user gave it
