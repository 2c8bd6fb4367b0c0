"""Tuning of an interneuron's input pool over the units' preferred features.

An interneuron's input pool is its row of J_IE: the E units that drive it,
with their weights. Its tuning is the circular variance of that pool over
the units' preferred features (analysis/circular.py): 0 when the pool shares
one feature, 1 when its weights are spread evenly around the circle; and the
orientation selectivity index of the pool's binned profile.
"""

import numpy as np

from ..params import DEFAULT_PERIOD
from ..types import TUNED, UNTUNED
from .circular import circular_mean, circular_variance, orientation_selectivity

__all__ = ["interneuron_pools", "pool_features"]


def interneuron_pools(circuit, features=None, period=DEFAULT_PERIOD, rtol=0.0):
    """Per interneuron: its kind, pool sizes and, given features, its tuning.

    An E unit is in an interneuron's input pool (J_IE row) or target set
    (J_EI column) when the weight is a connection: nonzero after the
    connection floor that ``assemble`` applies (params.CONNECTION_RTOL), so
    these counts are the ones circuit.json and the command line give;
    ``rtol`` > 0 also drops weights below that fraction of the row's or
    column's largest. Returns a list of dicts with keys ``kind``,
    ``index`` (within its population), ``n_inputs``, ``n_targets``,
    ``n_inhibitory_inputs`` and ``n_inhibitory_targets`` (other
    interneurons, in a circuit of W's own neurons; else 0) and
    ``circular_variance`` (None without features).
    """
    J_IE, J_EI, J_II = circuit.J_IE, circuit.J_EI, circuit.J_II
    kinds = [UNTUNED] * circuit.n_untuned + [TUNED] * circuit.n_tuned
    index = list(range(circuit.n_untuned)) + list(range(circuit.n_tuned))
    peak_in = J_IE.max(axis=1, initial=0.0)
    peak_out = J_EI.max(axis=0, initial=0.0)
    cv = (circular_variance(J_IE, features, period) if features is not None
          else [None] * len(kinds))
    osi = (orientation_selectivity(J_IE, features, period)
           if features is not None else [None] * len(kinds))
    out = []
    for k in range(len(kinds)):
        out.append({
            "kind": kinds[k], "index": index[k],
            "n_inputs": int(np.count_nonzero(J_IE[k] > rtol * peak_in[k]))
            if peak_in[k] > 0 else 0,
            "n_targets": int(np.count_nonzero(J_EI[:, k] > rtol * peak_out[k]))
            if peak_out[k] > 0 else 0,
            "n_inhibitory_inputs": int(np.count_nonzero(J_II[k])),
            "n_inhibitory_targets": int(np.count_nonzero(J_II[:, k])),
            "circular_variance": None if cv[k] is None or np.isnan(cv[k])
            else float(cv[k]),
            "selectivity_index": None if osi[k] is None or np.isnan(osi[k])
            else float(osi[k]),
        })
    return out


def pool_features(circuit, features=None, positions=None, period=DEFAULT_PERIOD):
    """Feature and position of each interneuron, from its input pool.

    The preferred feature is the weighted circular mean of the pool's
    features and the position the weighted mean of its positions; both are
    NaN for an interneuron with no input. Returns (features, positions) of
    the interneurons, untuned first, with None where nothing was given.
    """
    J_IE = circuit.J_IE
    total = J_IE.sum(axis=1)
    feats = None
    if features is not None:
        feats = np.array([circular_mean(features, row, period) if t > 0
                          else np.nan for row, t in zip(J_IE, total, strict=True)])
    pos = None
    if positions is not None:
        with np.errstate(invalid="ignore", divide="ignore"):
            pos = (J_IE @ np.asarray(positions, float)) / total[:, None]
    return feats, pos
