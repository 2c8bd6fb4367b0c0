"""JSON documents read at the boundary (``circuit.json``, ``summary.json``).

:func:`load_json` refuses, in one InputError line naming the file, a
missing or unreadable file, one larger than ``max_bytes`` (checked with
``os.stat`` before reading), text that is not UTF-8, corrupt JSON (with the
line and column of Python's json module), a key given twice in one object,
nesting deeper than
``max_depth`` (found by a linear scan before parsing, so no input reaches
the parser's recursion) and strings longer than ``max_str``. ``NaN`` and
``Infinity`` are accepted: Python's json module writes them, and so does
eidecomp. :func:`require` reads one field with its JSON type checked.
"""

import json
import re
import sys

import numpy as np

from ..errors import InputError
from .text import input_file, read_input_bytes

__all__ = ["DuplicateKeyError", "load_json", "no_duplicate_keys", "require"]

# a JSON string from its opening quote to its closing one, or to the end of
# the text when it is never closed; possessive, so the scan stays linear
_STRING = re.compile(r'"(?:[^"\\]++|\\.)*+"?', re.DOTALL)
_NOT_BRACKET = re.compile(r"[^\[\]{}]++")


def nesting_depth(text):
    """The deepest nesting of arrays and objects in JSON ``text``, counted
    without recursion (brackets inside strings do not count).

    >>> nesting_depth('{"a": [1, [2, "]]]"]], "b": {}}')
    3
    >>> nesting_depth("[" * 100000)
    100000
    """
    brackets = _NOT_BRACKET.sub("", _STRING.sub("", text))
    if not brackets:
        return 0
    b = np.frombuffer(brackets.encode("ascii"), dtype=np.uint8)
    steps = np.where((b == ord("[")) | (b == ord("{")), 1, -1).astype(np.int32)
    return int(np.cumsum(steps, dtype=np.int32).max(initial=0))


def _too_long(doc, max_str):
    """The place ('unit_ids[3]', 'parameters.name') and length of the first
    string (value or key) longer than ``max_str``, or None; iterative."""
    stack = [(doc, "")]
    while stack:
        node, where = stack.pop()
        if isinstance(node, str):
            if len(node) > max_str:
                return where or "the document", len(node)
        elif isinstance(node, dict):
            for k, v in node.items():
                place = f"{where}.{k}" if where else str(k)
                if len(k) > max_str:
                    return f"a key in {where or 'the document'}", len(k)
                stack.append((v, place))
        elif isinstance(node, list):
            stack.extend((v, f"{where}[{i}]") for i, v in enumerate(node))
    return None


class DuplicateKeyError(ValueError):
    """A key given twice in one JSON object (Python's json module keeps the
    last silently; RFC 8259 says the names SHOULD be unique)."""


def no_duplicate_keys(pairs):
    """The ``object_pairs_hook`` of every JSON read: DuplicateKeyError on a
    key given twice in one object."""
    seen = set()
    for key, _ in pairs:
        if key in seen:
            raise DuplicateKeyError(key)
        seen.add(key)
    return dict(pairs)


def load_json(path, *, what="JSON file", max_bytes=16 * 2**20, max_depth=64,
              max_str=2**20):
    """The parsed JSON document in ``path``, checked at the boundary.

    Parameters
    ----------
    path : str or Path
    what : str
        Word used in error messages.
    max_bytes : int
        The largest file read (checked before reading).
    max_depth : int
        The deepest nesting of arrays and objects.
    max_str : int
        The longest string (value or key), in characters.

    Raises
    ------
    InputError
        One line naming the file.

    Examples
    --------
    >>> import tempfile, os
    >>> p = os.path.join(tempfile.mkdtemp(), "doc.json")
    >>> with open(p, "w") as fh:
    ...     _ = fh.write('{"lam": NaN, "rank": 3}')
    >>> load_json(p)
    {'lam': nan, 'rank': 3}
    >>> with open(p, "w") as fh:
    ...     _ = fh.write("[" * 100000)
    >>> load_json(p)  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    eidecomp.errors.InputError: ...doc.json: JSON nested deeper than 64 levels
    """
    size = input_file(path, what).st_size
    if size > max_bytes:
        raise InputError(f"{path}: {what} is {size} bytes, more than the "
                         f"limit of {max_bytes}")
    try:
        text = read_input_bytes(path).decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError(f"{path}: not UTF-8 text (byte {exc.start})") from None
    if nesting_depth(text) > max_depth:
        raise InputError(f"{path}: JSON nested deeper than {max_depth} levels")
    try:
        doc = json.loads(text, object_pairs_hook=no_duplicate_keys)
    except json.JSONDecodeError as exc:
        raise InputError(f"{path}: corrupt JSON ({exc})") from None
    except DuplicateKeyError as exc:
        raise InputError(f"{path}: corrupt JSON (the key {exc.args[0]!r} "
                         "appears twice in one object)") from None
    except ValueError:  # the only other one: int() of too many digits
        raise InputError(f"{path}: corrupt JSON (an integer of more than "
                         f"{sys.get_int_max_str_digits()} digits)") from None
    except RecursionError:  # unreachable below max_depth; kept as a guard
        raise InputError(f"{path}: JSON nested too deeply to read") from None
    long = _too_long(doc, max_str)
    if long:
        raise InputError(f"{path}: {long[0]} is a string of {long[1]} characters "
                         f"(limit {max_str})")
    return doc


_JSON_NAMES = {dict: "an object", list: "an array", str: "a string",
               int: "an integer", float: "a number", bool: "true or false",
               type(None): "null"}


def _json_name(value):
    return next((n for t, n in _JSON_NAMES.items() if type(value) is t),
                type(value).__name__)


def _is(value, kind):
    if kind is float:  # a JSON number: 1 and 1.0 alike, never true/false
        return isinstance(value, (int, float)) and not isinstance(value, bool)
    if kind is int:
        return isinstance(value, int) and not isinstance(value, bool)
    return isinstance(value, kind)


def require(doc, key, kinds, where):
    """``doc[key]``, refused in one line when missing or of another JSON type.

    ``kinds`` is a type or a tuple of types (``dict``, ``list``, ``str``,
    ``int``, ``float`` for any number, ``bool``, ``type(None)``); ``where``
    starts the message (the file).

    >>> require({"rank": 3}, "rank", int, "summary.json")
    3
    >>> require({"rank": 3}, "lam", float, "summary.json")
    Traceback (most recent call last):
    ...
    eidecomp.errors.InputError: summary.json: missing key 'lam'
    >>> require({"rank": "3"}, "rank", (int, type(None)), "summary.json")
    Traceback (most recent call last):
    ...
    eidecomp.errors.InputError: summary.json: key 'rank' must be an integer or \
null (got a string)
    """
    if not isinstance(doc, dict):
        raise InputError(f"{where}: must be a JSON object (got {_json_name(doc)})")
    if key not in doc:
        raise InputError(f"{where}: missing key {key!r}")
    kinds = kinds if isinstance(kinds, tuple) else (kinds,)
    value = doc[key]
    if not any(_is(value, k) for k in kinds):
        names = " or ".join(_JSON_NAMES.get(k, k.__name__) for k in kinds)
        raise InputError(f"{where}: key {key!r} must be {names} (got "
                         f"{_json_name(value)})")
    return value
