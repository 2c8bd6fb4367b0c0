"""Tuning of an interneuron's input pool over the units' preferred features.

For features theta_j with period P (180 degrees for orientations, 360 for
directions) and input weights w_j >= 0, the pool's resultant is

    z = sum_j w_j exp(2 pi i theta_j / P) / sum_j w_j,

and its circular variance is 1 - |z| (Mardia & Jupp 2000, Directional
Statistics, section 2.3.1): 0 when the pool shares one feature, 1 when its
weights are spread evenly around the circle.
"""

import numpy as np

__all__ = ["circular_variance", "interneuron_pools"]


def circular_variance(weights, features, period=180.0):
    """Circular variance of each row of ``weights`` over ``features``.

    >>> circular_variance([[1, 0, 0, 0], [1, 1, 1, 1]], [0, 45, 90, 135])
    array([0., 1.])
    >>> float(circular_variance([[1, 1, 0, 0]], [0, 45, 90, 135])[0]).__round__(4)
    0.2929
    """
    w = np.atleast_2d(np.asarray(weights, dtype=float))
    phase = np.exp(2j * np.pi * np.asarray(features, dtype=float) / period)
    total = w.sum(axis=1)
    z = np.abs(w @ phase) / np.where(total > 0, total, 1.0)
    cv = 1.0 - z
    cv[total == 0] = np.nan
    return cv


def interneuron_pools(circuit, features=None, period=180.0, rtol=1e-6):
    """Per interneuron: its kind, pool sizes and, given features, its tuning.

    An E unit is in an interneuron's input pool (J_IE row) or target set
    (J_EI column) when the weight exceeds ``rtol`` times that row's or
    column's largest. Returns a list of dicts with keys ``kind``,
    ``index`` (within its population), ``n_inputs``, ``n_targets`` and
    ``circular_variance`` (None without features).
    """
    J_IE, J_EI = circuit.J_IE, circuit.J_EI
    kinds = ["untuned"] * circuit.n_untuned + ["tuned"] * circuit.n_tuned
    index = list(range(circuit.n_untuned)) + list(range(circuit.n_tuned))
    peak_in = J_IE.max(axis=1, initial=0.0)
    peak_out = J_EI.max(axis=0, initial=0.0)
    cv = (circular_variance(J_IE, features, period) if features is not None
          else [None] * len(kinds))
    out = []
    for k in range(len(kinds)):
        out.append({
            "kind": kinds[k], "index": index[k],
            "n_inputs": int(np.count_nonzero(J_IE[k] > rtol * peak_in[k]))
            if peak_in[k] > 0 else 0,
            "n_targets": int(np.count_nonzero(J_EI[:, k] > rtol * peak_out[k]))
            if peak_out[k] > 0 else 0,
            "circular_variance": None if cv[k] is None or np.isnan(cv[k])
            else float(cv[k]),
        })
    return out
