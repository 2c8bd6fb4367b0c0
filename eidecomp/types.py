"""Small, frozen result objects shared across eidecomp.

Every matrix here follows the package convention W[post, pre]: row i is the
target neuron, column j the source (docs/conventions.md). Arrays stored in these
objects are made read-only, so a result cannot be changed after the fact.
"""

from contextlib import contextmanager
from contextvars import ContextVar
from dataclasses import dataclass, field

import numpy as np

__all__ = [
    "BLOCKS",
    "BLOCK_NAMES",
    "II_BLOCK_NAMES",
    "EXCITATORY",
    "POPULATION_NAMES",
    "TUNED",
    "UNTUNED",
    "AssemblyReport",
    "Block",
    "BaselineResult",
    "Circuit",
    "Decomposition",
    "KernelDecomposition",
    "OptimalityReport",
    "PathPoint",
    "Population",
    "SplitVerdict",
    "active_interneurons",
]


_ADOPTING = ContextVar("eidecomp_adopting_arrays", default=False)


@contextmanager
def adopting_arrays():
    """Within this block, results adopt their arrays without copying them.

    For eidecomp's own solvers, which build the arrays and drop every other
    reference: a copy of a 20,000-unit matrix is 3.2 GB. Outside it (the
    default) the arrays are copied, so a caller's later change to its own
    array cannot reach a result. The setting is a context variable: it holds
    in this thread (or task) only.
    """
    token = _ADOPTING.set(True)
    try:
        yield
    finally:
        _ADOPTING.reset(token)


def _freeze(obj, *names):
    for name in names:
        value = getattr(obj, name)
        if value is not None:
            if _ADOPTING.get() and isinstance(value, np.ndarray):
                arr = value
            else:
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
        An upper bound on ||Y||_2 within 1e-6 of it (exact singular values
        for small Y, Lanczos with a residual bound above;
        ``decompose._norms``); at the optimum at most 1.
    multiplier_max_norm_over_lam : float or None
        ||Y||_max / lam; at the optimum at most 1.
    n_iter : int
    converged : bool
    solver : str
    status : str
    duality_gap : float or None
        Certified relative duality gap (``decompose._certificate``):
        (p - d) / p, p the objective of the feasible split
        (L, P_Omega(W - L)) and d a proved lower bound on the optimum f*, so
        (p - f*) / p <= gap (and (p - f*) / f* <= gap / (1 - gap)). None
        where no multiplier is known.
    dual_objective : float or None
        The lower bound on the optimal objective behind the gap.
    stop : str
        For a converged ALM solve, the test that ended it (``"residuals"``
        or ``"gap"``); for one that did not converge, the rule in force
        (``status`` says why it stopped); for a convex program, its solver.
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
    duality_gap: float | None = None
    dual_objective: float | None = None
    stop: str = "residuals"

    def as_dict(self):
        return {k: getattr(self, k) for k in self.__dataclass_fields__}


