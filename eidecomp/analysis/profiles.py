"""Connection profiles: connection probability and mean weight against the
difference in preferred feature and against distance, per connection class
(the report's "Connection profiles"; not a simulator's wiring algorithm).

For a block J[post, pre] (nonnegative magnitudes) and a property of the
post and pre units, every (post, pre) pair falls in one bin of the
property's difference; in each bin the connection probability is the
fraction of pairs with J > 0 and the mean weight the mean of J over the
connected ones. Self-pairs of a square block (the same unit) are left out.

* Distance: p(d) = p0 exp(-d^2 / (2 sigma^2)) is fitted to the binned
  counts by binomial maximum likelihood (k connected of n pairs in each
  bin; common practice for a probability curve), giving the space constant
  sigma with a 95 % confidence interval sigma +- 1.96 se from the inverse
  Fisher information, widened by the dispersion phi = D / (bins - 2) when
  phi > 1 (D the deviance: twice the log-likelihood ratio of one
  probability per bin against the curve; the quasi-binomial correction of
  McCullagh & Nelder 1989, Generalized Linear Models, from memory), its
  degrees of freedom the bins with a connection or at least one expected,
  less two. The deviance, not Pearson's X^2, because a bin the curve puts near zero but
  that holds a connection would make X^2 arbitrarily large. Where D is
  improbable under the binomial model
  (:data:`LACK_OF_FIT_P`) the Gaussian does not describe the bins and the
  fit says so (``SpaceConstant.lack_of_fit``). A sigma is reported as a
  number only when the data bound it (``SpaceConstant.status``): an
  interval wider than the distances the profile covers, or reaching zero,
  is "not determined", and a sigma ten times beyond the largest binned
  distance is "no decay". A sigma beyond the largest binned distance, but
  not ten times beyond, is marked ``extrapolated``: the fit places it where
  no pair was binned.
* Every bin's probability carries its 95 % Clopper-Pearson interval
  (Clopper & Pearson 1934, Biometrika 26:404), the exact binomial interval
  that ``scipy.stats.binomtest(k, n).proportion_ci(method="exact")`` gives.
* Feature: the like-to-like index is the probability in the first bin
  (the same feature) over that in the last (the orthogonal one, half a
  period away). Where no orthogonal pair is connected the index has no
  finite value; :func:`like_to_like_bound` gives the lower bound the counts
  support, the same-feature probability over the one-sided 95 % upper
  Clopper-Pearson bound of the orthogonal one (0 of n connected).
  Pairs with the same preferred orientation connect about twice as often
  as orthogonal ones among layer 2/3 pyramidal cells of mouse V1 (Ko et
  al. 2011, Nature, doi:10.1038/nature09880; the factor from memory), a
  check value, not an input.
"""

import dataclasses
import warnings
from dataclasses import dataclass, field

import numpy as np

from ..params import DEFAULT_PERIOD
from ..types import active_interneurons
from .circular import circular_difference

__all__ = ["CLASSES", "CONFIDENCE", "DETERMINED", "FIT_SUBDIVISIONS",
           "NOT_DETERMINED", "NO_DECAY", "LACK_OF_FIT_P", "LACK_OF_FIT_TEXT",
           "NO_FIT", "Profile", "SpaceConstant", "circuit_profiles",
           "clopper_pearson", "connection_classes", "distance_profile",
           "extrapolated_text", "feature_profile", "fit_space_constant",
           "is_extrapolated", "like_to_like_bound", "like_to_like_index",
           "space_constant_status"]

FIT_SUBDIVISIONS = 16
"""Each distance bin is cut into this many for the space constant's
likelihood: the curve changes within a bin, and a bin's pairs are not all
at its centre (our choice; at 16, planted sigmas come back within their
intervals where 25 whole bins put them about 2 % too far out)."""

CONFIDENCE = 0.95
"""The confidence level of every interval the profiles give."""


