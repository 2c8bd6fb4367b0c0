"""The jobs eidecomp runs, each from a config object: load, compute, save.

No argparse and no printing here: :mod:`eidecomp.cli` builds the config and
shows the result; a script can call these functions directly.
"""

import json
import math
import warnings
from dataclasses import asdict, dataclass
from pathlib import Path

import numpy as np

from . import __version__, datasets
from .decompose import default_lam, robust_pca
from .errors import ConvergenceWarning, InputError
from .io import file_checksum, read_mask, read_matrix, staged_folder, write_folder

__all__ = [
    "AssembleConfig",
    "AssembleResult",
    "DecomposeConfig",
    "DecomposeResult",
    "run_assemble",
    "demo_inputs",
    "run_demo",
    "run_export",
    "run_report",
    "run_simulate",
    "run_decompose",
]

BUNDLE_FORMAT = "eidecomp-decomposition"
BUNDLE_VERSION = 1
EXAMPLE = "example"


@dataclass(frozen=True)
class DecomposeConfig:
    """What ``eidecomp decompose`` does.

    ``input`` is a matrix file, or the string ``"example"`` for the built-in
    invented example matrix.
    """

    input: str
    output: str
    key: str | None = None
    transpose: bool = False
    mask: str | None = None
    ignore_diagonal: bool = False
    lam: float | None = None
    target_rank: int | None = None
    method: str = "ialm"
    solver: str = "CLARABEL"
    tol: float | None = None
    max_iter: int | None = None
    seed: int = 0
    force: bool = False
    kernel: str | None = None
    grid: str | None = None
    boundary: str = "periodic"
    dtype: str = "float64"
    engine: str = "memory"
    scheduler: str | None = None


@dataclass(frozen=True)
class DecomposeResult:
    decomposition: object
    summary: dict
    output: Path


def _load(config):
    if config.input == EXAMPLE and not Path(EXAMPLE).exists():
        W, _ = datasets.example_lateral()
        return W, {"path": "built-in example (invented data)", "sha256": None}
    W = read_matrix(config.input, key=config.key, transpose=config.transpose,
                    what="weight matrix")
    return W, {"path": str(config.input), "sha256": file_checksum(config.input)}


DASK_FORMAT = "eidecomp-dask-decomposition"


def _run_decompose_dask(config, out, progress):
    """The dask engine: W read in blocks from a .npy file or a zarr array,
    L written as its factors and S moved to sparse.npy, all inside a staged
    folder renamed into place at the end (S and Y live there meanwhile)."""
    import importlib.util

    if importlib.util.find_spec("distributed") is None:
        raise InputError("the dask engine needs the dist extra: "
                         "pip install 'eidecomp[dist]'")
    from .decompose import robust_pca_dask

    if config.input is None or Path(config.input).suffix not in (".npy", ".zarr"):
        raise InputError(f"{config.input}: the dask engine reads a .npy file "
                         "or a .zarr array")
    if config.mask or config.ignore_diagonal or config.transpose or \
            config.target_rank or config.method != "ialm":
        raise InputError("the dask engine runs plain PCP with the ALM: no "
                         "--mask, --ignore-diagonal, --transpose, --target-rank "
                         "or --method convex")
    with staged_folder(out, force=config.force) as tmp:
        dec = robust_pca_dask(config.input, lam=config.lam, tol=config.tol,
                              max_iter=config.max_iter or 5000,
                              dtype=config.dtype, scheduler=config.scheduler,
                              seed=config.seed, progress=progress,
                              sparse_out=tmp / "sparse.npy")
        U, s, Vt = dec.low_rank_factors
        np.save(tmp / "low_rank_U.npy", U)
        np.save(tmp / "low_rank_s.npy", s)
        np.save(tmp / "low_rank_Vt.npy", Vt)
        shape = list(dec.sparse.shape)
        summary = {
            "format": DASK_FORMAT, "format_version": BUNDLE_VERSION,
            "eidecomp_version": __version__,
            "convention": "W[post, pre]; L = (U * s) @ Vt from the three "
                          "low_rank_*.npy factors",
            "input": {"path": str(config.input),
                      "sha256": file_checksum(config.input), "shape": shape},
            "engine": {"name": "dask", "scheduler": config.scheduler or
                       "local cluster, 2 workers"},
            "parameters": {"lam": config.lam, "tol": config.tol,
                           "dtype": config.dtype, "target_rank": None},
            "lam": dec.lam, "rank": dec.rank, "n_iter": dec.n_iter,
            "converged": dec.converged,
        }
        (tmp / "summary.json").write_text(json.dumps(summary, indent=2) + "\n")
        del dec  # release the memory map of sparse.npy before the rename
    return DecomposeResult(decomposition=None, summary=summary, output=out)


