"""The one grammar of numbers written as text: matrix and unit-table cells,
numeric options, E:I ratios, grids.

ASCII digits, an optional point and exponent, spaces or tabs around; the
words nan, inf and infinity are numbers here so that the readers can refuse
them as not finite by name. Python's ``float()`` and ``int()`` alone take
more: ``1_0`` as 10 (PEP 515), full-width and other Unicode digits, a
no-break space around them.

>>> parse_number(" -1.5e3"), parse_number("1_0"), parse_number("\\uff11")
(-1500.0, None, None)
>>> parse_integer("12"), parse_integer("1.0"), parse_integer("\\u0663")
(12, None, None)
"""

import re

__all__ = ["INTEGER", "MAX_NUMBER_TEXT", "NUMBER", "NUMBER_BODY",
           "parse_integer", "parse_number"]

MAX_NUMBER_TEXT = 1024
"""The longest text read as a number, in characters: the exact decimal
expansion of any float64 has at most 767 significant digits (IEEE 754
binary64: 53-bit significand, exponent down to -1074), so a longer text is
not a number written by any program."""

NUMBER_BODY = (r"[+-]?(?:(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?"
               r"|(?i:nan|inf|infinity))")
"""A number without the blanks around it (for patterns built on it)."""

NUMBER = re.compile(rf"[ \t]*{NUMBER_BODY}[ \t]*")
INTEGER = re.compile(r"[ \t]*[+-]?[0-9]+[ \t]*")


def parse_number(text):
    """The float that ``text`` spells under :data:`NUMBER`, else None."""
    if len(text) > MAX_NUMBER_TEXT or not NUMBER.fullmatch(text):
        return None
    return float(text)


def parse_integer(text):
    """The int that ``text`` spells under :data:`INTEGER`, else None."""
    if len(text) > MAX_NUMBER_TEXT or not INTEGER.fullmatch(text):
        return None
    return int(text)
