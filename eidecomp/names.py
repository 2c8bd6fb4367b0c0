"""Which characters a unit name may hold: the one rule for every reader and
writer of names.

Unit ids are data, carried exactly into every export. GraphML and NeuroML2
are XML 1.0, which cannot hold every character: the ``Char`` production of
the W3C XML 1.0 specification (section 2.2, production [2]) excludes NUL and
the other C0 controls but tab, LF and CR, lone surrogates, U+FFFE and
U+FFFF. The unit table refuses such a name when it is read; the exports
refuse it when one reaches them through the library.
"""

import re

from .errors import InputError

__all__ = ["NOT_XML_CHAR", "check_writable", "unit_labels", "xml_char_problem"]

NOT_XML_CHAR = re.compile("[^\t\n\r\x20-\ud7ff\ue000-\ufffd\U00010000-\U0010ffff]")
"""A character that XML 1.0 cannot hold (W3C XML 1.0, 2.2, production [2])."""


def xml_char_problem(name):
    """'U+XXXX' of the first character of ``name`` that XML 1.0 cannot hold,
    or None.

    >>> xml_char_problem("unit 7"), xml_char_problem("a\\x07b")
    (None, 'U+0007')
    """
    bad = NOT_XML_CHAR.search(name)
    return None if bad is None else f"U+{ord(bad.group()):04X}"


def check_writable(names, where=""):
    """InputError naming the first of ``names`` (unit ids, in order) that
    XML 1.0 cannot hold; ``where`` prefixes the message."""
    for k, name in enumerate(names):
        bad = xml_char_problem(name)
        if bad:
            raise InputError(f"{where}unit {k} ({name!r}): {bad} cannot be "
                             "written (XML 1.0 cannot hold it)")


def unit_labels(W, name="W", *, square=False):
    """The unit ids a labelled matrix carries: a pandas DataFrame's index
    (the post units) as strings, when its columns (the pre units) are the
    same labels in the same order; None for an unlabelled matrix or
    pandas' default 0, 1, 2, ... (a RangeIndex). The labels obey the unit
    table's rules: unique, and writable as XML 1.0 (InputError naming the
    first that is not). With ``square`` (a circuit: one set of units)
    differing row and column labels are refused; otherwise (a rectangular
    W[post, pre]) they are not unit ids: None.

    >>> unit_labels([[0.0, 1.0], [1.0, 0.0]]) is None
    True
    """
    index, columns = getattr(W, "index", None), getattr(W, "columns", None)
    if index is None or columns is None or (
            type(index).__name__ == "RangeIndex"
            and type(columns).__name__ == "RangeIndex"):
        return None
    for axis, labels in (("rows", index), ("columns", columns)):
        k = next((k for k, x in enumerate(labels) if x != x), None)  # NaN
        if k is not None:
            raise InputError(f"{name}: the label of {axis[:-1]} {k} is NaN; "
                             "every unit needs a name")
    rows, cols = [str(x) for x in index], [str(x) for x in columns]
    if rows != cols and sorted(rows) == sorted(cols):
        raise InputError(f"{name}'s columns (pre units) hold its rows' labels "
                         "in another order, so W[post, pre] would pair the "
                         "wrong units; reorder them to match, e.g. "
                         "W.loc[:, W.index]")
    if rows != cols:
        if square:
            raise InputError(f"{name}'s rows (post units) and columns (pre "
                             "units) carry different labels; a circuit's W "
                             "has one set of units, in the same order along "
                             "both")
        return None
    seen = {}
    for k, label in enumerate(rows):
        if label in seen:
            raise InputError(f"{name}: units {seen[label]} and {k} have the "
                             f"same label {label!r}; unit ids must be unique")
        seen[label] = k
    check_writable(rows, f"{name}: ")
    return tuple(rows)
