"""Principal Component Pursuit and its variants as convex programs, solved by
cvxpy to the chosen solver's tolerance.

Three programs, all over L, S of W's shape, with Omega the observed entries:

* PCP (Candes, Li, Ma, Wright 2011: eq. 1.1 with every entry observed, their
  missing-entries program, Theorem 1.2 from memory, with some left out):
  min ||L||_* + lam ||P_Omega S||_1  s.t.  P_Omega(L + S) = P_Omega(W);
* stable PCP (Zhou, Li, Wright, Candes, Ma 2010; the program from memory):
  the same objective s.t. ||P_Omega(W - L - S)||_F <= delta;
* sign-constrained PCP: PCP with L <= 0 entrywise, a low-rank part that may
  only inhibit (what the circuit builder maps onto interneurons).

cvxpy is imported inside the functions: it is slow to import and only these
programs need it. The solver is always named; Clarabel (interior point) is the
default, SCS (first order, looser) for larger problems.
"""

import warnings

import numpy as np

from ..errors import InputError, SolverError, SolverFallbackWarning
from ..limits import available_memory, size_text

__all__ = ["ConvexPCP", "convex_bytes", "largest_convex", "solve_convex"]

SOLVERS = ("CLARABEL", "SCS")
_MAX_ITER_KEYWORD = {"CLARABEL": "max_iter", "SCS": "max_iters"}  # cvxpy's names

# Peak memory of one solve beside the input, measured (peak RSS less the
# process's before the solve, numpy + cvxpy imported; cvxpy 1.9, Clarabel
# 0.11, SCS 3.2) on planted rank-2 matrices:
#   CLARABEL  40 x 40: 557 MB, 60 x 60: 2,666 MB = 6.6 and 6.3 x 8 d^2 bytes,
#             d = (m + n)(m + n + 1) / 2 the entries of the PSD cone that
#             cvxpy's nuclear norm becomes (an interior-point method factors
#             a dense d x d block of it; at 300 x 300 that block alone is
#             260 GB);
#   SCS       120 x 120: 175 MB, 200 x 200: 441 MB, 300 x 300: 964 MB =
#             12.2, 11.0, 10.7 KB per entry of W (cvxpy's canonical form).
_CLARABEL_BYTES_PER_D2 = 8 * 7.0
_SCS_BYTES_PER_ENTRY = 12_500


def solver_name(solver):
    """The name of one of SOLVERS, in capitals; an InputError otherwise."""
    name = str(solver).upper()
    if name not in SOLVERS:
        raise InputError(f"unknown convex solver {name!r}; choose one of "
                         f"{', '.join(SOLVERS)}")
    return name


def convex_bytes(shape, solver=SOLVERS[0]):
    """Bytes one convex PCP solve with ``solver`` needs for a matrix of
    ``shape`` (the measured model above, rounded up).

    >>> round(convex_bytes((300, 300), "CLARABEL") / 2**30)
    1695
    >>> round(convex_bytes((300, 300), "SCS") / 2**30, 2)
    1.05
    """
    m, n = (int(x) for x in shape)
    if solver.upper() == "SCS":
        return int(_SCS_BYTES_PER_ENTRY * m * n)
    d = (m + n) * (m + n + 1) // 2
    return int(_CLARABEL_BYTES_PER_D2 * d * d)


def largest_convex(limit, solver=SOLVERS[0]):
    """The largest n whose n x n convex program fits in ``limit`` bytes.

    >>> largest_convex(2**30, "CLARABEL")
    46
    """
    lo, hi = 0, 1
    while convex_bytes((hi, hi), solver) <= limit:
        lo, hi = hi, 2 * hi
    while hi - lo > 1:                  # convex_bytes(lo) fits, hi does not
        mid = (lo + hi) // 2
        lo, hi = (mid, hi) if convex_bytes((mid, mid), solver) <= limit \
            else (lo, mid)
    return lo


