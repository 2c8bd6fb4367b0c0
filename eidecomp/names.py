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

__all__ = ["NOT_XML_CHAR", "xml_char_problem"]

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
