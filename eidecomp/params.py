"""The defaults and value objects every layer shares: one owner for each.

The library, the pipeline, the command line, the bundles and the report all
read their defaults here, and a value given by the user is resolved once
into one of these objects, which is then passed down:

- :func:`default_lam`, :func:`resolve_tol`, :data:`MAX_ITER`,
  :func:`resolve_dtype` and :class:`SolverSettings`: the robust PCA
  settings of every robust PCA solver (dense, kernel, dask);
- :class:`EIRatio`: the E:I ratio, parsed once, stored and shown in one form;
- :data:`TAU_E_MS`, :data:`TAU_I_MS`: the time constants of exports and
  simulations.

Imports nothing of eidecomp but its errors, so every layer may import it.
"""

import math
import re
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from .errors import InputError
from .grammar import NUMBER_BODY

__all__ = [
    "AGREEMENT_RTOL",
    "DEFAULT_PERIOD",
    "ALPHA_DEFAULT",
    "ALPHA_QUANTILE",
    "ALPHA_RULE",
    "SETTLE_TIME_CONSTANTS",
    "STABILITY_SCAN",
    "StabilityScan",
    "CONNECTION_RTOL",
    "DEFAULT_EI_RATIO",
    "DTYPES",
    "EE_SUPPORTS",
    "DEFAULT_EE_SUPPORT",
    "active_text",
    "silent_pool",
    "excitation_line",
    "guard_line",
    "own_stability_line",
    "labels_caveat",
    "GAP_TOL",
    "MAX_ITER",
    "PATH_GAP_TOL",
    "PRIMAL_TOL",
    "FAST_PHASE",
    "STRICT_SPLIT",
    "SETTLED",
    "STOP_RULES",
    "TAU_E_MS",
    "TAU_I_MS",
    "TOL",
    "RANK_RTOL",
    "REPORTED_RANK_RTOL",
    "MARGINAL_ABSCISSA",
    "STABILITY_MARGIN",
    "SUPPORT_RTOL",
    "FIT_RULES",
    "EIRatio",
    "SolverSettings",
    "check_lam",
    "check_stop",
    "positive_number",
    "default_lam",
    "resolve_dtype",
    "resolve_tol",
]

# --- robust PCA ------------------------------------------------------------------

DTYPES = {"float64": np.float64, "float32": np.float32}
TOL = {"float64": 1e-8, "float32": 1e-6}
"""Default tolerance on the ALM's relative primal and dual residuals, by
working dtype: float32 residuals bottom out near 1e-7."""
RANK_RTOL = {"float64": 1e-5, "float32": 1e-3}
"""The numerical-rank rule of every method and solver (docs/robust_pca.md):
a singular value of L at or below RANK_RTOL times the largest is zero, and L
is truncated to the values above it. A thousand times the dtype's TOL:
residuals of 1e-8 left L 7e-7 from the planted L0 on one planted matrix
(tests/test_acceleration.py), and a spurious value at 1.2e-6 of the largest."""
REPORTED_RANK_RTOL = 1e-3
"""The reported rank (``Decomposition.rank``): the singular values of L
above REPORTED_RANK_RTOL times the largest. L itself keeps every value above
:data:`RANK_RTOL` (the solver's noise floor), so its objective is the
solver's; the values between the two cuts are counted apart
(``Decomposition.rank_band``). The cut does not move with the stopping
tolerance: on natural-statistics matrices the values above it agree to three
digits from gap 1e-3 down, while the count above the noise floor grows with
every extra digit of the solve (docs/robust_pca.md, "The rank")."""
SUPPORT_RTOL = 1e-3
"""The reported support of S (``Decomposition.support_density``): entries with
|S_ij| above SUPPORT_RTOL times max|W|, for the same reason as
:data:`REPORTED_RANK_RTOL` (exact zeros of S fill in with each digit)."""
FIT_RULES = {"max_rank_share": 1 / 3, "max_support_density": 0.4,
             "max_band_share": 0.1, "min_band": 3}
