"""eidecomp: from a signed lateral weight matrix to a Dale's-law circuit.

Matrices follow one convention throughout: W[post, pre], row = target neuron,
column = source neuron (docs/conventions.md).

Public names are imported here; nothing heavy is (cvxpy is imported only by
the convex solvers, matplotlib only by plotting).
"""

from ._version import __version__
from .assemble import assemble  # the function; the subpackage stays importable
from .decompose import (
    default_lam,
    lambda_path,
    pcp_objective,
    robust_pca,
    robust_pca_kernel,
)
from .errors import ConvergenceWarning, InputError, SolverError
from .io import read_circuit as load_circuit  # (Circuit, circuit.json) of a bundle
from .types import (
    AssemblyReport,
    Circuit,
    Decomposition,
    KernelDecomposition,
    OptimalityReport,
    PathPoint,
    Population,
)

__all__ = [
    "AssemblyReport",
    "Circuit",
    "ConvergenceWarning",
    "Decomposition",
    "InputError",
    "KernelDecomposition",
    "OptimalityReport",
    "PathPoint",
    "Population",
    "RobustPCA",
    "SolverError",
    "__version__",
    "assemble",
    "default_lam",
    "lambda_path",
    "load_circuit",
    "pcp_objective",
    "robust_pca",
    "robust_pca_kernel",
]


def __getattr__(name):
    if name == "RobustPCA":          # scikit-learn is imported on first use
        from .decompose.estimator import RobustPCA

        return RobustPCA
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
