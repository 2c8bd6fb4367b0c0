"""The unit table: one row per excitatory unit of W, in W's order.

Read as Python's csv module expects (``newline=""``: a carriage return or
line break inside a quoted name is kept exactly). A cell longer than
:data:`MAX_FIELD` characters, a csv.Error, and a character that XML 1.0
cannot hold (W3C XML 1.0, section 2.2, production [2] ``Char``: NUL and the
other C0 controls but tab, LF and CR, U+FFFE, U+FFFF) are refused when the
table is read, naming the row and column: the exports write GraphML and
NeuroML2, which cannot carry them.
"""

import csv
import difflib
import io as _io
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import InputError
from ..grammar import parse_number
from ..names import NOT_XML_CHAR
from ..params import DEFAULT_PERIOD
from .text import input_file, read_input_bytes, show_cell

__all__ = ["MAX_FIELD", "POSITION_UNITS", "UnitTable",
           "read_unit_table", "read_units"]

MAX_FIELD = 4096
"""The longest cell of a unit table, in characters (a unit id, a number):
common practice for a name; Python's csv module itself stops at 131072."""


def _rows(path, text):
    """The non-blank records of a unit table; a csv.Error names its row."""
    rows = []
    reader = csv.reader(_io.StringIO(text, newline=""))
    try:
        for r in reader:
            if any(c.strip() for c in r):
                rows.append(r)
            elif len(r) > 1:        # ',' alone: a unit's row left empty
                raise InputError(f"{path}: line {reader.line_num} holds only "
                                 "separators; every unit needs its row")
    except csv.Error as exc:
        raise InputError(f"{path}: row {len(rows) + 1}: {exc}") from None
    return rows


def _check_cells(path, rows):
    """Refuse cells no export can write, and overlong cells, by row/column."""
    header = rows[0]
    for i, row in enumerate(rows):
        for j, cell in enumerate(row):
            name = header[j].strip().lower() if i and j < len(header) else ""
            col = f"column {name!r}" if name and not NOT_XML_CHAR.search(name) \
                else f"column {j + 1}"
            if len(cell) > MAX_FIELD:
                raise InputError(f"{path}: row {i + 1}, {col}: a cell of "
                                 f"{len(cell)} characters (limit {MAX_FIELD})")
            bad = NOT_XML_CHAR.search(cell)
            if bad:
                raise InputError(f"{path}: row {i + 1}, {col}: character "
                                 f"U+{ord(bad.group()):04X} cannot be stored in "
                                 "XML (GraphML, NeuroML2)")


def _read_rows(path):
    """The records of the unit table at ``path``; owns the file checks, the
    decoding, the empty-table check and the check of every cell."""
    input_file(path, "unit table")
    try:
        text = read_input_bytes(path).decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InputError(f"{path}: unit table is not UTF-8 text") from None
    rows = _rows(path, text)
    if not rows:
        raise InputError(f"{path}: unit table is empty")
    _check_cells(path, rows)
    return rows


UNIT_COLUMNS = ("id", "feature", "x", "y")
"""The columns a unit table may hold (README, the --units option)."""


def looks_like_unit_table(header):
    """Whether a table's header row names a unit table's columns (a
    'feature' column, and nothing else but id, x, y): a matrix reader then
    says what the file is instead of reading its numbers.

    >>> looks_like_unit_table(["id", "Feature", "x"]), looks_like_unit_table(["a", "b"])
    (True, False)
    """
    names = [c.strip().lower() for c in header]
    return "feature" in names and set(names) <= set(UNIT_COLUMNS)


def _missing_feature(path, names):
    """The one-line refusal of a header without 'feature': the user's column
    names closest to it (difflib, case ignored), as the user spelled them.

    >>> print(_missing_feature("u.csv", ["ID", "Featur", "X"]).args[0])
    u.csv: unit table has no 'feature' column (closest: 'Featur')
    >>> print(_missing_feature("u.csv", ["id", "x"]).args[0])
    u.csv: unit table has no 'feature' column (no column name is close to it)
    """
    spelled = {}
    for name in names:
        spelled.setdefault(name.strip().lower(), name.strip())
    close = difflib.get_close_matches("feature", list(spelled), n=3)
    said = (f"closest: {', '.join(show_cell(spelled[c]) for c in close)}"
            if close else "no column name is close to it")
    return InputError(f"{path}: unit table has no 'feature' column ({said})")


def _check_header(path, header, n_rows, n_units, names=None):
    """Refuse a header without 'feature' or with a repeated name, and a
    table whose number of data rows is not W's number of units. ``header``
    is lowercased; ``names`` are the columns as the user spelled them."""
    if "feature" not in header:
        raise _missing_feature(path, header if names is None else names)
    if len(set(header)) != len(header):
        raise InputError(f"{path}: unit table has a repeated column name")
    if n_rows != n_units:
        raise InputError(f"{path}: unit table has {n_rows} rows, W has "
                         f"{n_units} units")


def _check_widths(path, header, body):
    """Refuse a data row with more cells than the header (a cell that would
    belong to no column); a short row is refused where its cell is read."""
    for i, row in enumerate(body):
        if len(row) > len(header):
            raise InputError(f"{path}: row {i + 2} has {len(row)} cells, the "
                             f"header {len(header)}")


