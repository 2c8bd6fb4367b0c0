"""Dale's-law circuits from a low-rank + sparse split (docs/assembly.md)."""

from ._assemble import (
    assemble,
    dale_columns,
    equal_density_pairs,
    excitation_audit,
)
from ._baselines import baselines
from ._counts import inhibitory_count, interneuron_counts, parse_ratio
from ._nmf import hals, nndsvd
from ._tiled import TiledCircuit, assemble_tiled

__all__ = ["TiledCircuit", "assemble", "assemble_tiled", "baselines",
           "dale_columns", "equal_density_pairs", "excitation_audit", "hals",
           "inhibitory_count", "nndsvd", "parse_ratio", "interneuron_counts"]
