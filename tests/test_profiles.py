"""Connection profiles and circular statistics.

References: scipy.stats.circmean and circvar (circular statistics on the
same data); scipy.stats.binomtest(...).proportion_ci(method="exact"), the
Clopper & Pearson (1934, Biometrika 26:404) interval, for every bin's
interval and the like-to-like bound; scipy.optimize.curve_fit inside the
space-constant fit is checked against a known generating rule: Gaussian
connection probability with sigma = 100 um (inside the 85-114 um that
Levy & Reyes 2012, J Neurosci 32:5609, fitted for all cell types,
pyramidal, fast-spiking and non-fast-spiking interneurons, in slices of
mouse primary auditory cortex, principal input layer; other areas, layers
and species may differ) and a like-to-like rule with index 2 (pairs of the
same preferred orientation connecting about twice as often as orthogonal
ones in mouse V1, Ko et al. 2011, Nature 473:87; the factor is from memory,
its figure not checked). The synthetic connectivity is drawn here with a
seed; the rule is the truth, not the data.
"""

import numpy as np
import pytest
from scipy import stats

from eidecomp.analysis import (
    circular_difference,
    circular_mean,
    circular_variance,
    orientation_selectivity,
)
from eidecomp.analysis.profiles import (
    Profile,
    clopper_pearson,
    distance_profile,
    feature_profile,
    fit_space_constant,
    like_to_like_bound,
    like_to_like_index,
)


@pytest.mark.parametrize("period", [180.0, 360.0])
def test_circular_stats_match_scipy(rng, period):
    theta = np.mod(rng.vonmises(0.7, 2.0, 500) * period / (2 * np.pi), period)
    ref_mean = stats.circmean(theta, high=period, low=0.0)
    assert circular_mean(theta, period=period) == pytest.approx(ref_mean, abs=1e-9)
    ref_var = stats.circvar(2 * np.pi * theta / period)  # 1 - R, scipy >= 1.8
    assert circular_variance(np.ones((1, 500)), theta, period)[0] == \
        pytest.approx(ref_var, abs=1e-12)


def test_circular_difference_and_osi():
    assert circular_difference(175.0, 5.0) == 10.0
    assert circular_difference(350.0, 10.0, 360.0) == 20.0
    w = np.array([[1.0, 0.0, 0.0, 0.0], [1.0, 0.0, 1.0, 0.0]])
    osi = orientation_selectivity(w, [0.0, 45.0, 90.0, 135.0], n_bins=4)
    assert osi[0] == 1.0 and osi[1] == 0.0


def test_space_constant_recovered_within_5_percent():
    rng = np.random.default_rng(120)
    # pairs drawn at their own distances (numpy's generator), not at bin
    # centres; the planted sigma is a value inside the 85-114 um of Levy &
    # Reyes 2012 (J Neurosci 32:5609; all cell types, slices of mouse
    # primary auditory cortex, principal input layer)
    n, sigma = 2000, 100.0
    pos = rng.uniform(0.0, 1000.0, (n, 2))
    d = np.sqrt(((pos[:, None] - pos[None]) ** 2).sum(-1))
    J = (rng.random((n, n)) < 0.3 * np.exp(-d ** 2 / (2 * sigma ** 2))) * \
        rng.uniform(0.5, 1.5, (n, n))
    fit = fit_space_constant(distance_profile(J, pos, pos))
    assert fit.ok and fit.status == "determined"
    assert abs(fit.sigma - sigma) / sigma < 0.05
    assert fit.ci_low < sigma < fit.ci_high       # the planted value inside
    assert fit.p0 == pytest.approx(0.3, rel=0.1)
    assert not fit.lack_of_fit


@pytest.mark.parametrize(("sigma", "seed"), [(50.0, 121), (100.0, 122)])
def test_the_interval_holds_the_planted_sigma_with_bins_wider_than_its_curve(
        sigma, seed):
    """Pairs on a 1 mm sheet (numpy's generator), 25 bins of about 37 um:
    the curve changes within a bin and a bin's pairs lie past its centre.
    The fit on FIT_SUBDIVISIONS finer bins holds the planted sigma in its
    95 % interval; the same likelihood on the 25 bins at their centres puts
    it about 2 % too far out, outside (scipy.optimize.minimize on
    scipy.stats.binom's log-likelihood, the reference)."""
    from scipy.optimize import minimize
    from scipy.stats import binom

    rng = np.random.default_rng(seed)
    pos = rng.uniform(0.0, 1000.0, (2000, 2))
    d = np.sqrt(((pos[:, None] - pos[None]) ** 2).sum(-1))
    J = rng.random(d.shape) < 0.3 * np.exp(-d ** 2 / (2 * sigma ** 2))
    prof = distance_profile(J.astype(float), pos, pos)
    fit = fit_space_constant(prof)
    assert fit.ci_low < sigma < fit.ci_high
    x, k, n = prof.centers, prof.n_connected, prof.n_pairs

    def nll(t):
        p = np.clip(t[0] * np.exp(-x ** 2 / (2 * t[1] ** 2)), 1e-12, 1 - 1e-12)
        return -float(binom.logpmf(k, n, p).sum())

    at_centres = minimize(nll, (0.3, sigma), method="Nelder-Mead").x[1]
    assert at_centres > fit.ci_high