"""When the split says W is low-rank plus sparse at this lam (our rule,
docs/robust_pca.md, "The verdict"): the reported rank at most a third of
min(m, n), S's reported support at most 40 % of the entries, and L's
spectrum with an edge (at most max(3, 10 % of the rank) singular values
between the noise floor and the reported-rank cut)."""

MAX_ITER = 5000
"""ALM iteration limit: planted problems stop in ~30, degenerate ones need
more."""

STOP_RULES = ("gap", "residuals")
"""How the ALM decides it is done (docs/robust_pca.md, "The stop").

Both rules stop when the primal and the dual residual are at most ``tol``
(default :data:`TOL`). ``"gap"`` (the default) also stops, once the solve has
left its fast, linearly converging phase, when the certified relative
duality gap is at most :data:`GAP_TOL` and the primal residual at most
:data:`PRIMAL_TOL`; ``converged`` then means the objective is proved within
that gap of the optimum. ``"residuals"`` (strict) has only the first test;
the gap is reported either way."""
GAP_TOL = {"float64": 5e-5, "float32": 5e-5}
"""Default bound on the certified relative duality gap (stop ``"gap"``): the
objective p of the feasible split (L, P_Omega(W - L)) is proved to satisfy
(p - f*) / p <= 5e-5, f* the optimum (``decompose._certificate``). Chosen by
measurement (docs/robust_pca.md, "The stop"): on natural-statistics matrices
the reported rank and support no longer change beyond a gap of 1e-3; at
1e-4 the objective on one row of benchmarks/hard.py (sparse coding, 256
units) was above tensorly's at its own stop, at 5e-5 no row's was. Near
their degenerate optima the certificate falls about as 1/k with the step
k, so each halving of this value costs about twice the steps. The float32
values are the float64 ones, not measured apart."""
PATH_GAP_TOL = 1e-3
"""The certified gap at which a lam path stops each point (the report's path
and ``suggest_lam``'s): the reported rank and support it shows have settled
there (docs/robust_pca.md, "The rank")."""
PRIMAL_TOL = {"float64": 5e-5, "float32": 5e-5}
"""The relative primal residual ||P_Omega(W - L - S)||_F / ||P_Omega W||_F
below which stop ``"gap"`` checks the gap (the returned S reproduces W to
this). Measured with :data:`GAP_TOL`: a smaller value only delays the first
check (393 steps instead of 290 on the 576-unit row of benchmarks/hard.py)."""
SETTLED = {"min_run": 3, "rank_step": 0.02, "support_step": 0.10}
"""Where a lam path settles (``decompose.settled_lam``, our rule): at least
``min_run`` consecutive points whose reported ranks differ by at most
max(1, ``rank_step`` of the rank) and whose supports by at most
``support_step`` of the support, relative."""
STRICT_SPLIT = {"max_rank_share": 0.2,
                "max_support_density": FIT_RULES["max_support_density"]}
"""Stop ``"gap"`` never ends a solve whose split so far has a reported rank
of at most a fifth of min(m, n) and S on at most 40 % of the entries: the
range of the planted recovery experiments (Candes, Li, Ma, Wright 2011,
section 4.1, rank/n up to 0.2 in benchmarks/hard.py), where the circuit is
built from L itself and L is kept to the strict tolerance (our rule)."""
FAST_PHASE = 2.0
"""Stop ``"gap"`` takes the gap only once the larger residual falls by less
than this factor over 20 steps (``_ialm.FAST_WINDOW``): while the ALM still
converges linearly (planted problems), the strict tolerance is a few steps
away and L is kept to it (recovery of a planted L0 to 1e-5 and better)."""


def default_lam(shape):
    """lam = 1 / sqrt(max(m, n)) (Candes, Li, Ma, Wright 2011, Theorem 1.1).

    >>> default_lam((100, 400))
    0.05
    """
    return 1.0 / math.sqrt(max(shape))


