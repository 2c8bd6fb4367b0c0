"""Robust PCA: split a weight matrix into low-rank and sparse parts.

Public names: :func:`robust_pca` (one solve), :func:`lambda_path` (a sweep over
lam), :func:`judge_split` and :func:`suggest_lam` (is W low-rank plus sparse,
and at which lam), :func:`default_lam`, :func:`pcp_objective` and the estimator
:class:`RobustPCA`; :func:`leading_triplets` (a seeded randomized SVD, which
the assembler uses too). The numerics live in private modules that take and return
arrays: ``_ialm`` (inexact ALM), ``_svt`` (singular value thresholding),
``_convex`` (cvxpy programs), ``_circulant`` (the same ALM on the kernel of a
translation-invariant matrix); :func:`robust_pca_kernel` is its public entry.
"""

from ._api import (
    METHODS,
    default_lam,
    lambda_path,
    pcp_objective,
    robust_pca,
    suggest_lam,
)
from ._convex import SOLVERS
from ._dask_api import LOCAL_WORKERS, DaskDecomposition, robust_pca_dask
from ._kernel_api import robust_pca_kernel
from ._svt import leading_triplets
from ._verdict import judge_split, settled_lam


def __getattr__(name):
    # the estimator needs scikit-learn, whose import takes most of a second:
    # loaded on first use, so the command line starts without it (PEP 562)
    if name == "RobustPCA":
        from .estimator import RobustPCA

        return RobustPCA
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")

__all__ = ["LOCAL_WORKERS", "METHODS", "SOLVERS", "DaskDecomposition", "RobustPCA",
           "default_lam",
           "judge_split", "lambda_path", "leading_triplets", "pcp_objective",
           "robust_pca", "robust_pca_dask", "robust_pca_kernel", "settled_lam",
           "suggest_lam"]