@dataclass(frozen=True)
class SplitVerdict:
    """Whether W is low-rank plus sparse at one lam, in numbers and one line.

    Attributes
    ----------
    fits : bool
        True when every rule of ``params.FIT_RULES`` holds.
    rank : int
    rank_share : float
        The reported rank over min(m, n).
    support_density : float
    rank_band : int
    lam : float
    reasons : tuple of str
        The rules that failed, in words.
    suggested_lam : float or None
        Where a lam path finds the rank and the support settled and the
        rules met (:func:`eidecomp.decompose.settled_lam`); None when no
        path was run or none settled.
    path_checked : bool
        A lam path was run for ``suggested_lam``.
    n_small : int
        min(m, n), what the rank is a share of.
    converged : bool
        Whether the judged split's solve converged.
    line : str
        The plain sentence every output shows.
    """

    fits: bool
    rank: int
    rank_share: float
    support_density: float
    rank_band: int | None
    lam: float
    reasons: tuple = ()
    suggested_lam: float | None = None
    path_checked: bool = False
    n_small: int = 0
    converged: bool = True
    line: str = ""

    def as_dict(self):
        return {k: (list(v) if isinstance(v, tuple) else v)
                for k, v in ((k, getattr(self, k))
                             for k in self.__dataclass_fields__)}


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
        The reported rank of L, one rule for every method: its singular
        values above ``params.REPORTED_RANK_RTOL`` times the largest
        (docs/robust_pca.md, "The rank"). L itself keeps every value above
        the solver's noise floor (``params.RANK_RTOL``).
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
    unit_ids : tuple of str or None
        The units' labels, from a labelled W (a DataFrame whose index and
        columns agree: :func:`eidecomp.names.unit_labels`).
    rank_band : int or None
        Singular values of L between the noise floor and the reported-rank
        cut: many of them mean L's spectrum trails off with no edge (None in
        float32, whose noise floor is the cut).
    support_density : float or None
        Fraction of observed entries with |S_ij| above
        ``params.SUPPORT_RTOL`` times max|W| (the reported support).
    verdict : SplitVerdict or None
        Whether W is low-rank plus sparse at this lam
        (:func:`eidecomp.decompose.judge_split`).
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
    unit_ids: tuple | None = field(default=None, repr=False)
    rank_band: int | None = 0
    support_density: float | None = None
    verdict: "SplitVerdict | None" = field(default=None, repr=False)

    def __post_init__(self):
        _freeze(self, "low_rank", "sparse", "observed")
        if self.low_rank.shape != self.sparse.shape:
            raise ValueError("low_rank and sparse must have the same shape")

    @property
    def shape(self):
        return self.low_rank.shape

    def completed(self, W):
        """W where it was observed, L + S (the completion: S is zero there)
        where it was not; W itself when every entry was observed. What the
        circuit, its stability and its report take as W, so that a value
        left out of the split never enters them.

        >>> import numpy as np
        >>> dec = Decomposition(low_rank=np.full((2, 2), 0.5),
        ...                     sparse=np.zeros((2, 2)), rank=1, lam=1.0,
        ...                     objective=1.0, n_iter=1, converged=True,
        ...                     observed=~np.eye(2, dtype=bool))
        >>> dec.completed(np.zeros((2, 2))).tolist()
        [[0.5, 0.0], [0.0, 0.5]]
        """
        if self.observed is None:
            return W
        return np.where(self.observed, W,
                        np.add(self.low_rank, self.sparse, dtype=np.asarray(W).dtype))

    @property
    def sparsity(self):
        """Fraction of observed entries where S is nonzero."""
        nz = self.sparse != 0
        if self.observed is not None:
            return float(nz[self.observed].mean()) if self.observed.any() else 0.0
        return float(nz.mean())


@dataclass(frozen=True)
class KernelDecomposition:
    """PCP of a kernel tiled over a periodic grid, as kernels.

    Attributes
    ----------
    low_rank, sparse : ndarray (F, F, H, W)
        Full-grid kernels of L and S: entry [a, b, oy, ox] is the weight onto
        feature a from feature b at offset (oy, ox) mod the grid
        (eidecomp.kernels).
    ranks : ndarray (H, W) of int
        Rank of L's F x F Fourier block at each spatial frequency; the rank
        of the tiled L is their sum.
    lam, objective : float
        Objective of the tiled N x N problem, N = F H W.
    n_iter, converged, history
        As in Decomposition.
    grid : tuple (H, W)
    """

    low_rank: np.ndarray
    sparse: np.ndarray
    ranks: np.ndarray
    lam: float
    objective: float
    n_iter: int
    converged: bool
    grid: tuple
    history: tuple = field(default=(), repr=False)

    def __post_init__(self):
        _freeze(self, "low_rank", "sparse", "ranks")

    @property
    def rank(self):
        """Rank of the tiled low-rank matrix."""
        return int(self.ranks.sum())

    @property
    def n_units(self):
        return self.low_rank.shape[0] * self.grid[0] * self.grid[1]