def positive_number(value, name):
    """``value`` as a positive finite float, or one InputError line.

    >>> positive_number("0.5", "lam")
    0.5
    """
    try:
        number = float(value)
    except (TypeError, ValueError):
        number = float("nan")
    if not (math.isfinite(number) and number > 0):
        raise InputError(f"{name} must be a positive finite number, got "
                         f"{value!r}")
    return number


def check_lam(lam):
    """``lam`` as a positive finite float, or InputError."""
    return positive_number(lam, "lam")


def resolve_dtype(dtype):
    """The numpy scalar type of a working dtype name (float64 or float32)."""
    try:
        name = dtype if isinstance(dtype, str) else np.dtype(dtype).name
    except TypeError:
        name = repr(dtype)
    if name not in DTYPES:
        raise InputError(f"dtype must be float64 or float32, got {dtype!r}")
    return DTYPES[name]


def resolve_tol(tol, dtype="float64"):
    """``tol``, or the default of the working dtype when it is None."""
    if tol is None:
        return TOL[np.dtype(resolve_dtype(dtype)).name]
    return positive_number(tol, "tol")


def check_stop(stop):
    """``stop`` if it is one of :data:`STOP_RULES`, else one InputError line."""
    if stop not in STOP_RULES:
        raise InputError(f"unknown stop rule {stop!r}; choose one of "
                         f"{', '.join(STOP_RULES)}")
    return stop


@dataclass(frozen=True)
class SolverSettings:
    """lam, tol, max_iter and dtype resolved once, for one matrix shape.

    ``gap_tol`` is None under the ``"residuals"`` stop.

    >>> s = SolverSettings.resolve((400, 400))
    >>> s.lam, s.stop, s.tol, s.gap_tol, s.max_iter, s.dtype
    (0.05, 'gap', 1e-08, 5e-05, 5000, 'float64')
    >>> s = SolverSettings.resolve((400, 400), stop="residuals")
    >>> s.tol, s.gap_tol
    (1e-08, None)
    >>> SolverSettings.resolve((400, 400), dtype="float32", stop="residuals").tol
    1e-06
    """

    lam: float
    tol: float
    max_iter: int
    dtype: str
    lam_is_default: bool = True
    stop: str = STOP_RULES[0]
    gap_tol: float | None = None  # resolve() fills it under "gap"

    @classmethod
    def resolve(cls, shape, *, lam=None, tol=None, max_iter=None,
                dtype="float64", stop="gap", gap_tol=None):
        name = np.dtype(resolve_dtype(dtype)).name
        stop = check_stop(stop)
        if stop == "gap":
            gap_tol = (GAP_TOL[name] if gap_tol is None
                       else positive_number(gap_tol, "gap tolerance"))
            if gap_tol >= 1:
                raise InputError(f"the gap tolerance is a fraction of the "
                                 f"objective below 1, got {gap_tol!r}")
        elif gap_tol is not None:
            raise InputError("a gap tolerance needs the stop rule 'gap'")
        if max_iter is not None and not (
                isinstance(max_iter, (int, np.integer))
                and not isinstance(max_iter, bool) and max_iter >= 1):
            raise InputError(f"max_iter must be a positive integer, got "
                             f"{max_iter!r}")
        return cls(lam=default_lam(shape) if lam is None else check_lam(lam),
                   tol=resolve_tol(tol, name),
                   max_iter=MAX_ITER if max_iter is None else int(max_iter),
                   dtype=name, lam_is_default=lam is None, stop=stop,
                   gap_tol=gap_tol)


# --- the E:I ratio ------------------------------------------------------------

_RATIO = re.compile(rf"[ \t]*({NUMBER_BODY})[ \t]*(?::[ \t]*({NUMBER_BODY})[ \t]*)?")
DEFAULT_EI_RATIO = "4:1"  # about four to one in cortex (common practice)