KERNEL_FORMAT = "eidecomp-kernel-decomposition"


def _run_decompose_kernel(config, out, progress):
    from .decompose import robust_pca_kernel
    from .io import read_kernel
    from .kernels import check_kernel, parse_grid

    if config.grid is None:
        raise InputError("--kernel needs --grid HxW")
    grid = parse_grid(config.grid)
    K = check_kernel(read_kernel(config.kernel, key=config.key), grid,
                     config.boundary, name=str(config.kernel))
    source = {"path": str(config.kernel), "sha256": file_checksum(config.kernel),
              "kernel_shape": list(K.shape), "grid": list(grid),
              "boundary": config.boundary}
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", ConvergenceWarning)
        dec = robust_pca_kernel(K, grid, lam=config.lam, boundary=config.boundary,
                                tol=config.tol, max_iter=config.max_iter,
                                progress=progress, seed=config.seed)
    for w in caught:
        warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    n_units = K.shape[0] * grid[0] * grid[1]
    summary = {
        "format": KERNEL_FORMAT if config.boundary == "periodic" else BUNDLE_FORMAT,
        "format_version": BUNDLE_VERSION, "eidecomp_version": __version__,
        "convention": "kernels K[post_feature, pre_feature, offset]; the tiled "
                      "matrix is W[post, pre]",
        "input": source, "n_units": n_units,
        "parameters": {"lam": config.lam, "tol": config.tol,
                       "max_iter": config.max_iter, "method": "ialm",
                       "target_rank": None},
        "lam": dec.lam, "lam_default": 1.0 / math.sqrt(n_units),
        "rank": dec.rank, "objective": dec.objective, "n_iter": dec.n_iter,
        "converged": dec.converged,
    }
    if config.boundary == "periodic":
        summary["layout"] = ("low_rank_kernel.npy and sparse_kernel.npy are "
                             "full-grid kernels (F, F, H, W): entry [a, b, oy, ox] "
                             "is the weight onto feature a from feature b at "
                             "offset (oy, ox) mod the grid; ranks.npy is the rank "
                             "of L at each spatial frequency")
        files = {"low_rank_kernel.npy": np.asarray(dec.low_rank),
                 "sparse_kernel.npy": np.asarray(dec.sparse),
                 "ranks.npy": np.asarray(dec.ranks), "summary.json": summary}
    else:
        summary["input"]["shape"] = [n_units, n_units]
        summary["sparsity"] = dec.sparsity
        summary["optimality"] = {k: _clean(v) for k, v in dec.report.as_dict().items()}
        files = {"low_rank.npy": np.asarray(dec.low_rank),
                 "sparse.npy": np.asarray(dec.sparse), "summary.json": summary}
    write_folder(out, files, force=config.force)
    return DecomposeResult(decomposition=dec, summary=summary, output=out)