class ConvexPCP:
    """A PCP program built once, with lam a ``cp.Parameter`` for sweeps.

    Parameters
    ----------
    W : ndarray of shape (m, n)
    observed : ndarray of bool or None
    delta : float or None
        Noise bound of stable PCP; None for exact equality.
    low_rank_sign : {None, "nonpositive"}
    """

    def __init__(self, W, *, observed=None, delta=None, low_rank_sign=None):
        import cvxpy as cp

        self._cp = cp
        m, n = self.shape = W.shape
        self.L = cp.Variable((m, n), name="L")
        self.S = cp.Variable((m, n), name="S")
        self.lam = cp.Parameter(nonneg=True, name="lam", value=1.0)
        if observed is None or observed.all():
            mask = None
            resid = W - self.L - self.S
            l1 = cp.sum(cp.abs(self.S))
        else:
            mask = observed.astype(float)
            resid = cp.multiply(mask, W - self.L - self.S)
            l1 = cp.sum(cp.abs(cp.multiply(mask, self.S)))
        if delta is None:
            self.coupling = resid == 0
        else:
            self.coupling = cp.norm(resid, "fro") <= float(delta)
        constraints = [self.coupling]
        if mask is not None:  # S carries nothing where W is not observed
            constraints.append(cp.multiply(1.0 - mask, self.S) == 0)
        if low_rank_sign == "nonpositive":
            constraints.append(self.L <= 0)
        self.problem = cp.Problem(cp.Minimize(cp.normNuc(self.L) + self.lam * l1),
                                  constraints)
        self.equality = delta is None

    def solve(self, lam, *, solver=SOLVERS[0], max_iter=None, verbose=False,
              fallback=True):
        """Solve at ``lam``; returns (L, S, Y or None, info).

        When ``solver`` is not installed, raises, or ends without an
        optimal status, the other solver of SOLVERS is tried (with
        ``fallback``), and a SolverFallbackWarning says why; info["solver"]
        names the one that solved it. Both failing is a SolverError naming
        both reasons.
        """
        solver = solver_name(solver)
        order = [solver] + ([s for s in SOLVERS if s != solver] if fallback else [])
        reasons = []
        for name in order:
            if reasons and not self._fits(name):
                reasons.append(f"{name} was not tried: it needs about "
                               f"{size_text(convex_bytes(self.shape, name))}, "
                               f"more than {size_text(available_memory())} "
                               "available")
                continue
            try:
                out = self._solve_with(name, lam, max_iter, verbose)
            except SolverError as exc:
                reasons.append(str(exc))
                continue
            if reasons:
                warnings.warn(f"{reasons[0]}; solved with {name} instead",
                              SolverFallbackWarning, stacklevel=3)
                out[3]["fallback_from"] = reasons[0]
            return out
        raise SolverError("; ".join(reasons))

    def _fits(self, solver):
        """Whether the solver's own problem fits in the memory available
        (the check robust_pca makes for the solver asked for, made again
        before a fallback)."""
        have = available_memory()
        return not have or convex_bytes(self.shape, solver) <= have

    def _solve_with(self, solver, lam, max_iter, verbose):
        cp = self._cp
        if solver not in cp.installed_solvers():
            raise SolverError(f"cvxpy solver {solver} is not installed")
        self.lam.value = float(lam)
        kwargs = {}
        if max_iter is not None:
            kwargs[_MAX_ITER_KEYWORD[solver]] = int(max_iter)
        try:
            self.problem.solve(solver=solver, verbose=verbose, **kwargs)
        except cp.error.SolverError as exc:
            first = (str(exc).splitlines() or ["no message"])[0]
            raise SolverError(f"cvxpy solver {solver} failed: {first}") from exc
        status = self.problem.status
        if status not in (cp.OPTIMAL, cp.OPTIMAL_INACCURATE):
            raise SolverError(f"cvxpy solver {solver} ended with status {status}")
        Y = None
        if self.equality and self.coupling.dual_value is not None:
            # cvxpy's multiplier of (W - L - S == 0); at the optimum it lies in
            # the subdifferentials of ||L||_* and lam ||S||_1 (the sign of the
            # convention does not change the two norms reported).
            Y = np.asarray(self.coupling.dual_value, dtype=float)
        stats = self.problem.solver_stats
        info = {
            "status": status,
            "solver": solver,
            "n_iter": int(stats.num_iters or 0) if stats is not None else 0,
            "converged": status == cp.OPTIMAL,
            "solve_time": getattr(stats, "solve_time", None),
        }
        return (np.asarray(self.L.value, dtype=float),
                np.asarray(self.S.value, dtype=float), Y, info)


def solve_convex(W, lam, *, observed=None, delta=None, low_rank_sign=None,
                 solver=SOLVERS[0], max_iter=None):
    """Build and solve one convex PCP program; see :class:`ConvexPCP`."""
    program = ConvexPCP(W, observed=observed, delta=delta,
                        low_rank_sign=low_rank_sign)
    return program.solve(lam, solver=solver, max_iter=max_iter)
