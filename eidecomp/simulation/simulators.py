"""The rate models and the simulators that run them: one frozen table each.

A runner is ``run(W_full, H, tau, segment_ms, rectified)``: the signed
matrix W_full[post, pre], a drive H (n, T) held one column per segment of
``segment_ms`` ms, every unit's time constant ``tau`` (ms), and how many
leading units are rectified (0: the linear model); it returns the rates
(n, T) at the end of each segment, starting from rest. The internal
runner integrates with scipy's solve_ivp (eidecomp.dynamics.simulate); NEST
and Brian2 run the same equations (eidecomp.export.nest_builder,
brian2_builder).
"""

import importlib.util
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from ..errors import InputError, entry

__all__ = ["MODELS", "SEGMENT_STEP_MS", "SIMULATORS", "RateModel", "Simulator",
           "get_model", "get_simulator", "segment_length"]

SEGMENT_STEP_MS = 0.1
"""Every segment lasts a whole number of these (the NEST and Brian2
runners' step), so that every simulator runs the same time."""


@dataclass(frozen=True)
class RateModel:
    """A rate model tau dr/dt = -r + f(W r + h).

    ``rectified``: f is max(., 0) on the E units (on every unit of W, and
    on every unit of a circuit of W's own neurons), the identity elsewhere;
    otherwise f is the identity everywhere.
    """

    name: str
    rectified: bool
    help: str


MODELS = (
    RateModel("linear", False, "f the identity: runs to the fixed point "
              "(I - W)^-1 h, which needs stable linear dynamics"),
    RateModel("threshold-linear", True, "E units [.]_+, interneurons linear: "
              "a run whose final rates are compared, stable or not"),
)
"""The rate models, the default first (the one simulate and the report use)."""

_MODELS = {m.name: m for m in MODELS}


def get_model(name):
    """The :class:`RateModel` called ``name``, or InputError."""
    return entry(_MODELS, name, "model")


def _internal():
    from ..dynamics import DIVERGED, simulate

    def run(W_full, H, tau, segment_ms, rectified=0):
        n, T = H.shape
        r, out = np.zeros(n), np.empty((n, T))
        for k in range(T):
            _, y = simulate(W_full, H[:, k], tau=tau, t_max=segment_ms,
                            nonlinearity="relu" if rectified else "linear",
                            rectified=rectified, r0=r, t_eval=(segment_ms,))
            r = out[:, k] = y[:, -1]
            if not np.abs(r).max() < DIVERGED:     # ended by divergence
                out[:, k:] = r[:, None]
                break
        return out

    return run


def _nest():
    from ..export.nest_builder import run_segments

    return run_segments


def _brian2():
    from ..export.brian2_builder import run_segments

    return run_segments


@dataclass(frozen=True)
class Simulator:
    """One simulator: its name, the module it needs (None: none beyond
    eidecomp's own), a loader of its runner, the models it runs, and one
    line of help."""

    name: str
    requires: str | None
    load: Callable
    models: tuple
    help: str

    def check_available(self):
        """InputError, one line, when the module it needs is missing."""
        if self.requires is not None and importlib.util.find_spec(
                self.requires) is None:
            from ..export import SIM_EXTRA

            raise InputError(f"{self.requires} is not installed; it comes "
                             f"with the simulator extra: {SIM_EXTRA}")


_BOTH = tuple(m.name for m in MODELS)
SIMULATORS = (
    Simulator("internal", None, _internal, _BOTH, "scipy's solve_ivp (LSODA)"),
    Simulator("nest", "nest", _nest, _BOTH,
              "NEST's lin_rate_ipn and threshold_lin_rate_ipn nodes"),
    Simulator("brian2", "brian2", _brian2, _BOTH,
              "Brian2 (numpy target, forward Euler at 0.1 ms)"),
)
"""Every simulator, the default first."""

_SIMULATORS = {s.name: s for s in SIMULATORS}


def get_simulator(name):
    """The :class:`Simulator` called ``name``, or InputError."""
    return entry(_SIMULATORS, name, "simulator")


def segment_length(duration_ms, n_segments):
    """Each segment's length: ``duration_ms`` shared out, rounded to a
    whole number of :data:`SEGMENT_STEP_MS` (at least one).

    >>> segment_length(100.0, 3)
    33.3
    """
    steps = max(1, round(duration_ms / n_segments / SEGMENT_STEP_MS))
    return round(steps * SEGMENT_STEP_MS, 10)
