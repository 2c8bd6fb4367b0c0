"""Small, frozen result objects shared across eidecomp.

Every matrix here follows the package convention W[post, pre]: row i is the
target neuron, column j the source (docs/conventions.md). Arrays stored in these
objects are made read-only, so a result cannot be changed after the fact.
"""

from dataclasses import dataclass, field

import numpy as np

__all__ = ["Decomposition", "OptimalityReport", "PathPoint"]


def _freeze(obj, *names):
    for name in names:
        value = getattr(obj, name)
        if value is not None:
            arr = np.array(value, copy=True)
            arr.flags.writeable = False
            object.__setattr__(obj, name, arr)


@dataclass(frozen=True)
class OptimalityReport:
    """How close a PCP solution is to optimal (Candes et al. 2011, KKT).

    (L, S) solves PCP iff a multiplier Y has spectral norm <= 1 with
    Y in the subdifferential of ||L||_*, and max norm <= lam with Y in the
    subdifferential of lam ||S||_1, while L + S = W on the observed entries.

    Attributes
    ----------
    objective : float
        ||L||_* + lam ||S||_1 (S on observed entries), recomputed by numpy.
    nuclear_norm, l1_norm : float
        The two terms, without the factor lam on the second.
    primal_residual : float
        ||P_Omega(W - L - S)||_F / ||P_Omega(W)||_F.
    dual_residual : float or None
        The solver's dual residual (ALM: mu ||S_k - S_{k-1}||_F / ||Y||_F);
        None for solvers that do not report one.
    multiplier_spectral_norm : float or None
        ||Y||_2; at the optimum at most 1.
    multiplier_max_norm_over_lam : float or None
        ||Y||_max / lam; at the optimum at most 1.
    n_iter : int
    converged : bool
    solver : str
    status : str
    """

    objective: float
    nuclear_norm: float
    l1_norm: float
    primal_residual: float
    dual_residual: float | None
    multiplier_spectral_norm: float | None
    multiplier_max_norm_over_lam: float | None
    n_iter: int
    converged: bool
    solver: str
    status: str

    def as_dict(self):
        return {k: getattr(self, k) for k in self.__dataclass_fields__}


@dataclass(frozen=True)
class Decomposition:
    """W = L + S on the observed entries: a low-rank and a sparse part.

    Attributes
    ----------
    low_rank : ndarray of shape (n_post, n_pre)
        L. On unobserved entries it is the completion of W.
    sparse : ndarray of shape (n_post, n_pre)
        S; zero on unobserved entries.
    rank : int
        Rank of L (singular values kept by the last thresholding, or, for
        convex solvers, those above ``rank_rtol`` times the largest).
    lam : float
        Weight of ||S||_1 in the objective.
    objective : float
    n_iter : int
    converged : bool
    history : tuple of tuple
        Per iteration ``(primal, dual, rank, mu)`` for the ALM solver; empty
        for the convex solvers.
    method : str
        ``"ialm"`` or ``"convex"``.
    report : OptimalityReport
    observed : ndarray of bool or None
        Observed entries; None when all are.
    """

    low_rank: np.ndarray
    sparse: np.ndarray
    rank: int
    lam: float
    objective: float
    n_iter: int
    converged: bool
    history: tuple = field(default=(), repr=False)
    method: str = "ialm"
    report: OptimalityReport | None = field(default=None, repr=False)
    observed: np.ndarray | None = field(default=None, repr=False)

    def __post_init__(self):
        _freeze(self, "low_rank", "sparse", "observed")
        if self.low_rank.shape != self.sparse.shape:
            raise ValueError("low_rank and sparse must have the same shape")

    @property
    def shape(self):
        return self.low_rank.shape

    @property
    def sparsity(self):
        """Fraction of observed entries where S is nonzero."""
        nz = self.sparse != 0
        if self.observed is not None:
            return float(nz[self.observed].mean()) if self.observed.any() else 0.0
        return float(nz.mean())


@dataclass(frozen=True)
class PathPoint:
    """One lam on a regularisation path."""

    lam: float
    rank: int
    sparsity: float
    nuclear_norm: float
    l1_norm: float
    primal_residual: float
    objective: float
    n_iter: int
    converged: bool

    def as_dict(self):
        return {k: getattr(self, k) for k in self.__dataclass_fields__}
