"""Robust PCA: split a weight matrix into low-rank and sparse parts.

Public names: :func:`robust_pca` (one solve), :func:`lambda_path` (a sweep over
lam), :func:`default_lam`, :func:`pcp_objective` and the estimator
:class:`RobustPCA`. The numerics live in private modules that take and return
arrays: ``_ialm`` (inexact ALM), ``_svt`` (singular value thresholding),
``_convex`` (cvxpy programs).
"""

from ._api import default_lam, lambda_path, pcp_objective, robust_pca
from .estimator import RobustPCA

__all__ = ["RobustPCA", "default_lam", "lambda_path", "pcp_objective",
           "robust_pca"]