@dataclass(frozen=True)
class EIRatio:
    """An E:I ratio: excitatory units per interneuron, with the text it came
    from.

    ``text`` is the one stored form (circuit.json keeps it); ``value`` is
    E / I; ``str()`` is the one shown form.

    >>> r = EIRatio.parse("9:2")
    >>> r.text, r.value, str(r)
    ('9:2', 4.5, '9:2 (4.5 E per interneuron)')
    >>> EIRatio.parse(4).text
    '4:1'
    """

    text: str
    value: float

    @classmethod
    def parse(cls, spec):
        """From ``"4:1"``, ``"4"``, a number or an EIRatio."""
        if isinstance(spec, EIRatio):
            return spec
        if isinstance(spec, (int, float, np.integer, np.floating)) \
                and not isinstance(spec, bool):
            value = float(spec)
            text = f"{value:g}:1"
        else:
            m = _RATIO.fullmatch(str(spec))
            try:
                e = float(m.group(1))
                i = float(m.group(2)) if m.group(2) is not None else 1.0
            except (AttributeError, ValueError):
                raise InputError(f"E:I ratio {spec!r} is not a ratio like 4:1 "
                                 "or a number") from None
            if not i > 0:
                raise InputError(f"E:I ratio {spec!r}: the inhibitory side "
                                 "must be positive")
            value = e / i
            text = f"{e:g}:{i:g}"
        if not math.isfinite(value) or value <= 0:
            raise InputError(f"E:I ratio {spec!r} must be positive and finite")
        return cls(text=text, value=value)

    def __str__(self):
        return f"{self.text} ({self.value:g} E per interneuron)"

    def interneurons(self, n_e):
        """The interneuron count this ratio gives ``n_e`` E units:
        round(n_e / value), the one rule (range checks:
        eidecomp.assemble's inhibitory_count).

        >>> EIRatio.parse("9:2").interneurons(90)
        20
        """
        return int(round(n_e / self.value))


# --- what counts as a connection ---------------------------------------------

CONNECTION_RTOL = 1e-6
"""The one rule for what counts as a connection of an assembled circuit
(docs/assembly.md): a weight is kept when the strongest path through it
carries at least CONNECTION_RTOL times max|W|, and zeroed otherwise, before
anything is reported or exported. For J_EE the path is the weight itself;
for an interneuron's input J_IE[t, j] it is J_IE[t, j] max_i J_EI[i, t],
and for its output J_EI[i, t] it is J_EI[i, t] max_j J_IE[t, j], which the
balance of the two factors leaves unchanged. An interneuron is active when
it keeps at least one input and one target; the rule keeps both or neither."""


EE_SUPPORTS = ("positive", "any")
"""Where an assembled circuit's J_EE may carry weight (docs/assembly.md,
"Where excitation goes"): "positive", only where W_ij > 0 (and observed), so
no E to E synapse is made that inhibition must cancel and no autapse where
W's diagonal is zero, negative or unobserved; "any", the unconstrained
construction J_EE = max(W + J_EI J_IE - alpha, 0), which may place
excitation where W has none and cancel it by inhibition."""
DEFAULT_EE_SUPPORT = "positive"


def excitation_line(metrics):
    """One line on where J_EE sits, from a circuit's metrics (circuit.json,
    or AssemblyReport.as_dict()), for the command's summary and the report.
    A manifest without them (an older bundle, or a tiled circuit, whose
    kernel assembler does not audit them) says so.

    >>> for part in excitation_line({"ee_support": "positive", "autapses": 0,
    ...                              "cancelling_share": 0.0}).split("; "):
    ...     print(part)
    excitation: J_EE only where W > 0 (ee_support positive)
    autapses W lacks: 0
    J_EE weight where W <= 0: 0.0 %
    """
    if metrics.get("cancelling_share") is None:
        return ("excitation: not audited here (no autapse count or "
                "cancelling share recorded)")
    where = ("only where W > 0" if metrics.get("ee_support") == "positive"
             else "anywhere")
    return (f"excitation: J_EE {where} (ee_support "
            f"{metrics.get('ee_support', 'any')}); autapses W lacks: "
            f"{metrics.get('autapses', 0)}; J_EE weight where W <= 0: "
            f"{100 * metrics['cancelling_share']:.1f} %")