@dataclass(frozen=True)
class PathPoint:
    """One lam on a regularisation path (``seconds``: the wall time of its
    solve)."""

    lam: float
    rank: int
    sparsity: float
    nuclear_norm: float
    l1_norm: float
    primal_residual: float
    objective: float
    n_iter: int
    converged: bool
    seconds: float = 0.0
    support_density: float | None = None
    rank_band: int = 0
    duality_gap: float | None = None

    def as_dict(self):
        return {k: getattr(self, k) for k in self.__dataclass_fields__}


# --- circuits ----------------------------------------------------------------

EXCITATORY, UNTUNED, TUNED = "excitatory", "untuned", "tuned"
POPULATION_NAMES = {EXCITATORY: "E", UNTUNED: "I_untuned", TUNED: "I_tuned"}
"""The one table of populations: kind -> name, in the order of every full
matrix (E, then untuned, then tuned). Graph, exports, bundles and the report
read it."""
_KINDS = tuple(POPULATION_NAMES)


@dataclass(frozen=True)
class Block:
    """One nonnegative block of a circuit: J[post, pre] from the ``pre``
    population onto the ``post`` one (kinds); the sign is the presynaptic
    population's (Dale's law)."""

    name: str
    post: str
    pre: str

    @property
    def post_name(self):
        return POPULATION_NAMES[self.post]

    @property
    def pre_name(self):
        return POPULATION_NAMES[self.pre]

    @property
    def sign(self):
        return 1 if self.pre == EXCITATORY else -1


BLOCKS = (Block("J_EE", EXCITATORY, EXCITATORY), Block("J_EU", EXCITATORY, UNTUNED),
          Block("J_UE", UNTUNED, EXCITATORY), Block("J_ET", EXCITATORY, TUNED),
          Block("J_TE", TUNED, EXCITATORY),
          Block("J_UU", UNTUNED, UNTUNED), Block("J_UT", UNTUNED, TUNED),
          Block("J_TU", TUNED, UNTUNED), Block("J_TT", TUNED, TUNED))
"""The one table of blocks (name, post, pre), in the order bundles store them:
the five every circuit has (:data:`BLOCK_NAMES`), then the four
inhibitory-to-inhibitory ones (:data:`II_BLOCK_NAMES`), zero unless the
circuit was built from a W's own inhibitory neurons."""
BLOCK_NAMES = tuple(b.name for b in BLOCKS[:5])
II_BLOCK_NAMES = tuple(b.name for b in BLOCKS[5:])


@dataclass(frozen=True)
class Population:
    """A population of a Dale's-law circuit.

    ``kind`` is ``"excitatory"``, ``"untuned"`` (untuned inhibitory) or
    ``"tuned"`` (tuned inhibitory); ``sign`` is the sign of every synapse its
    units make (+1 or -1).
    """

    name: str
    kind: str
    size: int

    def __post_init__(self):
        if self.kind not in _KINDS:
            raise ValueError(f"unknown population kind {self.kind!r}")
        if self.size < 0:
            raise ValueError("population size must be >= 0")

    @property
    def sign(self):
        return 1 if self.kind == EXCITATORY else -1


@dataclass(frozen=True)
class BaselineResult:
    """One reference construction, scored like the circuit.

    ``converged`` and ``kkt_residual`` are set for an iterative baseline
    (the plain factorisation): whether its solver met its tolerance, and
    its projected-gradient (KKT) residual relative to the gradient's scale;
    None for the exact constructions.
    """

    name: str
    description: str
    n_inhibitory: int
    relative_error: float
    ee_density: float
    converged: bool | None = None
    kkt_residual: float | None = None