def _number_column(path, body, j, name):
    """Column ``j`` (called ``name``) of the data rows as finite float64; a
    missing cell counts as empty, and is not a number."""
    vals = np.empty(len(body))
    for i, row in enumerate(body):
        cell = row[j].strip(" \t") if j < len(row) else ""
        value = parse_number(cell)
        if value is None:
            raise InputError(f"{path}: row {i + 2}, column '{name}': "
                             f"not a number: {show_cell(cell)}")
        vals[i] = value
        if not np.isfinite(vals[i]):
            raise InputError(f"{path}: row {i + 2}, column '{name}': "
                             f"{cell if len(cell) <= 40 else show_cell(cell)} "
                             "is not finite")
    return vals


def _check_feature_range(path, feature, period):
    """Refuse the first preferred feature outside [0, period)."""
    bad = np.flatnonzero((feature < 0) | (feature >= period))
    if bad.size:
        i = int(bad[0])
        raise InputError(f"{path}: row {i + 2}, column 'feature': "
                         f"{feature[i]:g} is outside [0, {period:g})")


def _unit_ids(path, body, j):
    """Column ``j`` of the data rows as unit ids; owns the refusal of a
    missing id and of a repeated one (naming the row it first appears on)."""
    ids = [row[j] if j < len(row) else "" for row in body]  # exactly as given
    seen = {}
    for i, name in enumerate(ids):
        if not name.strip():
            raise InputError(f"{path}: row {i + 2}: missing unit id")
        if name in seen:
            raise InputError(f"{path}: row {i + 2}: duplicate unit id "
                             f"{show_cell(name)} (first on row "
                             f"{seen[name] + 2})")
        seen[name] = i
    return np.array(ids, dtype=str)


def read_units(path, n_units, *, period=DEFAULT_PERIOD):
    """A table of the excitatory units, one row per unit of W, in W's order.

    A CSV file with a header row. Columns: ``feature`` (the preferred
    feature in degrees, in [0, period)), and optionally ``id`` (unique
    names), ``x`` and ``y`` (positions in micrometres).

    Returns a dict of arrays: ``feature``, and ``id``, ``x``, ``y`` when
    present.
    """
    rows = _read_rows(path)                 # as given: 'u.csv/' is no file
    path = Path(path)
    header = [c.strip().lower() for c in rows[0]]
    body = rows[1:]
    _check_header(path, header, len(body), n_units, rows[0])
    _check_widths(path, header, body)
    out = {name: _number_column(path, body, header.index(name), name)
           for name in ("feature", "x", "y") if name in header}
    _check_feature_range(path, out["feature"], period)
    if "id" in header:
        out["id"] = _unit_ids(path, body, header.index("id"))
    return out


@dataclass(frozen=True)
class UnitTable:
    """The unit table as a job uses it: features (degrees), positions
    (micrometres of cortex, N x 2) and ids; None where the table has none."""

    path: str | None = None
    features: np.ndarray | None = field(default=None, repr=False)
    positions: np.ndarray | None = field(default=None, repr=False)
    ids: list | None = field(default=None, repr=False)


POSITION_UNITS = ("um", "deg")


def _check_position_options(period, position_unit, magnification, has_table):
    """The unit-table options on their own: a known position unit, a
    magnification exactly when positions are in degrees, and none of them
    without a table."""
    if position_unit not in POSITION_UNITS:
        raise InputError(f"position unit {position_unit!r}: use um or deg")
    if position_unit == "deg" and not (magnification or 0) > 0:
        raise InputError("positions in degrees need --magnification "
                         "(micrometres of cortex per degree of visual field)")
    if magnification is not None and position_unit != "deg":
        raise InputError("--magnification applies to positions in degrees "
                         "(--position-unit deg)")
    if not has_table:
        for flag, set_ in (("--period", period != DEFAULT_PERIOD),
                           ("--position-unit", position_unit != POSITION_UNITS[0])):
            if set_:
                raise InputError(f"{flag} applies to a unit table (--units)")


def _positions(path, table, position_unit, magnification):
    """Positions in micrometres of cortex (N x 2), or None: x and y both or
    neither, degrees of visual field times the cortical magnification."""
    has_x, has_y = "x" in table, "y" in table
    if position_unit == "deg" and not (has_x or has_y):
        raise InputError(f"{path}: --position-unit deg, but the table has no "
                         "x and y columns")
    if has_x != has_y:
        raise InputError(f"{path}: positions need both an x and a y column")
    if not has_x:
        return None
    scale = magnification if position_unit == "deg" else 1.0
    return np.column_stack([table["x"], table["y"]]) * scale


def read_unit_table(path, n_units, *, period=DEFAULT_PERIOD,
                    position_unit=POSITION_UNITS[0],
                    magnification=None):
    """:func:`read_units` with the position rule applied: x and y both or
    neither; positions in degrees of visual field become micrometres through
    the cortical magnification. ``path`` None gives an empty UnitTable (the
    options are still checked)."""
    _check_position_options(period, position_unit, magnification,
                            path is not None)
    if path is None:
        return UnitTable()
    table = read_units(path, n_units, period=period)
    positions = _positions(path, table, position_unit, magnification)
    ids = [str(u) for u in table["id"]] if "id" in table else None
    return UnitTable(str(path), table.get("feature"), positions, ids)
