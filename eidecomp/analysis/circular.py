"""Circular statistics of preferred features (orientations, directions).

A feature theta with period P (180 degrees for orientation, 360 for
direction) is mapped to the angle 2 pi theta / P. With weights w >= 0 the
mean resultant is z = sum w e^{i angle} / sum w; the circular mean is its
argument mapped back to [0, P), and the circular variance 1 - |z| (Mardia &
Jupp 2000, Directional Statistics, section 2.3.1; scipy.stats.circmean and
circvar use the same definitions, and the tests hold us to them).
"""

import numpy as np

from ..params import DEFAULT_PERIOD

__all__ = ["circular_difference", "circular_mean", "circular_variance",
           "orientation_selectivity"]


NO_DIRECTION = 1e-12
"""A mean resultant this small relative to the total weight has no angle."""


def _phase(features, period):
    return np.exp(2j * np.pi * np.asarray(features, dtype=float) / period)


def circular_mean(features, weights=None, period=DEFAULT_PERIOD):
    """Weighted circular mean in [0, period); NaN when the weights are all 0
    or the mean resultant vanishes (no preferred direction: its length at
    most NO_DIRECTION of the total weight, which rounding alone reaches).

    >>> round(float(circular_mean([170.0, 20.0])), 6)   # across the wrap at 180
    5.0
    >>> float(circular_mean([0.0, 45.0, 90.0, 135.0]))  # evenly spread
    nan
    """
    f = np.asarray(features, dtype=float)
    w = np.ones_like(f) if weights is None else np.asarray(weights, dtype=float)
    z = np.sum(w * _phase(f, period), axis=-1)
    total = np.sum(np.abs(w), axis=-1)
    if np.ndim(z) == 0 and (total == 0 or abs(z) <= NO_DIRECTION * total):
        return np.nan
    return np.mod(np.angle(z) * period / (2 * np.pi), period)


def circular_variance(weights, features, period=DEFAULT_PERIOD):
    """Circular variance 1 - |z| of each row of ``weights`` over ``features``.

    >>> circular_variance([[1, 0, 0, 0], [1, 1, 1, 1]], [0, 45, 90, 135])
    array([0., 1.])
    >>> round(float(circular_variance([[1, 1, 0, 0]], [0, 45, 90, 135])[0]), 4)
    0.2929
    """
    w = np.atleast_2d(np.asarray(weights, dtype=float))
    total = w.sum(axis=1)
    z = np.abs(w @ _phase(features, period)) / np.where(total > 0, total, 1.0)
    cv = 1.0 - z
    cv[total == 0] = np.nan
    return cv


def circular_difference(a, b, period=DEFAULT_PERIOD):
    """|a - b| on the circle, in [0, period / 2].

    >>> float(circular_difference(170.0, 10.0))
    20.0
    """
    d = np.mod(np.subtract(a, b), period)
    return np.minimum(d, period - d)


def orientation_selectivity(weights, features, period=DEFAULT_PERIOD, n_bins=8):
    """(R_pref - R_orth) / (R_pref + R_orth) of each row's binned profile.

    The weights are summed in ``n_bins`` bins of feature; R_pref is the
    largest bin and R_orth the bin half a period away (for period 360, a
    direction selectivity index). NaN for an empty row.

    >>> float(orientation_selectivity([[1, 0, 0, 0]], [0, 45, 90, 135], n_bins=4)[0])
    1.0
    """
    w = np.atleast_2d(np.asarray(weights, dtype=float))
    if n_bins % 2:
        raise ValueError("n_bins must be even")
    idx = (np.mod(np.asarray(features, float), period) / period * n_bins).astype(int)
    idx = np.minimum(idx, n_bins - 1)
    binned = np.zeros((w.shape[0], n_bins))
    for k in range(n_bins):
        binned[:, k] = w[:, idx == k].sum(axis=1)
    pref = binned.argmax(axis=1)
    r_pref = binned[np.arange(len(pref)), pref]
    r_orth = binned[np.arange(len(pref)), (pref + n_bins // 2) % n_bins]
    total = r_pref + r_orth
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(total > 0, (r_pref - r_orth) / total, np.nan)