def test_like_to_like_index_within_10_percent():
    rng = np.random.default_rng(2)
    n = 2000
    theta = rng.uniform(0.0, 180.0, n)
    dtheta = circular_difference(theta[:, None], theta[None], 180.0)
    # known rule: 0.2 within 15 deg, 0.1 beyond 75 deg, 0.15 between: index
    # 2, the "about twice" of Ko et al. 2011 (Nature 473:87, mouse V1; from
    # memory)
    p = np.where(dtheta < 15, 0.2, np.where(dtheta >= 75, 0.1, 0.15))
    J = rng.random((n, n)) < p
    prof = feature_profile(J, theta, theta, period=180.0, n_bins=6)
    assert abs(like_to_like_index(prof) - 2.0) / 2.0 < 0.10
    np.testing.assert_allclose(prof.probability[[0, -1]], [0.2, 0.1], rtol=0.05)


def test_profile_mean_weight_counts_connected_pairs_only():
    J = np.array([[0.0, 2.0], [4.0, 0.0]])
    prof = feature_profile(J, [0.0, 10.0], [0.0, 10.0], n_bins=2)
    assert prof.n_pairs.sum() == 2  # the diagonal (self-pairs) is left out
    assert prof.mean_weight[0] == 3.0 and prof.probability[0] == 1.0


@pytest.mark.parametrize(("k", "n"), [(0, 1), (0, 20), (3, 20), (20, 20),
                                      (7, 13), (150, 2358)])
def test_clopper_pearson_matches_scipy(k, n):
    # Clopper & Pearson (1934): scipy.stats.binomtest's exact interval,
    # two-sided and the one-sided upper bound (alternative "less")
    ref = stats.binomtest(k, n).proportion_ci(0.95, method="exact")
    low, high = clopper_pearson(k, n)
    assert (low, high) == pytest.approx((ref.low, ref.high), abs=1e-12)
    ref = stats.binomtest(k, n, alternative="less").proportion_ci(
        0.95, method="exact")
    low, high = clopper_pearson(k, n, side="upper")
    assert (low, high) == pytest.approx((ref.low, ref.high), abs=1e-12)


def test_every_bin_carries_its_clopper_pearson_interval(rng):
    n = 300
    theta = rng.uniform(0.0, 180.0, n)
    J = rng.random((n, n)) < 0.1
    row = feature_profile(J, theta, theta, period=180.0).as_dict()
    for k, m, lo, hi in zip(row["n_connected"], row["n_pairs"], row["ci_low"],
                            row["ci_high"], strict=True):
        ref = stats.binomtest(k, m).proportion_ci(0.95, method="exact")
        assert (lo, hi) == pytest.approx((ref.low, ref.high), abs=1e-12)
        assert lo <= k / m <= hi


def test_like_to_like_bound_where_no_orthogonal_pair_connects():
    # 30 of 100 same-feature pairs and 0 of 120 orthogonal ones: the index
    # is infinite; its bound is 0.3 over the one-sided 95 % upper
    # Clopper-Pearson bound of 0/120 (scipy.stats.binomtest, alternative
    # "less"), i.e. 0.3 / (1 - 0.05 ** (1 / 120))
    prof = Profile(np.array([0.0, 45.0, 90.0]), np.array([0.3, 0.0]),
                   np.ones(2), np.array([100, 120]), np.array([30, 0]))
    assert like_to_like_index(prof) == np.inf
    upper = stats.binomtest(0, 120, alternative="less").proportion_ci(
        0.95, method="exact").high
    # binomtest solves for the bound numerically: agreement to 1e-9
    assert like_to_like_bound(prof) == pytest.approx(0.3 / upper, rel=1e-9)
    assert upper == pytest.approx(1 - 0.05 ** (1 / 120), rel=1e-12)
    finite = Profile(prof.edges, np.array([0.3, 0.1]), np.ones(2),
                     np.array([100, 120]), np.array([30, 12]))
    assert like_to_like_bound(finite) is None


