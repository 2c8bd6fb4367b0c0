"""What a circuit predicts: connection profiles, interneuron tuning, figures, the
report. plotting.py is the only module that imports matplotlib."""

from .circular import (
    circular_difference,
    circular_mean,
    circular_variance,
    orientation_selectivity,
)
from .tuning import interneuron_pools, pool_features

__all__ = ["circular_difference", "circular_mean", "circular_variance",
           "interneuron_pools", "orientation_selectivity", "pool_features"]