@dataclass(frozen=True)
class GuardResult:
    """What the stability guard did (docs/assembly.md, "Stability guard"):
    the relative error and the circuit's spectral abscissa (per ms, at the
    default time constants) before and after, whether it ended stable, and
    its objective evaluations."""

    error_before: float
    error_after: float
    abscissa_before: float
    abscissa_after: float
    stable: bool
    evaluations: int


@dataclass(frozen=True)
class AssemblyReport:
    """What an assembly achieved and what it gave up.

    Attributes
    ----------
    relative_error : float
        ||W - W_eff||_F / ||W||_F.
    ee_density : float
        Fraction of nonzero entries of J_EE.
    share_rule : str
        How the untuned/tuned share was chosen, in words.
    baselines : tuple of BaselineResult
    n_iter : int
        Sweeps of the joint refinement.
    converged : bool
        Whether the refinement met its tolerance.
    history : tuple of float
        Objective after each sweep.
    notes : tuple of str
        Facts about this W worth saying (all zeros; no inhibition needed;
        fewer active interneurons than asked, and why).
    restarted : int
        Interneurons that lost every input or target during the fit and were
        started again on the largest inhibition left unexplained.
    floored : int
        Weights zeroed by the connection floor (params.CONNECTION_RTOL).
    dropped : tuple of (int, int, float)
        Positive entries of W that J_EE leaves out, of all positive
        entries, and the largest of them (in W's units): what the l1 weight
        alpha cost.
    ee_support : str or None
        Where J_EE was allowed weight (``params.EE_SUPPORTS``).
    autapses : int or None
        Self-connections in J_EE where W's diagonal is not positive.
    cancelling_share : float or None
        Share of J_EE's total weight on entries where W_ij <= 0: excitation
        that inhibition must cancel (0 under ee_support "positive"). None
        (with the two above): not audited.
    comparison : str
        Which construction reproduces W best at no more J_EE density than
        this circuit, and what the split adds (the first line of the
        command's summary and of the report); empty without baselines.
    guard : GuardResult or None
        What the stability guard changed; None when it did not run (W not
        stable, the circuit already stable, the guard switched off or the
        circuit too large for it).
    guard_limit : int or None
        The largest circuit the guard runs on, when this one is larger and
        the guard was on (so it did not run); None otherwise.
    """

    relative_error: float
    ee_density: float
    share_rule: str
    baselines: tuple = ()
    n_iter: int = 0
    converged: bool = True
    history: tuple = field(default=(), repr=False)
    notes: tuple = ()
    restarted: int = 0
    floored: int = 0
    dropped: tuple = (0, 0, 0.0)
    ee_support: str | None = None
    autapses: int | None = None
    cancelling_share: float | None = None
    comparison: str = ""
    guard: GuardResult | None = None
    guard_limit: int | None = None

    def as_dict(self):
        out = {k: getattr(self, k) for k in self.__dataclass_fields__}
        out["baselines"] = [b.__dict__.copy() for b in self.baselines]
        out["history"] = list(self.history)
        out["notes"] = list(self.notes)
        out["dropped"] = list(self.dropped)
        out["guard"] = None if self.guard is None else self.guard.__dict__.copy()
        return out


def active_interneurons(J_EI, J_IE, J_II=None):
    """Which interneurons are active: at least one target (a nonzero column
    of J_EI, or of J_II in a circuit of W's own neurons) and at least one
    input (a nonzero row of J_IE, or of J_II). The one rule for silent
    interneurons, after the connection floor (params.CONNECTION_RTOL) has
    zeroed what carries nothing.

    >>> active_interneurons(np.array([[1.0, 0.0]]), np.array([[1.0], [2.0]]))
    array([ True, False])
    """
    target = np.asarray(J_EI).any(axis=0)
    source = np.asarray(J_IE).any(axis=1)
    if J_II is not None:
        target |= np.asarray(J_II).any(axis=0)
        source |= np.asarray(J_II).any(axis=1)
    return target & source