def clopper_pearson(k, n, confidence=CONFIDENCE, *, side="two-sided"):
    """The exact binomial interval of k connected pairs out of n.

    Clopper & Pearson (1934), from beta quantiles: the lower end is the
    a-quantile of Beta(k, n - k + 1), the upper the (1 - a)-quantile of
    Beta(k + 1, n - k), with a = (1 - confidence) / 2 (``side``
    "two-sided") or 1 - confidence (``side`` "upper" or "lower": a one-sided
    bound, the other end 0 or 1). NaN where n is 0.

    >>> lo, hi = clopper_pearson(0, 20, side="upper")
    >>> float(lo), round(float(hi), 4)        # 1 - 0.05 ** (1 / 20)
    (0.0, 0.1391)
    """
    from scipy.stats import beta

    k = np.asarray(k, dtype=float)
    n = np.asarray(n, dtype=float)
    a = (1.0 - confidence) / (2.0 if side == "two-sided" else 1.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        low = np.where(k > 0, beta.ppf(a, k, n - k + 1), 0.0)
        high = np.where(k < n, beta.ppf(1.0 - a, k + 1, n - k), 1.0)
    if side == "upper":
        low = np.zeros_like(low)
    elif side == "lower":
        high = np.ones_like(high)
    empty = n <= 0
    return np.where(empty, np.nan, low), np.where(empty, np.nan, high)


@dataclass(frozen=True)
class Profile:
    """Binned connection probability and mean weight."""

    edges: np.ndarray
    probability: np.ndarray
    mean_weight: np.ndarray
    n_pairs: np.ndarray
    n_connected: np.ndarray
    quantity: str = field(default="")
    mean_difference: np.ndarray | None = None
    """Each bin's mean difference over its pairs (None: not recorded)."""
    fine: "Profile | None" = None
    """The same pairs in :data:`FIT_SUBDIVISIONS` times finer bins, for the
    space constant's likelihood (None: fit the bins themselves)."""

    @property
    def centers(self):
        return 0.5 * (self.edges[1:] + self.edges[:-1])

    @property
    def positions(self):
        """Where each bin's probability stands: the mean difference of its
        pairs where recorded, else the bin's centre. Pairs at distance d on
        a sheet grow in number with d, so a distance bin's pairs sit past
        its centre; a fit at the centres would put sigma too far out."""
        if self.mean_difference is None:
            return self.centers
        m = np.asarray(self.mean_difference, float)
        return np.where(np.isfinite(m), m, self.centers)

    def interval(self):
        """(low, high): each bin's 95 % Clopper-Pearson interval."""
        return clopper_pearson(self.n_connected, self.n_pairs)

    def as_dict(self):
        low, high = self.interval()
        return {"quantity": self.quantity, "edges": self.edges.tolist(),
                "probability": _nan_none(self.probability),
                "ci_low": _nan_none(low), "ci_high": _nan_none(high),
                "mean_weight": _nan_none(self.mean_weight),
                "positions": _nan_none(self.positions),
                "n_pairs": self.n_pairs.tolist(),
                "n_connected": self.n_connected.tolist()}


#: What a space-constant fit says, in the words the report shows.
DETERMINED, NOT_DETERMINED, NO_DECAY, NO_FIT = (
    "determined", "not determined", "no decay", "no fit")
NO_DECAY_FACTOR = 10.0  # sigma beyond this many times the largest distance
LACK_OF_FIT_P = 1e-3
"""A Gaussian whose deviance over the bins has a chi-square p-value below
this (bins - 2 degrees of freedom) does not describe the profile (our
threshold)."""


@dataclass(frozen=True)
class SpaceConstant:
    """A Gaussian fit p(d) = p0 exp(-d^2 / (2 sigma^2)).

    ``status`` says whether the data bound sigma: ``"determined"`` (its 95 %
    interval lies above zero and is no wider than ``span``, the largest
    distance the profile covers), ``"not determined"`` (wider, reaching
    zero, or no interval), ``"no decay"`` (sigma beyond ten times ``span``:
    flat over the sheet) or ``"no fit"``. ``extrapolated`` is True where a
    finite sigma lies beyond ``span`` (:func:`is_extrapolated`).
    ``dispersion`` is the fit's deviance over its degrees of freedom (about
    1 for binomial scatter around the curve), and ``lack_of_fit`` is True
    where the deviance is improbable under the binomial model (:data:`LACK_OF_FIT_P`):
    the bins do not follow a Gaussian of distance.
    """

    sigma: float
    ci_low: float
    ci_high: float
    p0: float
    ok: bool
    message: str = ""
    span: float = float("nan")
    status: str = NO_FIT
    extrapolated: bool = False
    dispersion: float = float("nan")
    lack_of_fit: bool = False

    def as_dict(self):
        return {k: (None if isinstance(v, float) and not np.isfinite(v) else v)
                for k, v in self.__dict__.items()}


def _nan_none(a):
    return [None if not np.isfinite(x) else float(x) for x in a]


def _binned(J, diff, edges, exclude_self, quantity):
    J = np.asarray(J, dtype=float)
    mask = np.ones(J.shape, bool)
    if exclude_self and J.shape[0] == J.shape[1]:
        np.fill_diagonal(mask, False)
    d, w = diff[mask], J[mask]
    idx = np.clip(np.searchsorted(edges, d, side="right") - 1, 0, len(edges) - 2)
    inside = (d >= edges[0]) & (d <= edges[-1])
    idx, w, d = idx[inside], w[inside], d[inside]
    nb = len(edges) - 1
    pairs = np.bincount(idx, minlength=nb)
    conn = np.bincount(idx, weights=(w > 0).astype(float), minlength=nb)
    wsum = np.bincount(idx, weights=w, minlength=nb)
    dsum = np.bincount(idx, weights=d, minlength=nb)
    with np.errstate(invalid="ignore", divide="ignore"):
        prob = np.where(pairs > 0, conn / pairs, np.nan)
        mean_w = np.where(conn > 0, wsum / conn, np.nan)
        mean_d = np.where(pairs > 0, dsum / pairs, np.nan)
    return Profile(np.asarray(edges, float), prob, mean_w, pairs,
                   conn.astype(int), quantity, mean_d)


def feature_profile(J, feature_post, feature_pre, *, period=DEFAULT_PERIOD, n_bins=6,
                    exclude_self=True):
    """Probability and mean weight against |feature difference| (circular).

    Bins of equal width over [0, period / 2]; the first is "same feature",
    the last "orthogonal".
    """
    diff = circular_difference(np.asarray(feature_post, float)[:, None],
                               np.asarray(feature_pre, float)[None, :], period)
    edges = np.linspace(0.0, period / 2, n_bins + 1)
    return _binned(J, diff, edges, exclude_self, "feature difference (deg)")


def distance_profile(J, pos_post, pos_pre, *, edges=None, n_bins=25,
                     exclude_self=True):
    """Probability and mean weight against distance between the units, with
    the same pairs in finer bins for the space constant's fit."""
    pos_post = np.asarray(pos_post, float)
    pos_pre = np.asarray(pos_pre, float)
    diff = np.sqrt(((pos_post[:, None, :] - pos_pre[None, :, :]) ** 2).sum(-1))
    if edges is None:
        top = float(np.quantile(diff, 0.95)) if diff.size else 1.0
        edges = np.linspace(0.0, max(top, 1e-12), n_bins + 1)
    edges = np.asarray(edges, float)
    cuts = [np.linspace(a, b, FIT_SUBDIVISIONS + 1)[:-1]
            for a, b in zip(edges[:-1], edges[1:], strict=True)]
    fine_edges = np.concatenate(cuts + [edges[-1:]])
    fine = _binned(J, diff, fine_edges, exclude_self, "distance (um)")
    return dataclasses.replace(
        _binned(J, diff, edges, exclude_self, "distance (um)"), fine=fine)


def fit_space_constant(profile):
    """Fit p0 exp(-d^2 / (2 sigma^2)) to a distance profile.

    Parameters
    ----------
    profile : Profile
        A :func:`distance_profile`.

    Returns
    -------
    SpaceConstant
        sigma, its 95 % interval, p0 and ``status`` (whether the data bound
        sigma).

    Examples
    --------
    >>> import numpy as np
    >>> edges = np.linspace(0.0, 500.0, 11)
    >>> d = 0.5 * (edges[1:] + edges[:-1])
    >>> n = np.full(10, 10000)
    >>> k = np.round(n * 0.3 * np.exp(-d ** 2 / (2 * 100.0 ** 2))).astype(int)
    >>> prof = Profile(edges, k / n, np.ones(10), n, k, "distance (um)")
    >>> fit = fit_space_constant(prof)
    >>> round(fit.sigma), fit.status
    (100, 'determined')
    """
    n = np.asarray(profile.n_pairs, dtype=float)
    k = np.asarray(profile.n_connected, dtype=float)
    top = float(profile.edges[-1])
    ok = n > 0
    if ok.sum() < 3 or not np.any(k[ok] > 0):
        return SpaceConstant(np.nan, np.nan, np.nan, np.nan, False,
                             "too few connected distance bins to fit", top)
    pairs = profile.fine if profile.fine is not None else profile
    x = pairs.positions
    group = np.clip(np.searchsorted(profile.edges, pairs.centers, side="right")
                    - 1, 0, len(n) - 1)
    used = np.asarray(pairs.n_pairs) > 0
    # the search's own warnings (overflow in exp far from the optimum) are
    # facts of this fit, not lines for the user
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        fit = _binomial_gaussian(
            x[used], np.asarray(pairs.n_connected, float)[used],
            np.asarray(pairs.n_pairs, float)[used], group[used], k, n)
    if fit is None:
        return SpaceConstant(np.nan, np.nan, np.nan, np.nan, False,
                             "the likelihood has no maximum", top)
    p0, sigma, err, phi, p_value = fit
    low, high = sigma - 1.96 * err, sigma + 1.96 * err
    lack = bool(p_value < LACK_OF_FIT_P)
    note = (f"deviance p-value {p_value:.2g}: the bins do not follow a "
            "Gaussian of distance" if lack else "")
    return SpaceConstant(sigma, low, high, p0, bool(np.isfinite(err)), note,
                         top, space_constant_status(sigma, low, high, top),
                         is_extrapolated(sigma, top), phi, lack)


def _binomial_gaussian(x, k, n, group, k_bins, n_bins):
    """(p0, sigma, se of sigma, dispersion, lack-of-fit p-value) of the
    binomial maximum-likelihood fit of p0 exp(-x^2 / (2 sigma^2)) to k of n
    at each x (fine bins), or None; the deviance and dispersion are taken
    over the report's bins (``k_bins`` of ``n_bins``; ``group``: the bin of
    each x), where counts are large enough for the chi-square law. Fitted
    over logit(p0) and log(sigma), so the bounds 0 < p0 < 1, sigma > 0 hold
    by construction."""
    from scipy.optimize import minimize
    from scipy.special import expit, logit
    from scipy.stats import chi2

    tiny = 1e-12
    p_hat = k / n
    above = x[p_hat >= p_hat.max() / np.e ** 0.5]
    start = np.array([logit(min(max(p_hat.max(), 1e-3), 1 - 1e-3)),
                      np.log(max(above.max(), x[1] - x[0]))])

    def curve(theta):
        e = np.exp(-x ** 2 / (2 * np.exp(2 * theta[1])))
        return np.clip(expit(theta[0]) * e, tiny, 1 - tiny)

    def nll(theta):
        p = curve(theta)
        return -float(np.sum(k * np.log(p) + (n - k) * np.log1p(-p)))

    best = None
    for method in ("Nelder-Mead", "BFGS"):  # a robust search, then polished
        res = minimize(nll, start if best is None else best.x, method=method,
                       **({"options": {"xatol": 1e-10, "fatol": 1e-12,
                                       "maxiter": 4000}}
                          if method == "Nelder-Mead" else {}))
        if np.all(np.isfinite(res.x)) and (best is None or res.fun <= best.fun):
            best = res
    if best is None:
        return None
    p0, sigma = float(expit(best.x[0])), float(np.exp(best.x[1]))
    e = np.exp(-x ** 2 / (2 * sigma ** 2))
    p = np.clip(p0 * e, tiny, 1 - tiny)
    grad = np.stack([e, p0 * e * x ** 2 / sigma ** 3])   # d p / d(p0, sigma)
    info = (grad * (n / (p * (1 - p)))) @ grad.T         # Fisher information
    # the deviance over the report's bins, each expecting the sum over its
    # fine bins; degrees of freedom: the bins that carry information (a
    # connection, or at least one expected), less two: far empty bins the
    # curve puts at zero add nothing to the deviance and would dilute it
    K, N = k_bins[n_bins > 0], n_bins[n_bins > 0]
    expected = np.bincount(group, weights=n * p, minlength=len(k_bins))
    P = np.clip(expected[n_bins > 0] / N, tiny, 1 - tiny)
    dof = max(int(np.sum((K > 0) | (N * P >= 1.0))) - 2, 1)
    with np.errstate(divide="ignore", invalid="ignore"):
        terms = (np.where(K > 0, K * np.log(K / (N * P)), 0.0)
                 + np.where(K < N, (N - K) * np.log((N - K) / (N * (1 - P))),
                            0.0))
    deviance = float(2.0 * np.sum(terms))
    phi = deviance / dof
    try:
        cov = np.linalg.inv(info) * max(phi, 1.0)
        err = float(np.sqrt(cov[1, 1])) if cov[1, 1] >= 0 else np.nan
    except np.linalg.LinAlgError:
        err = np.nan
    return p0, sigma, err, phi, float(chi2.sf(deviance, dof))


LACK_OF_FIT_TEXT = "the Gaussian misses the bins"
"""How the report and its figures mark a fit with ``lack_of_fit``."""


def extrapolated_text(span):
    """How the report and its figures mark an extrapolated sigma.

    >>> extrapolated_text(410.0)
    'extrapolated: binned only to 410 um'
    """
    return f"extrapolated: binned only to {span:.3g} um"


def is_extrapolated(sigma, span):
    """Whether a fitted sigma lies beyond the largest binned distance.

    >>> is_extrapolated(523.0, 410.0), is_extrapolated(100.0, 500.0)
    (True, False)
    """
    return bool(np.isfinite(sigma) and np.isfinite(span) and sigma > span)


def space_constant_status(sigma, ci_low, ci_high, span):
    """Whether a fitted sigma is bounded by the data (see :class:`SpaceConstant`).

    >>> space_constant_status(954.0, 273.0, 1640.0, 1000.0)   # wider than 1 mm
    'not determined'
    >>> space_constant_status(100.0, 80.0, 120.0, 1000.0)
    'determined'
    """
    if not np.isfinite(sigma):
        return NO_FIT
    if sigma > NO_DECAY_FACTOR * span:
        return NO_DECAY
    if not (np.isfinite(ci_low) and np.isfinite(ci_high)) or ci_low <= 0 \
            or ci_high - ci_low > span:
        return NOT_DETERMINED
    return DETERMINED


def like_to_like_index(profile):
    """Probability at the same feature over that at the orthogonal one:
    infinite where orthogonal pairs exist and none is connected, NaN where
    either bin has no pair (undefined)."""
    first, last = profile.probability[0], profile.probability[-1]
    if not (np.isfinite(first) and np.isfinite(last)) or \
            profile.n_pairs[0] == 0 or profile.n_pairs[-1] == 0:
        return float("nan")
    if last == 0:
        return float("inf") if first > 0 else float("nan")
    return float(first / last)


def like_to_like_bound(profile, confidence=CONFIDENCE):
    """The lower bound of the like-to-like index where it is infinite.

    With k > 0 of the same-feature pairs connected and none of the n
    orthogonal ones, the index is at least the same-feature probability
    over the one-sided ``confidence`` upper Clopper-Pearson bound of the
    orthogonal probability, 1 - (1 - confidence) ** (1 / n). None where the
    index is finite or undefined.

    >>> edges = np.array([0.0, 45.0, 90.0])
    >>> prof = Profile(edges, np.array([0.3, 0.0]), np.ones(2),
    ...                np.array([100, 100]), np.array([30, 0]))
    >>> round(like_to_like_bound(prof), 2)      # 0.3 / (1 - 0.05 ** 0.01)
    10.16
    >>> no_orthogonal_pair = Profile(edges, np.array([0.3, np.nan]), np.ones(2),
    ...                              np.array([100, 0]), np.array([30, 0]))
    >>> like_to_like_bound(no_orthogonal_pair) is None
    True
    """
    n_orth = int(profile.n_pairs[-1])
    if like_to_like_index(profile) != float("inf") or n_orth == 0:
        return None
    _, high = clopper_pearson(0, n_orth, confidence, side="upper")
    return float(profile.probability[0] / high)


CLASSES = ("E->E", "E->I_untuned", "I_untuned->E", "E->I_tuned",
           "I_tuned->E", "W positive", "W negative")


def active_by_kind(circuit):
    """(untuned, tuned) boolean masks of the active interneurons
    (types.active_interneurons): a silent interneuron is no connection of
    either class and counts in no probability or profile."""
    active = active_interneurons(circuit.J_EI, circuit.J_IE, circuit.J_II)
    return active[:circuit.n_untuned], active[circuit.n_untuned:]


def connection_classes(circuit, W):
    """{class: (J[post, pre], post kind, pre kind)}: the circuit's five
    blocks (active interneurons only, :func:`active_by_kind`) and the
    positive and negative sides of the original W among the E units (all of
    W's units; for a circuit of W's own neurons, its E units, among which W
    has no negative side: its inhibition is the I -> E classes)."""
    e = circuit.e_units()
    W = np.asarray(W, dtype=float)[np.ix_(e, e)]
    u, t = active_by_kind(circuit)
    out = {"E->E": (circuit.J_EE, "E", "E"),
           "E->I_untuned": (circuit.J_UE[u], "U", "E"),
           "I_untuned->E": (circuit.J_EU[:, u], "E", "U"),
           "E->I_tuned": (circuit.J_TE[t], "T", "E"),
           "I_tuned->E": (circuit.J_ET[:, t], "E", "T"),
           "W positive": (np.maximum(W, 0.0), "E", "E"),
           "W negative": (np.maximum(-W, 0.0), "E", "E")}
    if circuit.own_neurons:   # W's inhibition is its own neurons' (I -> E)
        del out["W negative"]
    return out


def circuit_profiles(circuit, W, *, features=None, positions=None,
                     period=DEFAULT_PERIOD, n_feature_bins=6,
                     n_distance_bins=25):
    """Connection profiles and fits of every class, as plain dicts (JSON-ready).

    Interneurons have no feature or position of their own; each gets the
    weighted circular mean of its input pool's features and the weighted
    mean of its pool's positions (analysis.tuning.pool_features).
    """
    from .tuning import pool_features

    f_i, p_i = pool_features(circuit, features, positions, period)
    u, t = active_by_kind(circuit)
    if f_i is not None:
        f_i = np.concatenate([f_i[:circuit.n_untuned][u],
                              f_i[circuit.n_untuned:][t]])
    if p_i is not None:
        p_i = np.concatenate([p_i[:circuit.n_untuned][u],
                              p_i[circuit.n_untuned:][t]])
    nu = int(u.sum())

    def prop(kind, values_e, values_i):
        if values_e is None:
            return None
        return {"E": np.asarray(values_e, float), "U": values_i[:nu],
                "T": values_i[nu:]}[kind]

    out = {}
    for name, (J, post, pre) in connection_classes(circuit, W).items():
        row = {"n_post": int(J.shape[0]), "n_pre": int(J.shape[1]),
               "probability": float(np.count_nonzero(J) / J.size) if J.size
               else None}
        fp, fq = prop(post, features, f_i), prop(pre, features, f_i)
        if fp is not None and J.size:
            ok_post, ok_pre = np.isfinite(fp), np.isfinite(fq)
            prof = feature_profile(J[np.ix_(ok_post, ok_pre)], fp[ok_post],
                                   fq[ok_pre], period=period,
                                   n_bins=n_feature_bins,
                                   exclude_self=post == pre)
            row["feature_profile"] = prof.as_dict()
            idx = like_to_like_index(prof)
            row["like_to_like_index"] = idx if np.isfinite(idx) else None
            row["like_to_like_bound"] = like_to_like_bound(prof)
            row["like_to_like_counts"] = [
                int(prof.n_connected[0]), int(prof.n_pairs[0]),
                int(prof.n_connected[-1]), int(prof.n_pairs[-1])]
        pp, pq = prop(post, positions, p_i), prop(pre, positions, p_i)
        if pp is not None and J.size:
            ok_post = np.isfinite(pp).all(axis=1)
            ok_pre = np.isfinite(pq).all(axis=1)
            prof = distance_profile(J[np.ix_(ok_post, ok_pre)], pp[ok_post],
                                    pq[ok_pre], n_bins=n_distance_bins,
                                    exclude_self=post == pre)
            row["distance_profile"] = prof.as_dict()
            row["space_constant"] = fit_space_constant(prof).as_dict()
        out[name] = row
    return out
