"""Unit names and per-unit values as every export receives them.

Unit ids are data: strings from the user's unit table, written by each
format's own escaping and never into code. Every export writes its names
through :func:`unit_id_list`, which refuses, naming the unit, a name that not
every format can hold: one with a character outside the XML 1.0 ``Char``
production (W3C XML 1.0, section 2.2: C0 controls other than tab, LF and CR,
lone surrogates, U+FFFE and U+FFFF, NUL among them) -- GraphML and NeuroML2
cannot carry it, and a numpy string array drops a trailing NUL.
"""

import numpy as np

from ..errors import InputError
from ..names import NOT_XML_CHAR, check_writable

__all__ = ["NOT_XML_CHAR", "finite", "per_unit", "per_unit_xy", "unit_id_list"]

def unit_id_list(unit_ids, n_units):
    """``unit_ids`` as a list of ``n_units`` str, or None; InputError naming
    the first unit whose name no export can write.

    >>> unit_id_list(["a", "b\\r\\n"], 2)
    ['a', 'b\\r\\n']
    >>> unit_id_list(["a", "b\\x01"], 2)
    Traceback (most recent call last):
    ...
    eidecomp.errors.InputError: unit 1 ('b\\x01'): U+0001 cannot be written \
(XML 1.0 cannot hold it)
    """
    if unit_ids is None:
        return None
    ids = [u if isinstance(u, str) else str(u) for u in unit_ids]
    if len(ids) != n_units:
        raise InputError(f"{len(ids)} unit ids for a circuit of {n_units} "
                         "excitatory units")
    check_writable(ids)
    return ids


def per_unit(values, n_units, what):
    """``values`` as a float64 vector of ``n_units``, or None."""
    if values is None:
        return None
    arr = np.asarray(values, dtype=float)
    if arr.shape != (n_units,):
        raise InputError(f"{what} has shape {arr.shape}, expected ({n_units},) "
                         "(one value per excitatory unit)")
    return finite(arr, what)


def per_unit_xy(positions, n_units):
    """``positions`` as a float64 (n_units, 2) array of finite x, y, or None."""
    if positions is None:
        return None
    pos = np.asarray(positions, dtype=float)
    if pos.shape != (n_units, 2):
        raise InputError(f"positions have shape {pos.shape}, expected "
                         f"({n_units}, 2) (x, y of each excitatory unit)")
    return finite(pos, "positions")


def finite(arr, what):
    """``arr``, or InputError naming the first unit whose value is NaN or
    Inf (no export writes one: JSON cannot, the others would mislead)."""
    bad = np.flatnonzero(~np.isfinite(arr).reshape(len(arr), -1).all(axis=1))
    if bad.size:
        k = int(bad[0])
        raise InputError(f"{what}: unit {k} has {arr[k].tolist()!r}, not a "
                         "finite number")
    return arr
