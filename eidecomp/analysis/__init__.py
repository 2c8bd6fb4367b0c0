"""What a circuit predicts: interneuron tuning (and, later, connection rules)."""

from .tuning import circular_variance, interneuron_pools

__all__ = ["circular_variance", "interneuron_pools"]