@dataclass(frozen=True)
class Circuit:
    """An excitatory/inhibitory circuit obeying Dale's law.

    All blocks hold nonnegative magnitudes in the [post, pre] convention; the
    sign of a synapse is that of its presynaptic population. With N excitatory
    units, n_u untuned and n_t tuned interneurons:

    ============  ==========  =====================================
    block         shape       meaning
    ============  ==========  =====================================
    ``J_EE``      (N, N)      E -> E excitation
    ``J_EU``      (N, n_u)    untuned I -> E inhibition (magnitude)
    ``J_UE``      (n_u, N)    E -> untuned I excitation
    ``J_ET``      (N, n_t)    tuned I -> E inhibition (magnitude)
    ``J_TE``      (n_t, N)    E -> tuned I excitation
    ``J_UU``      (n_u, n_u)  untuned I -> untuned I inhibition
    ``J_UT``      (n_u, n_t)  tuned I -> untuned I inhibition
    ``J_TU``      (n_t, n_u)  untuned I -> tuned I inhibition
    ``J_TT``      (n_t, n_t)  tuned I -> tuned I inhibition
    ============  ==========  =====================================

    The four inhibitory-to-inhibitory blocks are zero (None given) unless
    the circuit is made of a W's own neurons.

    Units are ordered E, then untuned, then tuned, in every full matrix.
    ``w_index`` maps them to W's units:

    * None (an assembled circuit): the E units are W's units in W's order
      and the interneurons are added; the circuit reproduces W through
      W_eff (:meth:`reconstruction`);
    * a tuple of ints, one per unit of the full matrix (a circuit of W's own
      neurons, when W already obeys Dale's law): the W unit each one is;
      an interneuron divided in two to meet a ratio (docs/assembly.md)
      appears twice. The circuit reproduces W as its full matrix.

    ``unit_ids`` names the E units, from a labelled W; the exports write
    them unless given others.

    Examples
    --------
    >>> import numpy as np
    >>> c = Circuit(J_EE=np.eye(2), J_EU=np.ones((2, 1)), J_UE=np.ones((1, 2)),
    ...             J_ET=np.zeros((2, 0)), J_TE=np.zeros((0, 2)))
    >>> c.effective_weights()
    array([[ 0., -1.],
           [-1.,  0.]])
    >>> c.signed_weights()[:, 2]   # the interneuron's column: one sign
    array([-1., -1.,  0.])
    """

    J_EE: np.ndarray
    J_EU: np.ndarray
    J_UE: np.ndarray
    J_ET: np.ndarray
    J_TE: np.ndarray
    params: dict = field(default_factory=dict, repr=False)
    report: AssemblyReport | None = field(default=None, repr=False)
    unit_ids: tuple | None = field(default=None, repr=False)
    J_UU: np.ndarray | None = field(default=None, repr=False)
    J_UT: np.ndarray | None = field(default=None, repr=False)
    J_TU: np.ndarray | None = field(default=None, repr=False)
    J_TT: np.ndarray | None = field(default=None, repr=False)
    w_index: tuple | None = field(default=None, repr=False)

    def __post_init__(self):
        if self.unit_ids is not None:
            ids = tuple(str(u) for u in self.unit_ids)
            if len(ids) != np.shape(self.J_EE)[0]:
                raise ValueError(f"{len(ids)} unit ids for "
                                 f"{np.shape(self.J_EE)[0]} excitatory units")
            object.__setattr__(self, "unit_ids", ids)
        n_u, n_t = np.shape(self.J_EU)[1], np.shape(self.J_ET)[1]
        shapes = {"J_UU": (n_u, n_u), "J_UT": (n_u, n_t),
                  "J_TU": (n_t, n_u), "J_TT": (n_t, n_t)}
        for name in II_BLOCK_NAMES:
            if getattr(self, name) is None:
                object.__setattr__(self, name, np.zeros(shapes[name]))
        for name in BLOCK_NAMES + II_BLOCK_NAMES:
            a = np.asarray(getattr(self, name), dtype=float)
            if a.ndim != 2:
                raise ValueError(f"{name} must be 2-D")
            if not np.isfinite(a).all():
                raise ValueError(f"{name} has NaN or Inf entries")
            if (a < 0).any():
                raise ValueError(f"{name} has negative entries; blocks hold "
                                 "magnitudes and Dale's law gives the signs")
            object.__setattr__(self, name, a)
        _freeze(self, *BLOCK_NAMES, *II_BLOCK_NAMES)
        size = self.sizes
        for b in BLOCKS:
            shape = (size[b.post], size[b.pre])
            if getattr(self, b.name).shape != shape:
                raise ValueError(f"{b.name} has shape "
                                 f"{getattr(self, b.name).shape}, expected {shape}")
        if self.w_index is not None:
            index = tuple(int(i) for i in self.w_index)
            total = self.n_excitatory + self.n_inhibitory
            if len(index) != total or min(index, default=0) < 0:
                raise ValueError(f"w_index must give one W unit (>= 0) for each "
                                 f"of the {total} units, got {len(index)}")
            e = index[:self.n_excitatory]
            if (max(index, default=-1) >= len(index)  # cannot name them all
                    or set(index) != set(range(max(index, default=-1) + 1))
                    or len(set(e)) != len(e) or set(e) & set(index[len(e):])):
                raise ValueError("w_index must name every W unit at least once, "
                                 "each E unit once, and no unit as both E and I")
            object.__setattr__(self, "w_index", index)

    def named(self, unit_ids=None):
        """The E units' ids a writer uses: ``unit_ids`` when given, else the
        circuit's own (None: the units are unnamed)."""
        return self.unit_ids if unit_ids is None else unit_ids

    @property
    def n_excitatory(self):
        return self.J_EE.shape[0]

    @property
    def n_untuned(self):
        return self.J_EU.shape[1]

    @property
    def n_tuned(self):
        return self.J_ET.shape[1]

    @property
    def n_inhibitory(self):
        return self.n_untuned + self.n_tuned

    @property
    def sizes(self):
        """Population kind -> number of units."""
        return {EXCITATORY: self.J_EE.shape[0], UNTUNED: self.J_EU.shape[1],
                TUNED: self.J_ET.shape[1]}

    @property
    def populations(self):
        """The populations, in the order of every full matrix."""
        return tuple(Population(name, kind, self.sizes[kind])
                     for kind, name in POPULATION_NAMES.items())

    def slices(self):
        """Population name -> its slice of the units of a full matrix."""
        out, start = {}, 0
        for p in self.populations:
            out[p.name] = slice(start, start + p.size)
            start += p.size
        return out

    @property
    def J_EI(self):
        """All inhibitory-to-E magnitudes, untuned columns first."""
        return np.hstack([self.J_EU, self.J_ET])

    @property
    def J_IE(self):
        """All E-to-inhibitory weights, untuned rows first."""
        return np.vstack([self.J_UE, self.J_TE])

    @property
    def J_II(self):
        """All inhibitory-to-inhibitory magnitudes, untuned first."""
        return np.block([[self.J_UU, self.J_UT], [self.J_TU, self.J_TT]])

    @property
    def n_w_units(self):
        """How many units W has: the E units of an assembled circuit, every
        distinct unit of ``w_index`` for a circuit of W's own neurons."""
        if self.w_index is None:
            return self.n_excitatory
        return max(self.w_index, default=-1) + 1

    @property
    def own_neurons(self):
        """Whether the circuit is made of W's own neurons (``w_index``)."""
        return self.w_index is not None

    def signed_weights(self):
        """The full (N + n_I) square signed matrix W_full[post, pre].

        E columns are >= 0 and inhibitory columns <= 0 (Dale's law).
        """
        n, ni = self.n_excitatory, self.n_inhibitory
        full = np.zeros((n + ni, n + ni))
        full[:n, :n] = self.J_EE
        full[:n, n:] = -self.J_EI
        full[n:, :n] = self.J_IE
        full[n:, n:] -= self.J_II   # no -0.0 where J_II is 0
        return full

    def effective_weights(self):
        """E-to-E coupling at the interneurons' steady state (linear
        interneurons driven only by E): J_EE - J_EI (I + J_II)^-1 J_IE, which
        is J_EE - J_EU J_UE - J_ET J_TE without inhibitory-to-inhibitory
        synapses."""
        if not self.J_II.any():
            return self.J_EE - self.J_EU @ self.J_UE - self.J_ET @ self.J_TE
        return self.J_EE - self.J_EI @ np.linalg.solve(
            np.eye(self.n_inhibitory) + self.J_II, self.J_IE)

    def _first_of_each(self):
        """The first unit of the full matrix that is each W unit."""
        index = np.asarray(self.w_index)
        first = np.full(index.max() + 1 if index.size else 0, -1)
        for k in range(index.size - 1, -1, -1):
            first[index[k]] = k
        return first

    def e_units(self):
        """The W units the E units are, in order (all of W's units for an
        assembled circuit).

        >>> import numpy as np
        >>> c = Circuit(J_EE=np.zeros((1, 1)), J_EU=np.zeros((1, 1)),
        ...             J_UE=np.zeros((1, 1)), J_ET=np.zeros((1, 0)),
        ...             J_TE=np.zeros((0, 1)), w_index=(1, 0))
        >>> c.e_units()
        array([1])
        """
        if self.w_index is None:
            return np.arange(self.n_excitatory)
        return np.asarray(self.w_index[:self.n_excitatory])

    def reconstruction(self):
        """The circuit's counterpart of W, in W's units and order: W_eff for
        an assembled circuit; for one of W's own neurons, the full signed
        matrix with each W unit's inputs read from its first copy and its
        outputs summed over its copies (an interneuron divided in two).

        >>> import numpy as np
        >>> c = Circuit(J_EE=np.zeros((1, 1)), J_EU=np.full((1, 1), 2.0),
        ...             J_UE=np.ones((1, 1)), J_ET=np.zeros((1, 0)),
        ...             J_TE=np.zeros((0, 1)), w_index=(1, 0))
        >>> c.reconstruction()
        array([[ 0.,  1.],
               [-2.,  0.]])
        """
        if self.w_index is None:
            return self.effective_weights()
        full = self.signed_weights()
        first = self._first_of_each()
        out = np.zeros((first.size, first.size))
        for k, w in enumerate(self.w_index):   # outputs summed over copies
            out[:, w] += full[first, k]
        return out

    def full_drive(self, h):
        """The drive of every unit of the full matrix from a drive ``h`` of
        W's units (N values, or N x T: one column a segment): h on the E
        units and 0 on added interneurons, or each unit's own for a circuit
        of W's neurons."""
        h = np.asarray(h, dtype=float)
        if self.w_index is None:
            return np.concatenate([h, np.zeros((self.n_inhibitory,)
                                               + h.shape[1:])])
        return h[np.asarray(self.w_index)]

    def unit_taus(self, tau_e, tau_i):
        """The time constant of every unit of the full matrix: ``tau_e`` for
        the E units, ``tau_i`` for the interneurons."""
        return np.r_[np.full(self.n_excitatory, float(tau_e)),
                     np.full(self.n_inhibitory, float(tau_i))]

    def w_rates(self, rates):
        """W's units' rates from the rates of the full matrix's units: the E
        units' for an assembled circuit (W's units are its E units), each W
        unit's first copy for a circuit of W's neurons."""
        rates = np.asarray(rates)
        if self.w_index is None:
            return rates[:self.n_excitatory]
        return rates[self._first_of_each()]