def _clean(value):
    """JSON-safe: non-finite floats become None."""
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def run_decompose(config, *, progress=None):
    """Read W, run robust PCA, write ``low_rank.npy``, ``sparse.npy``, ``summary.json``.

    Parameters
    ----------
    config : DecomposeConfig
    progress : callable or None
        Passed to :func:`eidecomp.robust_pca`.

    Returns
    -------
    DecomposeResult
    """
    out = Path(config.output)
    if out.exists() and not config.force:  # fail before any work is done
        raise InputError(f"{out}: already exists; use --force to replace it")
    if config.kernel is not None:
        return _run_decompose_kernel(config, out, progress)
    if config.engine == "dask":
        return _run_decompose_dask(config, out, progress)
    W, source = _load(config)
    observed = None
    if config.mask is not None:
        observed = read_mask(config.mask, W.shape, transpose=config.transpose)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", ConvergenceWarning)
        dec = robust_pca(W, lam=config.lam, method=config.method, mask=observed,
                         ignore_diagonal=config.ignore_diagonal,
                         target_rank=config.target_rank, tol=config.tol,
                         max_iter=config.max_iter, solver=config.solver,
                         seed=config.seed, progress=progress, dtype=config.dtype)
    for w in caught:  # pass them on to the caller, once each
        warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    n_unobserved = 0 if dec.observed is None else int((~dec.observed).sum())
    summary = {
        "format": BUNDLE_FORMAT,
        "format_version": BUNDLE_VERSION,
        "eidecomp_version": __version__,
        "convention": "W[post, pre]: row = target, column = source",
        "input": {**source, "key": config.key, "transpose": config.transpose,
                  "shape": list(W.shape)},
        "mask": {"path": config.mask, "ignore_diagonal": config.ignore_diagonal,
                 "n_unobserved": n_unobserved},
        "parameters": {k: v for k, v in asdict(config).items()
                       if k in ("lam", "target_rank", "method", "solver", "tol",
                                "max_iter", "seed", "dtype")},
        "lam": dec.lam,
        "lam_default": default_lam(W.shape),
        "rank": dec.rank,
        "sparsity": dec.sparsity,
        "objective": dec.objective,
        "n_iter": dec.n_iter,
        "converged": dec.converged,
        "optimality": {k: _clean(v) for k, v in dec.report.as_dict().items()},
    }
    files = {"low_rank.npy": np.asarray(dec.low_rank),
             "sparse.npy": np.asarray(dec.sparse), "summary.json": summary}
    write_folder(out, files, force=config.force)
    return DecomposeResult(decomposition=dec, summary=summary, output=out)


# --- assemble / run ----------------------------------------------------------

STABILITY_MAX_UNITS = 800  # eigenvalue scans above this size are left to the API


@dataclass(frozen=True)
class AssembleConfig:
    """What ``eidecomp assemble`` and ``eidecomp run`` do.

    ``input`` is a matrix file, ``"example"``, or (assemble only) a folder
    written by ``eidecomp decompose``.
    """

    input: str
    output: str
    ei_ratio: str = "4:1"
    untuned_share: str = "auto"
    alpha: float | None = None
    units: str | None = None
    period: float = 180.0
    position_unit: str = "um"
    magnification: float | None = None
    report: bool = False
    kernel: str | None = None
    grid: str | None = None
    expand: bool = False
    key: str | None = None
    transpose: bool = False
    mask: str | None = None
    ignore_diagonal: bool = False
    lam: float | None = None
    tol: float = 1e-8
    seed: int = 0
    force: bool = False


@dataclass(frozen=True)
class AssembleResult:
    circuit: object
    meta: dict
    output: Path


