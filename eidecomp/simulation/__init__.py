"""Simulation: the drive, the rate models, the simulators, the comparison
of a circuit with its original network, and the words of every refusal.

``drive``        the one reader of a drive: N values, (N,), (N, 1), (N, T)
                 (time along the columns); the seeded random drive
``simulators``   the rate models (linear, threshold-linear) and the
                 simulators (internal, nest, brian2) as frozen tables
``compare``      both networks on the same drive; Unstable and Diverged
                 carry what would make a run work
``advice``       those refusals in words, with a command that works

The numerics (fixed points, the Jacobian, stability, the integrator) are
eidecomp.dynamics'; this package names no command-line flag except in
``advice``, whose suggestions are whole commands built by the caller.
"""

from .advice import explain, round_down, verdict_line
from .compare import (
    Diverged,
    TooSlow,
    Unstable,
    check_stable,
    circuit_runs,
    compare_with_original,
    rectified_units,
    settle_time,
    stable_gains,
)
from .drive import DRIVE_RANGE, RANDOM, Drive, drive_of, random_drive, read_drive
from .simulators import (
    MODELS,
    SEGMENT_STEP_MS,
    SIMULATORS,
    RateModel,
    Simulator,
    get_model,
    get_simulator,
    segment_length,
)

__all__ = [
    "DRIVE_RANGE",
    "MODELS",
    "RANDOM",
    "SEGMENT_STEP_MS",
    "SIMULATORS",
    "Diverged",
    "Drive",
    "RateModel",
    "Simulator",
    "TooSlow",
    "Unstable",
    "check_stable",
    "circuit_runs",
    "compare_with_original",
    "drive_of",
    "explain",
    "get_model",
    "get_simulator",
    "random_drive",
    "read_drive",
    "rectified_units",
    "round_down",
    "segment_length",
    "settle_time",
    "stable_gains",
    "verdict_line",
]
