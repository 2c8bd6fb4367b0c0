"""Robust PCA as a scikit-learn estimator over :func:`eidecomp.robust_pca`."""

import numbers

import numpy as np
from sklearn.base import BaseEstimator, TransformerMixin
from sklearn.utils.validation import check_is_fitted, validate_data

from ..limits import dense_input
from ..params import default_lam
from ._api import METHODS, robust_pca
from ._convex import SOLVERS

__all__ = ["RobustPCA", "robust_projection"]

_SPARSE = ("csr", "csc", "coo")  # scipy.sparse formats taken as they are; the
                                # others are converted (and so checked) first
_IRLS_STEPS = 100      # iteratively reweighted least squares, at most
_IRLS_RTOL = 1e-10     # stop when no coefficient moves more than this x max|X|


def robust_projection(X, V, *, max_iter=_IRLS_STEPS):
    """The least-absolute-deviations fit of each row of X on the columns of
    V: ``C = argmin ||x - V c||_1`` row by row, returned as ``C @ V.T``.

    This is how a robust PCA's subspace is applied to new rows: a row that
    is a point of the subspace plus a few large outliers is recovered
    exactly (the l1 fit ignores sparse errors), where a least-squares
    projection would spread them over every entry. Solved by iteratively
    reweighted least squares (Schlossmacher 1973, J. Am. Stat. Assoc. 68,
    857), all rows at once.

    Parameters
    ----------
    X : ndarray of shape (n_rows, n_features)
    V : ndarray of shape (n_features, r)
        Orthonormal columns (the right singular vectors of a low-rank part).

    Examples
    --------
    >>> V = np.array([[1.0], [1.0], [1.0], [1.0]]) / 2
    >>> x = np.array([[2.0, 2.0, 2.0, 9.0]])        # 2 1^T plus an outlier
    >>> np.round(robust_projection(x, V), 6).tolist()
    [[2.0, 2.0, 2.0, 2.0]]
    """
    X = np.asarray(X, dtype=float)
    if V.shape[1] == 0 or X.size == 0:
        return np.zeros_like(X)
    scale = float(np.abs(X).max()) or 1.0
    floor = 1e-12 * scale               # residuals below this weigh as it
    C = X @ V                           # the least-squares start
    for _ in range(max_iter):
        w = 1.0 / np.maximum(np.abs(X - C @ V.T), floor)
        G = np.einsum("np,pr,ps->nrs", w, V, V)
        b = np.einsum("np,pr->nr", w * X, V)
        C_new = np.linalg.solve(G, b[..., None])[..., 0]
        moved = float(np.abs(C_new - C).max())
        C = C_new
        if moved <= _IRLS_RTOL * scale:
            break
    return C @ V.T


def _seed(random_state):
    """The integer seed of ``random_state``: an int as given, None as 0 (a
    fit is reproducible by default), a numpy Generator or RandomState as
    one integer drawn from it."""
    if random_state is None:
        return 0
    if isinstance(random_state, numbers.Integral):
        return int(random_state)
    if isinstance(random_state, np.random.Generator):
        return int(random_state.integers(2**31 - 1))
    if isinstance(random_state, np.random.RandomState):
        return int(random_state.randint(2**31 - 1))
    raise ValueError(f"random_state must be an int, None, a numpy Generator "
                     f"or RandomState, got {random_state!r}")