def _read_decomposition(folder):
    from .types import Decomposition

    folder = Path(folder)
    try:
        summary = json.loads((folder / "summary.json").read_text("utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise InputError(f"{folder}: not a decomposition folder ({exc})") from None
    if summary.get("format") != BUNDLE_FORMAT:
        raise InputError(f"{folder}: summary.json is not an eidecomp decomposition")
    if summary.get("format_version", 0) > BUNDLE_VERSION:
        raise InputError(f"{folder}: decomposition format version "
                         f"{summary.get('format_version')} is newer than this "
                         "eidecomp reads; upgrade")
    L = read_matrix(folder / "low_rank.npy", what="low-rank part")
    S = read_matrix(folder / "sparse.npy", what="sparse part")
    if L.shape != S.shape:
        raise InputError(f"{folder}: low_rank and sparse shapes differ")
    dec = Decomposition(low_rank=L, sparse=S, rank=int(summary["rank"]),
                        lam=float(summary["lam"]),
                        objective=float(summary["objective"]),
                        n_iter=int(summary["n_iter"]),
                        converged=bool(summary["converged"]))
    return dec, {"path": str(folder), "sha256": summary["input"].get("sha256"),
                 "decomposition": str(folder)}


TILED_FORMAT = "eidecomp-tiled-circuit"


def _run_assemble_tiled(config, out, progress):
    """A tiled circuit from a kernel; its kernels, or with ``expand`` an
    explicit circuit bundle (after a memory estimate)."""
    from .assemble import assemble_tiled, parse_ratio
    from .decompose import robust_pca_kernel
    from .io import circuit_files, read_kernel
    from .kernels import check_kernel, dense_bytes, full_grid, parse_grid
    from .limits import available_memory

    if config.grid is None:
        raise InputError("--kernel needs --grid HxW")
    grid = parse_grid(config.grid)
    ratio = parse_ratio(config.ei_ratio)
    K = check_kernel(read_kernel(config.kernel, key=config.key), grid,
                     "periodic", name=str(config.kernel))
    F = K.shape[0]
    m = int(round(F / ratio))
    n_total = (F + m) * grid[0] * grid[1]
    need = dense_bytes(n_total, arrays=3)
    if config.expand and available_memory() and need > available_memory():
        raise InputError(f"the expanded circuit would have {n_total} units and "
                         f"need about {need / 2**30:.1f} GiB; drop --expand to "
                         "keep it as kernels")
    G = full_grid(K, grid)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", ConvergenceWarning)
        dec = robust_pca_kernel(G, grid, offsets=True, lam=config.lam,
                                tol=config.tol, progress=progress)
        tiled = assemble_tiled(dec, G, ei_ratio=ratio,
                               untuned_share=config.untuned_share,
                               alpha=config.alpha, seed=config.seed)
    for w in caught:
        warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    F, mu, mt = tiled.per_site
    meta = {
        "eidecomp_version": __version__,
        "input": {"path": str(config.kernel), "sha256": file_checksum(config.kernel),
                  "kernel_shape": list(K.shape), "grid": list(grid),
                  "boundary": "periodic", "shape": [F * grid[0] * grid[1]] * 2},
        "parameters": {**tiled.params, "lam": dec.lam, "rank": dec.rank},
        "per_site": {"excitatory": F, "untuned": mu, "tuned": mt},
        "counts": {"excitatory": F * grid[0] * grid[1],
                   "untuned": mu * grid[0] * grid[1],
                   "tuned": mt * grid[0] * grid[1]},
        "metrics": {"relative_error": tiled.relative_error,
                    "ee_density": float(np.count_nonzero(tiled.J_EE)
                                        / tiled.J_EE.size),
                    "share_rule": f"per site: {mu} untuned, {mt} tuned",
                    "converged": True},
        "baselines": [],
        "memory_estimate_expanded_bytes": need,
        "hypothesis": "a model circuit consistent with W, not a measurement",
    }
    if config.expand:
        circuit = tiled.expand()
        stability = {"original_spectral_abscissa": None,
                     "circuit_spectral_abscissa_equal_taus": None,
                     "max_stable_tau_ratio": None,
                     "note": "not computed for tiled circuits"}
        files = circuit_files(circuit, {**meta, "stability": stability,
                                        "interneurons": []})
    else:
        circuit = tiled
        files = {f"{b}_kernel.npy": np.asarray(getattr(tiled, b))
                 for b in ("J_EE", "J_EU", "J_UE", "J_ET", "J_TE")}
        files["tiled.json"] = {"format": TILED_FORMAT, "format_version": 1,
                               "layout": "full-grid kernels (P, Q, H, W), "
                                         "[post, pre, offset mod grid]", **meta}
        meta = files["tiled.json"]
    write_folder(out, files, force=config.force)
    return AssembleResult(circuit=circuit, meta=meta if not config.expand
                          else files["circuit.json"], output=out)


def _stability(circuit, W):
    from . import dynamics

    n_total = circuit.n_excitatory + circuit.n_inhibitory
    a_orig = dynamics.spectral_abscissa(W - np.eye(W.shape[0]))
    if n_total > STABILITY_MAX_UNITS:
        return {"original_spectral_abscissa": a_orig,
                "circuit_spectral_abscissa_equal_taus": None,
                "max_stable_tau_ratio": None,
                "note": f"{n_total} units: the tau scan was skipped (above "
                        f"{STABILITY_MAX_UNITS}); call "
                        "eidecomp.dynamics.max_stable_tau_ratio"}
    W_full = circuit.signed_weights()
    a_circ = dynamics.spectral_abscissa(
        dynamics.jacobian(W_full, circuit.n_excitatory, 1.0, 1.0))
    ratio = dynamics.max_stable_tau_ratio(circuit, lo=1e-2, hi=1e2, n_grid=17,
                                          rtol=1e-3)
    return {"original_spectral_abscissa": a_orig,
            "circuit_spectral_abscissa_equal_taus": a_circ,
            "max_stable_tau_ratio": _clean(ratio),
            "note": "tau_I / tau_E scanned over [0.01, 100]; null means "
                    "stable over the whole range"}


def run_assemble(config, *, progress=None, stage_progress=None, extra_files=None):
    """Decompose W (unless given a decomposition), assemble, write the bundle.

    The bundle holds J_EE.npy, J_EU.npy, J_UE.npy, J_ET.npy, J_TE.npy (the
    nonnegative blocks), low_rank.npy and sparse.npy (the split it was
    built from) and circuit.json (populations, parameters, metrics, the
    baselines, stability, per-interneuron pools, provenance, checksums).
    ``progress`` goes to robust_pca, ``stage_progress`` to assemble;
    ``extra_files`` (name -> bytes) are written into the bundle with the rest.
    """
    from .analysis import interneuron_pools
    from .assemble import assemble, inhibitory_count, parse_ratio
    from .io import circuit_files, read_units

    out = Path(config.output)
    if out.exists() and not config.force:
        raise InputError(f"{out}: already exists; use --force to replace it")
    if config.kernel is not None:
        return _run_assemble_tiled(config, out, progress)
    ratio = parse_ratio(config.ei_ratio)  # bad options fail before any work
    if Path(config.input).is_dir():
        dec, source = _read_decomposition(config.input)
        W = np.asarray(dec.low_rank) + np.asarray(dec.sparse)
    else:
        W, source = _load(config)
        dec = None
    if W.shape[0] != W.shape[1]:
        raise InputError(f"{config.input}: W is {W.shape[0]}x{W.shape[1]}; a "
                         "circuit needs a square matrix")
    inhibitory_count(W.shape[0], ratio)
    units = None
    positions = None
    if config.position_unit not in ("um", "deg"):
        raise InputError(f"position unit {config.position_unit!r}: use um or deg")
    if config.position_unit == "deg" and not (config.magnification or 0) > 0:
        raise InputError("positions in degrees need --magnification "
                         "(micrometres of cortex per degree of visual field)")
    if config.units is not None:
        units = read_units(config.units, W.shape[0], period=config.period)
        if "x" in units and "y" in units:
            scale = config.magnification if config.position_unit == "deg" else 1.0
            positions = np.column_stack([units["x"], units["y"]]) * scale
        elif "x" in units or "y" in units:
            raise InputError(f"{config.units}: positions need both an x and a "
                             "y column")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", ConvergenceWarning)
        if dec is None:
            observed = None
            if config.mask is not None:
                observed = read_mask(config.mask, W.shape,
                                     transpose=config.transpose)
            dec = robust_pca(W, lam=config.lam, mask=observed,
                             ignore_diagonal=config.ignore_diagonal,
                             tol=config.tol, seed=config.seed,
                             progress=progress)
        circuit = assemble(dec, ei_ratio=ratio,
                           untuned_share=config.untuned_share,
                           alpha=config.alpha, seed=config.seed,
                           progress=stage_progress)
    for w in caught:
        warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    W_target = np.asarray(dec.low_rank) + np.asarray(dec.sparse)
    report = circuit.report
    pools = interneuron_pools(circuit, None if units is None else units["feature"],
                              config.period)
    meta = {
        "eidecomp_version": __version__,
        "input": {**source, "shape": list(W.shape), "key": config.key,
                  "transpose": config.transpose, "units": config.units,
                  "position_unit": config.position_unit,
                  "magnification_um_per_deg": config.magnification},
        "parameters": {**{k: _clean(v) if isinstance(v, float) else v
                          for k, v in circuit.params.items()},
                       "ei_ratio_text": str(config.ei_ratio),
                       "period": config.period},
        "decomposition": {"lam": dec.lam, "rank": dec.rank,
                          "converged": dec.converged, "n_iter": dec.n_iter},
        "counts": {"excitatory": circuit.n_excitatory,
                   "untuned": circuit.n_untuned, "tuned": circuit.n_tuned},
        "metrics": {**{k: v for k, v in report.as_dict().items()
                       if k not in ("history", "baselines")},
                    "silent_interneurons": sum(
                        1 for p in pools
                        if p["n_inputs"] == 0 or p["n_targets"] == 0)},
        "baselines": report.as_dict()["baselines"],
        "stability": _stability(circuit, W_target),
        "interneurons": pools,
        "unit_ids": (None if units is None or "id" not in units
                     else [str(u) for u in units["id"]]),
        "hypothesis": "a model circuit consistent with W, not a measurement",
    }
    files = circuit_files(circuit, meta)
    files["low_rank.npy"] = np.asarray(dec.low_rank)
    files["sparse.npy"] = np.asarray(dec.sparse)
    if units is not None and "feature" in units:
        files["features.npy"] = units["feature"]
    if positions is not None:
        files["positions.npy"] = positions
    if config.report:
        files["report.html"] = _render(
            circuit, files["circuit.json"], W_target, np.asarray(dec.low_rank),
            None if units is None else units["feature"], positions)
    files.update(extra_files or {})
    write_folder(out, files, force=config.force)
    return AssembleResult(circuit=circuit, meta=files["circuit.json"], output=out)


# --- export ------------------------------------------------------------------

def _require_simulator(module):
    """Import check with a one-line answer instead of an ImportError."""
    import importlib.util

    if importlib.util.find_spec(module) is None:
        raise InputError(f"{module} is not installed; it comes with the "
                         "simulator extra: pip install 'eidecomp[sim]'")


def run_export(bundle, fmt, output, *, force=False, tau_e=10.0, tau_i=5.0):
    """Write a circuit bundle in one export format; returns the path written.

    graphml, json, csv and neuroml write one file; pynn, nest and brian2 a
    folder holding a script and its data (the E drive is zero: the scripts
    take the circuit, not an experiment). Features stored in the bundle
    (from ``--units``) become node attributes of the graph formats.
    """
    import tempfile

    from .export import FOLDER_FORMATS, FORMATS
    from .io import read_circuit, write_file

    if fmt not in FORMATS:
        raise InputError(f"unknown export format {fmt!r} (choose from "
                         f"{', '.join(FORMATS)})")
    out = Path(output)
    if out.exists() and not force:
        raise InputError(f"{out}: already exists; use --force to replace it")
    circuit, doc = read_circuit(bundle)
    ids = doc.get("unit_ids")  # names from the unit table: data, never code
    if fmt in FOLDER_FORMATS:
        if fmt == "pynn":
            from .export.pynn_script import pynn_files

            files = pynn_files(circuit, tau_e=tau_e, tau_i=tau_i, unit_ids=ids)
        else:
            from .export.rate_scripts import rate_script_files

            files = rate_script_files(circuit, fmt, tau_e=tau_e, tau_i=tau_i,
                                      unit_ids=ids)
        return write_folder(out, files, force=force)
    if fmt == "neuroml":
        _require_simulator("neuroml")
        from .export.neuroml2 import write_neuroml

        with tempfile.TemporaryDirectory() as tmp:
            path = Path(tmp) / "circuit.net.nml"
            write_neuroml(circuit, path, tau_e=tau_e, tau_i=tau_i, unit_ids=ids)
            data = path.read_bytes()
        return write_file(out, data, force=force)
    from .export.edges_csv import edge_csv_text
    from .export.graph_files import to_graphml_bytes, to_json_bytes
    from .graph import neuron_graph

    feat_path = Path(bundle) / "features.npy"
    features = np.load(feat_path, allow_pickle=False) if feat_path.is_file() else None
    G = neuron_graph(circuit, features=features, unit_ids=ids)
    data = {"graphml": to_graphml_bytes, "json": to_json_bytes,
            "csv": lambda g: edge_csv_text(g).encode()}[fmt](G)
    return write_file(out, data, force=force)


# --- simulate ----------------------------------------------------------------

ENGINES = ("internal", "nest", "brian2")


def _read_drive(spec, n, seed):
    if spec == "random":
        return np.random.default_rng(seed).uniform(0.5, 1.5, n), "random U(0.5, 1.5)"
    h = read_matrix(spec, square=False, what="drive")
    h = np.asarray(h, dtype=float).ravel()
    if h.size != n:
        raise InputError(f"{spec}: drive has {h.size} values, the circuit has "
                         f"{n} excitatory units")
    return h, str(spec)


def run_simulate(bundle, *, engine="internal", drive="random", tau_e=10.0,
                 tau_i=5.0, seed=0):
    """Run the circuit and the original network on the same drive.

    Both are linear rate networks (the original with W = L + S from the
    bundle, the circuit with W_full), simulated by ``engine`` long enough for
    40 time constants of their slowest mode. Returns a dict of relative
    errors: the circuit's E rates against the fixed points of W_eff and of
    W, and the original network's rates against its own fixed point.
    """
    from . import dynamics
    from .io import read_circuit

    if engine not in ENGINES:
        raise InputError(f"unknown engine {engine!r} (choose from "
                         f"{', '.join(ENGINES)})")
    circuit, _ = read_circuit(bundle)
    try:
        W = (read_matrix(Path(bundle) / "low_rank.npy", what="low-rank part")
             + read_matrix(Path(bundle) / "sparse.npy", what="sparse part"))
    except InputError:
        W = circuit.effective_weights()  # a bundle without its split
    n_e = circuit.n_excitatory
    h, source = _read_drive(drive, n_e, seed)
    W_full = circuit.signed_weights()
    tau = np.full(W_full.shape[0], float(tau_i))
    tau[:n_e] = tau_e
    a_orig = dynamics.spectral_abscissa((W - np.eye(n_e)) / tau_e)
    a_circ = dynamics.spectral_abscissa((W_full - np.eye(len(tau))) / tau[:, None])
    if not a_orig < 0:
        raise InputError(f"{bundle}: the original network is unstable (growth "
                         f"rate {a_orig:.3g} per ms); its fixed point is never "
                         "reached")
    if not a_circ < 0:
        limit = dynamics.max_stable_tau_ratio(circuit, lo=1e-2, hi=1e2, n_grid=17)
        raise InputError(f"{bundle}: the circuit is unstable at tau_I/tau_E = "
                         f"{tau_i / tau_e:g} (stable up to {limit:.3g}); choose a "
                         "smaller --tau-i")
    t_ms = float(math.ceil(40.0 / -max(a_orig, a_circ)))  # whole ms: a multiple
    # of every simulator's resolution
    H = np.r_[h, np.zeros(circuit.n_inhibitory)]
    if engine == "internal":
        _, r = dynamics.simulate(W_full, h, n_e=n_e, tau_e=tau_e, tau_i=tau_i,
                                 t_max=t_ms)
        _, r0 = dynamics.simulate(W, h, tau_e=tau_e, t_max=t_ms)
        rates, orig = r[:, -1], r0[:, -1]
    else:
        _require_simulator("nest" if engine == "nest" else "brian2")
        if engine == "nest":
            from .export.nest_builder import run_rate_matrix
        else:
            from .export.brian2_builder import run_rate_matrix
        rates = run_rate_matrix(W_full, H, tau, t_ms=t_ms)
        orig = run_rate_matrix(W, h, np.full(n_e, float(tau_e)), t_ms=t_ms)
    fp_eff = dynamics.fixed_point(circuit.effective_weights(), h)
    fp_W = dynamics.fixed_point(W, h)

    def rel(a, b):
        return float(np.linalg.norm(a - b) / max(np.linalg.norm(b), 1e-300))

    return {"engine": engine, "drive": source, "tau_e_ms": tau_e,
            "tau_i_ms": tau_i, "t_ms": t_ms,
            "circuit_vs_fixed_point_W_eff": rel(rates[:n_e], fp_eff),
            "circuit_vs_fixed_point_W": rel(rates[:n_e], fp_W),
            "original_vs_fixed_point_W": rel(orig, fp_W),
            "circuit_vs_original": rel(rates[:n_e], orig),
            "reconstruction_error": rel(circuit.effective_weights(), W)}


# --- report and demo ---------------------------------------------------------

PATH_MAX_UNITS = 600  # the report's lam path re-solves robust PCA 8 times


def _render(circuit, meta, W, L, features, positions):
    from .analysis.report import render_report
    from .decompose import lambda_path

    points = None
    if W.shape[0] <= PATH_MAX_UNITS:
        # a figure, not a result: a looser tolerance and an iteration cap;
        # rank and sparsity are settled long before either stops
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            points, _ = lambda_path(W, n_lams=8, tol=1e-6, max_iter=1000)
    return render_report(circuit, meta, W, low_rank=L, features=features,
                         positions=positions, path_points=points)


def run_report(bundle, output, *, force=False):
    """Write the HTML report of a circuit bundle to ``output``."""
    from .io import read_circuit, write_file

    out = Path(output)
    if out.exists() and not force:
        raise InputError(f"{out}: already exists; use --force to replace it")
    circuit, meta = read_circuit(bundle)
    bundle = Path(bundle)

    def optional(name):
        p = bundle / name
        return np.load(p, allow_pickle=False) if p.is_file() else None

    L = optional("low_rank.npy")
    S = optional("sparse.npy")
    W = L + S if L is not None and S is not None else circuit.effective_weights()
    page = _render(circuit, meta, W, L, optional("features.npy"),
                   optional("positions.npy"))
    return write_file(out, page.encode("utf-8"), force=force)


def demo_inputs(seed=7):
    """The invented demo: the example matrix and a unit table for it.

    Units are laid out along a line of cortex by preferred orientation (4 um
    per degree, with 20 um of jitter across), a scenario of our own, so
    like-to-like connections are also local ones.
    """
    W, theta = datasets.example_lateral(seed=seed)
    rng = np.random.default_rng(seed)
    x = 4.0 * theta
    y = rng.normal(0.0, 20.0, len(theta))
    rows = zip(theta.tolist(), x.tolist(), y.tolist(), strict=True)
    lines = ["id,feature,x,y"] + [f"unit{i:03d},{t!r},{a!r},{b!r}"
                                  for i, (t, a, b) in enumerate(rows)]
    return W, "\n".join(lines) + "\n"


def run_demo(output, *, force=False, progress=None):
    """Write the demo inputs and run decompose + assemble + report on them."""
    import tempfile

    out = Path(output)
    if out.exists() and not force:
        raise InputError(f"{out}: already exists; use --force to replace it")
    W, units_csv = demo_inputs()
    with tempfile.TemporaryDirectory() as tmp:
        np.save(Path(tmp) / "demo_weights.npy", W)
        (Path(tmp) / "demo_units.csv").write_text(units_csv, encoding="utf-8")
        config = AssembleConfig(input=str(Path(tmp) / "demo_weights.npy"),
                                output=str(out), units=str(Path(tmp) /
                                                           "demo_units.csv"),
                                ignore_diagonal=True, report=True, force=force)
        # the inputs go beside the bundle's files, for the reader, in the
        # same all-or-nothing write
        inputs = {name: (Path(tmp) / name).read_bytes()
                  for name in ("demo_weights.npy", "demo_units.csv")}
        return run_assemble(config, stage_progress=progress, extra_files=inputs)
