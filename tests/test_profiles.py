"""Connection profiles and circular statistics.

References: scipy.stats.circmean and circvar (circular statistics on the
same data); scipy.optimize.curve_fit inside the space-constant fit is
checked against a known generating rule: Gaussian connection probability
with sigma = 100 um (inside the 85-114 um that Levy & Reyes 2012, J Neurosci
32:5609, fitted for all cell types, pyramidal, fast-spiking and
non-fast-spiking, in slices of mouse primary auditory cortex) and a
like-to-like rule with index 2 (the ~2x of Ko et al. 2011, Nature 473:87).
The synthetic connectivity is drawn here with a seed; the rule is the truth,
not the data.
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
    distance_profile,
    feature_profile,
    fit_space_constant,
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
    n, sigma = 2000, 100.0  # inside Levy & Reyes' 85-114 um
    pos = rng.uniform(0.0, 1000.0, (n, 2))
    d = np.sqrt(((pos[:, None] - pos[None]) ** 2).sum(-1))
    J = (rng.random((n, n)) < 0.3 * np.exp(-d ** 2 / (2 * sigma ** 2))) * \
        rng.uniform(0.5, 1.5, (n, n))
    fit = fit_space_constant(distance_profile(J, pos, pos))
    assert fit.ok and fit.status == "determined"
    assert abs(fit.sigma - sigma) / sigma < 0.05
    assert fit.ci_low < fit.sigma < fit.ci_high
    assert 85.0 <= fit.ci_low and fit.ci_high <= 114.0  # the paper's range
    assert fit.p0 == pytest.approx(0.3, rel=0.1)


def test_like_to_like_index_within_10_percent():
    rng = np.random.default_rng(2)
    n = 2000
    theta = rng.uniform(0.0, 180.0, n)
    dtheta = circular_difference(theta[:, None], theta[None], 180.0)
    # known rule: 0.2 within 15 deg, 0.1 beyond 75 deg, 0.15 between: index 2
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