def guard_line(metrics):
    """One line on the stability guard from a circuit's metrics
    (circuit.json, or AssemblyReport.as_dict()), for the command's summary
    and the report; '' when it did not change the circuit.

    >>> line = guard_line({"guard": {"error_before": 0.118, "error_after": 0.18,
    ...     "abscissa_before": 0.17, "abscissa_after": -1e-05, "stable": True,
    ...     "evaluations": 330}})
    >>> line[:49]
    'stability guard: relative error 0.118 -> 0.18 in '
    >>> line[49:109]
    'making the circuit stable at tau_I/tau_E 0.5 (rightmost eige'

    """
    g = metrics.get("guard")
    if not g:
        return ""
    ratio = f"{TAU_I_MS / TAU_E_MS:.3g}"
    if not g.get("stable"):
        return (f"stability guard: could not make the circuit stable at "
                f"tau_I/tau_E {ratio} (rightmost eigenvalue "
                f"{g['abscissa_before']:.3g} per ms); the closest fit is kept")
    return (f"stability guard: relative error {g['error_before']:.3g} -> "
            f"{g['error_after']:.3g} in making the circuit stable at "
            f"tau_I/tau_E {ratio} (rightmost eigenvalue "
            f"{g['abscissa_before']:.3g} -> {g['abscissa_after']:.3g} per ms)")


class StabilityScan(NamedTuple):
    """Where the largest stable tau_I / tau_E is looked for: ``n_grid``
    ratios spaced evenly in log from ``lo`` to ``hi``, the crossing then
    narrowed to a factor 1 + ``rtol`` (eidecomp.dynamics.max_stable_tau_ratio)."""

    lo: float
    hi: float
    n_grid: int
    rtol: float


STABILITY_SCAN = StabilityScan(lo=1e-2, hi=1e2, n_grid=9, rtol=1e-3)
"""The scan of every stability summary, refusal and report (our choice: two
decades either side of equal time constants)."""


def tau_ratio_text(stability):
    """The largest stable tau_I / tau_E of circuit.json's stability section
    in words, the same for the command's summary and the report.

    >>> tau_ratio_text({"circuit_spectral_abscissa_equal_taus": -1.0,
    ...                 "max_stable_tau_ratio": None})
    'stable at every tau_I/tau_E from 0.01 to 100'
    >>> tau_ratio_text({"circuit_spectral_abscissa_equal_taus": 1.0,
    ...                 "max_stable_tau_ratio": 0.0})
    'unstable at every tau_I/tau_E from 0.01 to 100'
    """
    lo, hi = STABILITY_SCAN.lo, STABILITY_SCAN.hi
    ratio = stability.get("max_stable_tau_ratio")
    if stability.get("circuit_spectral_abscissa_equal_taus") is None:
        return "largest stable tau_I/tau_E not computed"
    if ratio is None:
        return f"stable at every tau_I/tau_E from {lo:g} to {hi:g}"
    if ratio < lo:
        return f"unstable at every tau_I/tau_E from {lo:g} to {hi:g}"
    return f"stable up to tau_I/tau_E = {ratio:.3g}"


def own_stability_line(stability):
    """Stability of a circuit of W's own neurons (circuit.json's stability
    section), at equal time constants (W's own dynamics) and at the
    default ratio, for the command's summary and the report.

    >>> print(own_stability_line({"circuit_spectral_abscissa_equal_taus": -0.1,
    ...                           "circuit_spectral_abscissa_default_taus": 0.2}))
    ... # doctest: +NORMALIZE_WHITESPACE
    stability (W's own neurons): stable at tau_I = tau_E, unstable at the
    default tau_I/tau_E 0.5
    """
    def said(a):
        return "stable" if a is not None and a < 0 else "unstable"

    equal = said(stability.get("circuit_spectral_abscissa_equal_taus"))
    default = said(stability.get("circuit_spectral_abscissa_default_taus"))
    return (f"stability (W's own neurons): {equal} at tau_I = tau_E, "
            f"{default} at the default tau_I/tau_E {TAU_I_MS / TAU_E_MS:g}")


