"""eidecomp: from a signed lateral weight matrix to a Dale's-law circuit.

Matrices follow one convention throughout: W[post, pre], row = target neuron,
column = source neuron (docs/conventions.md).

Public names are imported here; nothing heavy is (cvxpy is imported only by
the convex solvers, matplotlib only by plotting).
"""

from .decompose import RobustPCA, default_lam, lambda_path, pcp_objective, robust_pca
from .errors import ConvergenceWarning, InputError, SolverError
from .types import Decomposition, OptimalityReport, PathPoint

__version__ = "0.1.0"

__all__ = [
    "ConvergenceWarning",
    "Decomposition",
    "InputError",
    "OptimalityReport",
    "PathPoint",
    "RobustPCA",
    "SolverError",
    "__version__",
    "default_lam",
    "lambda_path",
    "pcp_objective",
    "robust_pca",
]
