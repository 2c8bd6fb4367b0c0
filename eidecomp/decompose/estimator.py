"""A scikit-learn style estimator over :func:`eidecomp.robust_pca`."""

from ._api import robust_pca

__all__ = ["RobustPCA"]


class RobustPCA:
    """Robust PCA (Principal Component Pursuit) as an estimator.

    The constructor only stores its arguments; :meth:`fit` calls
    :func:`eidecomp.robust_pca` with them, so the two always agree.

    Parameters
    ----------
    lam : float or None, default=None
        Weight of the l1 term; None means 1 / sqrt(max(m, n)).
    method : {"ialm", "convex"}, default="ialm"
    tol : float or None, default=None
        None: the working dtype's default (eidecomp.params.TOL).
    max_iter : int or None, default=None
    target_rank : int or None, default=None
    solver : str, default="CLARABEL"
    seed : int, default=0

    Attributes
    ----------
    low_rank_ : ndarray of shape (n_post, n_pre)
    sparse_ : ndarray of shape (n_post, n_pre)
    rank_ : int
    lam_ : float
        The lam used (the default resolved, or the one found for target_rank).
    n_iter_ : int
    converged_ : bool
    decomposition_ : Decomposition

    Examples
    --------
    >>> import numpy as np
    >>> from eidecomp import RobustPCA
    >>> W = np.outer(np.arange(1.0, 21.0), np.ones(20))
    >>> W[3, 5] += 50.0
    >>> est = RobustPCA().fit(W)
    >>> est.rank_, bool(abs(est.sparse_[3, 5] - 50.0) < 1e-4)
    (1, True)
    """

    def __init__(self, lam=None, *, method="ialm", tol=None, max_iter=None,
                 target_rank=None, solver="CLARABEL", seed=0):
        self.lam = lam
        self.method = method
        self.tol = tol
        self.max_iter = max_iter
        self.target_rank = target_rank
        self.solver = solver
        self.seed = seed

    def fit(self, W, y=None, *, mask=None, ignore_diagonal=False):
        """Decompose W; returns self."""
        dec = robust_pca(W, lam=self.lam, method=self.method, tol=self.tol,
                         max_iter=self.max_iter, target_rank=self.target_rank,
                         solver=self.solver, seed=self.seed, mask=mask,
                         ignore_diagonal=ignore_diagonal)
        self.decomposition_ = dec
        self.low_rank_ = dec.low_rank
        self.sparse_ = dec.sparse
        self.rank_ = dec.rank
        self.lam_ = dec.lam
        self.n_iter_ = dec.n_iter
        self.converged_ = dec.converged
        return self

    def fit_transform(self, W, y=None, **kwargs):
        """Decompose W; returns the low-rank part."""
        return self.fit(W, **kwargs).low_rank_
