"""E:I ratio and population counts."""

import math

from ..errors import InputError
from ..grammar import parse_number
from ..params import EIRatio

__all__ = ["inhibitory_count", "parse_ratio", "interneuron_counts"]

def parse_ratio(spec):
    """E:I ratio from ``"4:1"``, ``"4"`` or a number, as excitatory units per
    inhibitory one (the value of :class:`eidecomp.params.EIRatio`).

    >>> parse_ratio("4:1"), parse_ratio("9:2"), parse_ratio(3)
    (4.0, 4.5, 3.0)
    """
    return EIRatio.parse(spec).value


def inhibitory_count(n_e, ratio, *, where="", units="excitatory units"):
    """n_I = round(N / ratio), checked to lie in [1, N]; ``ratio`` is an
    EIRatio or anything EIRatio.parse takes.

    ``where`` and ``units`` word the errors (" per site", "features" for
    tiled circuits).

    >>> inhibitory_count(400, 4.0)
    100
    """
    r = EIRatio.parse(ratio)
    quotient = n_e / r.value
    if not math.isfinite(quotient):  # a ratio like 1:1e308
        raise InputError(f"E:I ratio {r.text} asks for more interneurons"
                         f"{where} than the {n_e} {units}")
    n_i = r.interneurons(n_e)
    if n_i < 1:
        raise InputError(f"E:I ratio {r.text} leaves no interneuron{where} "
                         f"for {n_e} {units} (round({n_e}/{r.value:g}) = 0)")
    if n_i > n_e:
        raise InputError(f"E:I ratio {r.text} asks for {n_i} interneurons"
                         f"{where}, more than the {n_e} {units}")
    return n_i


def interneuron_counts(n_i, share, rank_low, has_tuned):
    """(n_untuned, n_tuned, rule) for a share in [0, 1] or ``"auto"``.

    ``"auto"`` gives the untuned population one unit per dimension of the
    low-rank part (its rank), leaving at least one tuned interneuron when the
    sparse part inhibits anything.

    >>> interneuron_counts(100, "auto", 5, True)[:2]
    (5, 95)
    >>> interneuron_counts(10, 0.25, 5, True)[:2]
    (2, 8)
    """
    if isinstance(share, str):
        if share != "auto":
            number = parse_number(share)
            if number is None:
                raise InputError(f"untuned share {share!r} is neither 'auto' "
                                 "nor a number in [0, 1]")
            share = number
    if share == "auto":
        keep = 1 if has_tuned and n_i > 1 else 0
        n_u = max(0, min(int(rank_low), n_i - keep))
        rule = (f"auto: untuned = rank of the low-rank part ({rank_low})"
                + (f", capped at {n_u}" if n_u < rank_low else ""))
    else:
        share = float(share)
        if not 0.0 <= share <= 1.0 or math.isnan(share):
            raise InputError(f"untuned share {share:g} is outside [0, 1]")
        n_u = int(round(share * n_i))
        rule = f"fixed: untuned share {share:g} of {n_i}"
    return n_u, n_i - n_u, rule
