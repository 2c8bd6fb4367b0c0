"""The jobs eidecomp runs, each from a config object: load, compute, save.

No argparse and no printing here: :mod:`eidecomp.cli` builds the config and
shows the result; a script can call these functions directly.
"""

import math
import warnings
from dataclasses import asdict, dataclass
from pathlib import Path

import numpy as np

from . import __version__, datasets
from .decompose import default_lam, robust_pca
from .errors import ConvergenceWarning, InputError
from .io import file_checksum, read_mask, read_matrix, write_folder

__all__ = ["DecomposeConfig", "DecomposeResult", "run_decompose"]

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
    tol: float = 1e-8
    max_iter: int | None = None
    seed: int = 0
    force: bool = False


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
                         seed=config.seed, progress=progress)
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
                                "max_iter", "seed")},
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