class RobustPCA(TransformerMixin, BaseEstimator):
    """Robust PCA (Principal Component Pursuit) as a scikit-learn estimator.

    :meth:`fit` splits X into a low-rank part and a sparse part with
    :func:`eidecomp.robust_pca` at the estimator's parameters, so the two
    always agree. For a weight matrix, X is W[post, pre]: rows are the
    samples, columns the features. It works with ``clone``,
    ``GridSearchCV`` and ``Pipeline``.

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
        The cvxpy solver of ``method="convex"``.
    random_state : int, numpy Generator, RandomState or None, default=None
        Seeds the solver's randomized SVD; None means seed 0, so that the
        same X gives the same split.
    stop : {"gap", "residuals"}, default="gap"
    gap_tol : float or None, default=None
        The stop rule and its certified gap, as in :func:`eidecomp.robust_pca`.

    Attributes
    ----------
    low_rank_ : ndarray of shape (n_samples, n_features)
    sparse_ : ndarray of shape (n_samples, n_features)
    components_ : ndarray of shape (rank_, n_features)
        An orthonormal basis of the low-rank part's row space (its right
        singular vectors), what :meth:`transform` projects onto.
    rank_ : int
    lam_ : float
        The lam used (the default resolved, or the one found for target_rank).
    n_iter_ : int
    converged_ : bool
    duality_gap_ : float or None
        The certified relative duality gap of the split.
    verdict_ : SplitVerdict
        Whether X is low-rank plus sparse at ``lam_``.
    n_features_in_ : int
    feature_names_in_ : ndarray of str
        Only when X has column names (a pandas DataFrame).
    decomposition_ : Decomposition

    Notes
    -----
    :meth:`transform` is the low-rank part of new rows: each row's least
    absolute deviations fit on ``components_`` (:func:`robust_projection`),
    so a row's sparse outliers do not leak into it. On the training rows it
    equals ``low_rank_`` where robust PCA recovers the split exactly, and is
    close to it otherwise; ``fit_transform`` is ``fit(X).transform(X)``.
    :meth:`score` is minus the PCP objective of the new rows and their
    low-rank part T, per entry: ``-(||T||_* + lam0 ||X - T||_1) / X.size``
    at the standard weight lam0 = 1 / sqrt(max(X.shape)) (Candes, Li, Ma and
    Wright 2011, eq. 1.1 and Theorem 1.1), whatever ``lam`` was fitted.
    Higher is better. A subspace too small leaves the low-rank rows in the
    l1 term, one too large moves the outliers into the nuclear norm, so
    ``GridSearchCV`` over ``lam`` prefers the lam whose subspace explains
    held-out rows as robust PCA would (a plain residual would only grow
    better with the rank).

    X may be a scipy.sparse matrix (densified: the solvers work on dense
    arrays) or a pandas DataFrame (its column names are kept as
    ``feature_names_in_``).

    Examples
    --------
    >>> import numpy as np
    >>> from eidecomp import RobustPCA
    >>> W = np.outer(np.arange(1.0, 21.0), np.ones(20))
    >>> W[3, 5] += 50.0
    >>> est = RobustPCA().fit(W)
    >>> est.rank_, bool(abs(est.sparse_[3, 5] - 50.0) < 1e-4)
    (1, True)
    >>> new = np.full((1, 20), 7.0); new[0, 2] = -30.0
    >>> bool(np.allclose(est.transform(new), 7.0))
    True
    """

    def __init__(self, lam=None, *, method=METHODS[0], tol=None, max_iter=None,
                 target_rank=None, solver=SOLVERS[0], random_state=None,
                 stop="gap", gap_tol=None):
        self.lam = lam
        self.method = method
        self.tol = tol
        self.stop = stop
        self.gap_tol = gap_tol
        self.max_iter = max_iter
        self.target_rank = target_rank
        self.solver = solver
        self.random_state = random_state

    def __sklearn_tags__(self):
        tags = super().__sklearn_tags__()
        tags.input_tags.allow_nan = False
        tags.input_tags.sparse = True
        return tags

    def fit(self, X, y=None, *, observed=None, ignore_diagonal=False):
        """Split X into low-rank and sparse parts; returns self.

        ``observed`` (True where an entry of X is observed) and
        ``ignore_diagonal`` are
        those of :func:`eidecomp.robust_pca`.
        """
        X = validate_data(self, X, dtype=np.float64, accept_sparse=_SPARSE,
                          ensure_min_samples=1, ensure_min_features=1)
        dec = robust_pca(X, lam=self.lam, method=self.method, tol=self.tol,
                         max_iter=self.max_iter, target_rank=self.target_rank,
                         solver=self.solver, seed=_seed(self.random_state),
                         observed=observed, ignore_diagonal=ignore_diagonal,
                         stop=self.stop, gap_tol=self.gap_tol)
        self.decomposition_ = dec
        self.low_rank_ = dec.low_rank
        self.sparse_ = dec.sparse
        self.rank_ = dec.rank
        self.lam_ = dec.lam
        self.n_iter_ = dec.n_iter
        self.converged_ = dec.converged
        self.duality_gap_ = dec.report.duality_gap
        self.verdict_ = dec.verdict
        if dec.rank:
            self.components_ = np.linalg.svd(
                dec.low_rank, full_matrices=False)[2][:dec.rank]
        else:
            self.components_ = np.zeros((0, X.shape[1]))
        return self

    def transform(self, X):
        """The low-rank part of the rows of X (see Notes)."""
        return robust_projection(self._rows(X), self.components_.T)

    def score(self, X, y=None):
        """Minus the PCP objective per entry of X's rows and their low-rank
        part, at the standard weight (see Notes); higher is better."""
        X = self._rows(X)
        T = robust_projection(X, self.components_.T)
        nuclear = float(np.linalg.svd(T, compute_uv=False).sum())
        return -(nuclear + default_lam(X.shape) * float(np.abs(X - T).sum())) \
            / X.size

    def _rows(self, X):
        """New rows, validated against the fit, as a dense float64 array."""
        check_is_fitted(self)
        X = validate_data(self, X, dtype=np.float64, accept_sparse=_SPARSE,
                          reset=False)
        return dense_input(X, "X")
