"""What to run instead: the words of every refusal of a run, with a
command that works.

A suggestion is a whole command, printed between backticks, built by the
caller's ``command(**changes)`` (the command as the user gave it, with
some options changed); run as printed on the same bundle, it succeeds or
stops with another, more specific line. Without a command (the Python
API) the same words name the quantity to change instead.
"""

import math

from ..params import AGREEMENT_RTOL, SETTLE_TIME_CONSTANTS, STABILITY_SCAN
from .compare import Diverged, TooSlow, Unstable

__all__ = ["GAIN_SHARE", "explain", "round_down", "verdict_line"]

GAIN_SHARE = 0.9
"""An advised gain is at most this share of the largest stable one, so the
slowest mode of the advised run decays at least 0.1 / tau and the run
settles within 400 time constants."""


def round_down(x, digits=2):
    """x rounded down to ``digits`` significant digits, strictly below x.

    >>> round_down(0.4938), round_down(2.0)
    (0.49, 1.9)
    """
    step = 10.0 ** (math.floor(math.log10(x)) - digits + 1)
    value = math.floor(x / step) * step
    if value >= x:
        value -= step
    return float(f"{value:.{digits}g}")


def _run(command, what, **changes):
    """'run `COMMAND`' with the changes, or the words without a command."""
    if command is None:
        return what
    return f"run `{command(**changes)}`"


def _gain(exc, command, **more):
    g = round_down(GAIN_SHARE * exc.stable_gain)
    return _run(command, f"scale W by a gain below {exc.stable_gain:.4g}",
                gain=g, **more)


def explain(exc, command=None):
    """The line for an :class:`Unstable` or :class:`Diverged` refusal:
    what happened and what to run instead."""
    if isinstance(exc, TooSlow):
        return (f"the linear dynamics are stable at gain {exc.gain:g} but "
                f"barely: {exc}: {_gain(exc, command)}")
    if isinstance(exc, Diverged):
        return (f"the rates diverged (past 1e+100) within {exc.t_ms:g} ms at "
                f"gain {exc.gain:g}; at a gain below {exc.stable_gain:.4g} the "
                f"linear dynamics of both networks are stable: "
                f"{_gain(exc, command)}")
    if not isinstance(exc, Unstable):
        return str(exc)
    ratio_now = exc.tau_i / exc.tau_e
    head = (f"the {'original network' if exc.network == 'original' else 'circuit'}"
            f" is unstable at gain {exc.gain:g} and tau_I/tau_E = {ratio_now:g} "
            f"(growth rate {exc.growth:.3g} per ms), so its linear dynamics "
            "have no fixed point to reach")
    if exc.network == "original":
        return (f"{head}; {exc.gain_of} are stable below gain "
                f"{exc.stable_gain:.4g}: {_gain(exc, command)}")
    if exc.own_neurons and exc.tau_i != exc.tau_e and exc.equal_taus_stable:
        return (f"{head}; its units are W's own neurons, whose dynamics at "
                f"equal time constants are W's: "
                f"{_run(command, 'give tau_I = tau_E', tau_i=exc.tau_e)}")
    lo = STABILITY_SCAN.lo
    if exc.stable_ratio is not None and exc.stable_ratio >= lo:
        tau_i = round_down(exc.stable_ratio * exc.tau_e)
        return (f"{head}; it is stable up to tau_I/tau_E = "
                f"{exc.stable_ratio:.3g}: "
                f"{_run(command, f'give tau_I below {tau_i:g} ms', tau_i=tau_i)}"
                f", or {_gain(exc, command)}")
    return (f"{head}; no tau_I/tau_E from {lo:g} up makes it stable at this "
            f"gain, and {exc.gain_of} is stable below gain "
            f"{exc.stable_gain:.4g}: {_gain(exc, command)}")


def verdict_line(result, command=None):
    """The last line of a comparison (compare_with_original's dict): the
    circuit agrees with the original network or differs, against
    :data:`eidecomp.params.AGREEMENT_RTOL`; a threshold-linear run that had
    not settled compares nothing, and says what gain would let it."""
    diff = result["circuit_vs_original"]
    if result.get("settled") is False:
        rate = max(result["circuit_rate_of_change"],
                   result["original_rate_of_change"])
        g = result["stable_gain"]
        head = (f"verdict: none: the runs had not settled (rates still "
                f"changing by {rate:.2g} per ms at the end), so their final "
                f"rates say nothing of the circuit; ")
        if result.get("duration_given") and result.get("linear_stable"):
            return head + (f"the default duration runs {SETTLE_TIME_CONSTANTS} "
                           "time constants of the slowest mode: " + _run(
                               command, "leave the duration to its default",
                               duration=None))
        if result["gain"] < GAIN_SHARE * g:         # a gain will not help
            t = 10 * result["t_ms"]
            return head + "a longer run may settle them: " + _run(
                command, f"run for {t:g} ms", duration=t)
        exc = Diverged(result["t_ms"], result["gain"], g)
        return head + (f"at a gain below {g:.4g} the linear dynamics of both "
                       f"networks are stable: "
                       f"{_gain(exc, command, duration=None)}")
    if diff <= AGREEMENT_RTOL:
        return (f"verdict: the circuit agrees with the original network "
                f"(relative difference {diff:.2e} <= {AGREEMENT_RTOL:g})")
    return (f"verdict: the circuit differs from the original network "
            f"(relative difference {diff:.2e} > {AGREEMENT_RTOL:g}); compare "
            "||W - W_eff|| / ||W|| above, or assemble with more interneurons")