def test_space_constant_beyond_the_binned_distances_is_extrapolated():
    # sigma 600 um on distances binned to 400 um, many pairs: curve_fit's
    # sigma (scipy.optimize) lies beyond the largest binned distance, its
    # interval is narrow, and the fit says "extrapolated"
    from scipy.optimize import curve_fit

    edges = np.linspace(0.0, 400.0, 26)
    d = 0.5 * (edges[1:] + edges[:-1])
    n = np.full(25, 200000)
    k = np.random.default_rng(8).binomial(n, 0.5 * np.exp(-d ** 2 / (2 * 600.0 ** 2)))
    prof = Profile(edges, k / n, np.ones(25), n, k, "distance (um)")
    (_, ref_sigma), _ = curve_fit(lambda x, a, s: a * np.exp(-x ** 2 / (2 * s ** 2)),
                                  d, k / n, p0=(0.5, 300.0))
    fit = fit_space_constant(prof)
    assert fit.status == "determined" and ref_sigma > 400.0
    assert fit.sigma == pytest.approx(abs(ref_sigma), rel=0.02)
    assert fit.extrapolated and fit.as_dict()["extrapolated"] is True
    # the same counts from sigma 100 um (Levy & Reyes 2012's range) on
    # distances binned to 400 um: determined, and not extrapolated
    k = np.random.default_rng(8).binomial(n, 0.5 * np.exp(-d ** 2 / (2 * 100.0 ** 2)))
    inside = fit_space_constant(Profile(edges, k / n, np.ones(25), n, k))
    assert inside.status == "determined" and inside.sigma < 400.0
    assert not inside.extrapolated


# --- the space constant's likelihood, dispersion and lack of fit ----------------


def _gaussian_bins(p0, sigma, n_pairs, seed, top=400.0, n_bins=20, draw=None):
    edges = np.linspace(0.0, top, n_bins + 1)
    d = 0.5 * (edges[1:] + edges[:-1])
    n = np.full(n_bins, n_pairs)
    mean = p0 * np.exp(-d ** 2 / (2 * sigma ** 2))
    rng = np.random.default_rng(seed)
    k = rng.binomial(n, mean) if draw is None else draw(n, mean, rng)
    return Profile(edges, k / n, np.ones(n_bins), n, k, "distance (um)"), d, k, n


def test_the_space_constant_maximises_the_binomial_likelihood():
    """The fit's (p0, sigma) maximise the log-likelihood of the binned counts
    as scipy.stats.binom gives it: no point of a fine grid around it
    (scipy.optimize.brute) does better."""
    from scipy.optimize import brute
    from scipy.stats import binom

    prof, d, k, n = _gaussian_bins(0.4, 120.0, 300, seed=3)
    fit = fit_space_constant(prof)

    def nll(theta):
        p = theta[0] * np.exp(-d ** 2 / (2 * theta[1] ** 2))
        return -float(binom.logpmf(k, n, np.clip(p, 1e-12, 1 - 1e-12)).sum())

    grid = brute(nll, ((fit.p0 * 0.9, fit.p0 * 1.1), (fit.sigma * 0.9,
                                                       fit.sigma * 1.1)),
                 Ns=41, finish=None)
    assert nll((fit.p0, fit.sigma)) <= nll(grid) + 1e-9
    assert fit.sigma == pytest.approx(120.0, rel=0.1)
    assert not fit.lack_of_fit and fit.dispersion < 2.0


def test_overdispersed_bins_widen_the_interval_and_keep_the_truth_inside():
    """Bins drawn from a beta-binomial around the same Gaussian
    (scipy.stats.betabinom, intra-bin correlation 0.05): the deviance is
    improbable under the binomial model, the fit says so, and the interval,
    widened by the dispersion, still holds the sigma the bins were drawn
    with (McCullagh & Nelder 1989's quasi-binomial correction, from
    memory)."""
    from scipy.stats import betabinom

    rho = 0.05

    def draw(n, mean, rng):
        a, b = mean * (1 / rho - 1), (1 - mean) * (1 / rho - 1)
        return betabinom.rvs(n, a, b, random_state=rng)

    prof, *_ = _gaussian_bins(0.4, 120.0, 2000, seed=5, draw=draw)
    fit = fit_space_constant(prof)
    assert fit.lack_of_fit and fit.dispersion > 10
    assert fit.ci_low < 120.0 < fit.ci_high


def test_a_profile_that_is_no_gaussian_is_flagged_in_the_report_and_figure():
    """A near-certain first bin and a flat 0.4 beyond, the shape of the E->E
    profile of photograph-patch weights: the Gaussian misses the bins, and
    the report's sigma and the figure's legend say so (matplotlib's legend,
    read back)."""
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    from eidecomp.analysis.plotting import plot_profile
    from eidecomp.analysis.profiles import LACK_OF_FIT_TEXT
    from eidecomp.analysis.report import _sigma_text

    edges = np.linspace(0.0, 500.0, 11)
    n = np.full(10, 3000)
    k = np.r_[2990, np.full(9, 1200)]
    prof = Profile(edges, k / n, np.ones(10), n, k, "distance (um)")
    fit = fit_space_constant(prof)
    assert fit.lack_of_fit and "deviance p-value" in fit.message
    assert LACK_OF_FIT_TEXT in _sigma_text({"space_constant": fit.as_dict()})
    ax = Figure().subplots()
    plot_profile(ax, prof.as_dict(), fit.as_dict())
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert any(LACK_OF_FIT_TEXT in label for label in labels)