def silent_pool(pool):
    """Whether an interneuron of circuit.json's interneurons list is silent
    (no input or no target): the count circuit.json's metrics and the
    headlines read."""
    inputs = pool.get("n_inputs", 1) + pool.get("n_inhibitory_inputs", 0)
    targets = pool.get("n_targets", 1) + pool.get("n_inhibitory_targets", 0)
    return inputs == 0 or targets == 0


def active_text(meta, kind):
    """A headline count of interneurons of ``kind`` ("untuned", "tuned")
    from circuit.json: 'n', or 'k active of n' when some are silent (no
    input or no target, its interneurons list), which count as neither.

    >>> active_text({"counts": {"tuned": 3}, "interneurons": [
    ...     {"kind": "tuned", "n_inputs": 0, "n_targets": 2}]}, "tuned")
    '2 active of 3'
    """
    n = meta.get("counts", {}).get(kind, 0)
    silent = sum(1 for p in meta.get("interneurons", ())
                 if p.get("kind") == kind and silent_pool(p))
    return f"{n - silent} active of {n}" if silent else f"{n}"


def labels_caveat(meta, before, after):
    """Beside the untuned/tuned counts, when the split's verdict
    (circuit.json decomposition.verdict) says W is not low-rank plus
    sparse; '' otherwise."""
    v = meta.get("decomposition", {}).get("verdict")
    if not v or v.get("fits", True):
        return ""
    return (f"{before}W is not low-rank plus sparse here, so 'untuned' and "
            f"'tuned' only name the two parts of this split{after}")

# --- the assembler's l1 weight on J_EE ---------------------------------------------

ALPHA_DEFAULT = 0.02
"""The default l1 weight on J_EE, times :data:`ALPHA_QUANTILE` of W's
positive entries (eidecomp.assemble's default_alpha; our choice)."""
ALPHA_QUANTILE = 0.95
"""The quantile of W's positive entries that scales the default alpha."""
ALPHA_RULE = (f"{ALPHA_DEFAULT:g} times the {ALPHA_QUANTILE:g} quantile of "
              "W's positive entries")
"""The default alpha in words, for the command's help and the docs."""

# --- time constants -------------------------------------------------------------

TAU_E_MS = 10.0
"""Time constant of the excitatory units, ms (common practice)."""
TAU_I_MS = 5.0
"""Time constant of the interneurons, ms: faster than E cells (common
practice)."""

SETTLE_TIME_CONSTANTS = 40
"""A run to a fixed point lasts this many time constants of the slowest
mode (rates within e^-40 of the fixed point), or of the slower population
when the linear dynamics are unstable: eidecomp.dynamics.simulate, the
simulation package and the exported rate scripts."""

MARGINAL_ABSCISSA = 1e-9
"""W counts as stable (for the stability guard and the benchmark's targets)
when the spectral abscissa of -I + W is below -MARGINAL_ABSCISSA: an
eigenvalue at 1 to rounding (the lateral weights -(Phi^T Phi - I) of an
overcomplete dictionary) is marginal, not stable."""

STABILITY_MARGIN = 0.01
"""The margin, in 1 / tau_E, that the stability guard's penalty holds the
circuit's eigenvalues to the left of 0 (docs/assembly.md, "Stability
guard"; our choice). The penalty is soft, so the rightmost eigenvalue ends
between -margin and 0 rather than past it; the error the guard costs grows
with the margin."""

DEFAULT_PERIOD = 180.0
"""Period of the units' features, degrees: orientation (360 for direction)."""

AGREEMENT_RTOL = 0.05
"""``eidecomp simulate`` says the circuit agrees with the original network
when the relative difference of their E rates is at most this (our choice,
printed with every verdict)."""
