"""Input files, and numbers in text tables (``.csv``, ``.tsv``, ``.txt``).

Every reader opens its input through :func:`input_file` and
:func:`read_input_bytes`: a missing path, a folder, a named pipe or device
(which would block or never end) and any OSError while reading are one
InputError line, ``{path}: cannot read ({reason})``.

Numbers separated by commas, tabs, or (``.txt``) commas, tabs or white
space. An optional header row (any non-numeric cell in the first row) and
an optional index column (a first column that is non-numeric in every data
row, or under an empty header cell). Anything else non-numeric is an error
that names its row and column (1-based, as a spreadsheet shows them).
"""

import csv
import os
import re
import stat

import numpy as np

from ..errors import InputError
from ..grammar import MAX_NUMBER_TEXT, parse_number

__all__ = ["MAX_NUMBER_CELL", "cannot_read", "input_file", "read_input_bytes",
           "read_text_table", "require_present", "show_cell"]

MAX_NUMBER_CELL = MAX_NUMBER_TEXT
"""The longest cell of a number table (eidecomp.grammar.MAX_NUMBER_TEXT)."""

_NOT_REGULAR = ((stat.S_ISFIFO, "a named pipe"), (stat.S_ISCHR, "a character device"),
                (stat.S_ISBLK, "a block device"), (stat.S_ISSOCK, "a socket"))


def cannot_read(path, exc):
    """The one-line InputError for an OSError met while reading ``path``.

    >>> print(cannot_read("w.npy", PermissionError(13, "Permission denied")))
    w.npy: cannot read (Permission denied)
    """
    reason = getattr(exc, "strerror", None) or str(exc) or type(exc).__name__
    return InputError(f"{path}: cannot read ({reason})")


def _missing(path):
    return InputError(f"{path}: no such file")


def require_present(*paths):
    """InputError ``{path}: no such file`` for the first of ``paths`` (files
    or folders; None skipped) where nothing is: the check a job makes on all
    its inputs before it looks at its output, so that a missing input is
    named first. Other faults (a folder for a file, a pipe) are left to the
    reader, which names them.

    >>> require_present("/", None)
    >>> require_present("/no/such/input.npy")
    Traceback (most recent call last):
    ...
    eidecomp.errors.InputError: /no/such/input.npy: no such file
    """
    for path in paths:
        if path is None:
            continue
        try:
            os.stat(path)
        except FileNotFoundError:
            raise _missing(path) from None
        except (OSError, ValueError):
            pass


def input_file(path, what="input"):
    """``os.stat`` of an input that must be a regular file, else InputError.

    A missing path gives ``{path}: no such file``, a folder ``{path}: is a
    folder, expected a {what} file``; a named pipe, device or socket is
    refused before it is opened (opening a pipe blocks until a writer
    comes), and any other OSError (a parent that is not a folder, a loop of
    links) is ``{path}: cannot read ({reason})``.

    >>> input_file("/dev/null")
    Traceback (most recent call last):
    ...
    eidecomp.errors.InputError: /dev/null: cannot read (a character device, \
not a regular file)
    """
    try:
        st = os.stat(path)
    except FileNotFoundError:
        raise _missing(path) from None
    except (OSError, ValueError) as exc:  # ValueError: a NUL in the path
        raise cannot_read(path, exc) from None
    if stat.S_ISDIR(st.st_mode):
        raise InputError(f"{path}: is a folder, expected a {what} file")
    for test, kind in _NOT_REGULAR:
        if test(st.st_mode):
            raise InputError(f"{path}: cannot read ({kind}, not a regular file)")
    return st


def read_input_bytes(path):
    """All bytes of ``path``; an OSError while opening or reading is one line."""
    try:
        with open(path, "rb") as fh:
            return fh.read()
    except OSError as exc:
        raise cannot_read(path, exc) from None


def show_cell(cell, width=40):
    """``repr`` of a cell for a message, cut to ``width`` characters.

    >>> show_cell("abc")
    "'abc'"
    >>> show_cell("x" * 100, width=5)
    "'xxxxx'... (100 characters)"
    """
    if len(cell) <= width:
        return repr(cell)
    return f"{cell[:width]!r}... ({len(cell)} characters)"


_BLANKS = " \t"
_BLANK_RUN = re.compile(r"[ \t]+")
_LINE_BREAK = re.compile(r"\r\n|\r|\n")



_DECIMAL_COMMA = re.compile(r"^[+-]?\d*,\d+([eE][+-]?\d+)?$")


def _cell_error(path, cell, line_no, col):
    if cell == "":
        what = "empty cell"
    elif _DECIMAL_COMMA.match(cell):
        what = f"decimal comma in {cell!r} (write {cell.replace(',', '.')!r})"
    else:
        what = f"non-numeric cell {show_cell(cell)}"
    return InputError(f"{path}: {what} at row {line_no}, column {col}")


def _cells(path, lines, delimiter):
    """Rows of cells from csv.reader, with the file line each row starts on
    (a quoted cell may span lines); a csv.Error names its line."""
    reader = csv.reader([ln for _, ln in lines], delimiter=delimiter)
    rows, starts, done = [], [], 0
    try:
        for row in reader:
            if reader.line_num - done > 1:  # csv would join the lines' text
                raise InputError(f"{path}: row {lines[done][0]}: a quoted cell "
                                 "runs over a line break (a table of numbers "
                                 "holds none)")
            rows.append(row)
            starts.append(lines[done][0])
            done = reader.line_num
    except csv.Error as exc:
        raise InputError(f"{path}: row {lines[done][0]}: {exc}") from None
    return rows, starts


def _nonblank_lines(path):
    """The file's non-blank lines as (line number, text); owns decoding, the
    empty-file check and the refusal of NUL characters and ';' separators."""
    try:
        text = read_input_bytes(path).decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError(f"{path}: not UTF-8 text (byte {exc.start})") from None
    # ASCII line breaks and blanks only: str.splitlines and str.strip also
    # take U+0085, U+2028, a no-break space..., which no number table holds
    lines = [(k + 1, ln) for k, ln in enumerate(_LINE_BREAK.split(text))
             if ln.strip(_BLANKS)]
    if not lines:
        raise InputError(f"{path}: file is empty")
    for k, ln in lines:
        if "\x00" in ln:
            raise InputError(f"{path}: line {k} holds a NUL character (a binary "
                             "file, or not text?)")
        if ";" in ln:
            raise InputError(f"{path}: line {k} separates cells with ';' (a "
                             "decimal-comma export?); write '.' decimals "
                             "separated by commas or tabs")
    return lines


def _table_rows(path, lines, suffix):
    """Rows of stripped cells and the file line of each row; owns the choice
    of separator by suffix (and, for ``.txt``, by the first line)."""
    first = lines[0][1]
    if suffix == ".csv" or (suffix == ".txt" and "," in first):
        rows, numbers = _cells(path, lines, ",")
    elif suffix == ".tsv" or (suffix == ".txt" and "\t" in first):
        rows, numbers = _cells(path, lines, "\t")
    else:
        rows = [_BLANK_RUN.split(ln.strip(_BLANKS)) for _, ln in lines]
        numbers = [k for k, _ in lines]  # the file's line of each row
    rows = [[c.strip(_BLANKS) for c in row] for row in rows]
    _check_cell_lengths(path, rows, numbers)
    return rows, numbers


def _check_cell_lengths(path, rows, numbers):
    """Refuse a cell longer than :data:`MAX_NUMBER_CELL`, by row and column."""
    for row, line_no in zip(rows, numbers, strict=True):
        for j, c in enumerate(row):
            if len(c) > MAX_NUMBER_CELL:
                raise InputError(f"{path}: cell at row {line_no}, column {j + 1} "
                                 f"has {len(c)} characters (limit "
                                 f"{MAX_NUMBER_CELL} in a table of numbers)")


def _take_header(path, rows, numbers):
    """(header or None, data rows, their lines); owns header detection: a
    first row that starts with a text or empty cell and holds a non-numeric
    one, but a decimal comma there is an error."""
    header = None
    # a header row starts with a text or empty cell; a first row that starts
    # with a number is data, so a typo in it is named, never taken as a header
    if any(parse_number(c) is None for c in rows[0]) and \
            parse_number(rows[0][0]) is None:
        for j, c in enumerate(rows[0]):
            if _DECIMAL_COMMA.match(c):
                raise _cell_error(path, c, numbers[0], j + 1)
        header, rows, numbers = rows[0], rows[1:], numbers[1:]
        from .units import looks_like_unit_table  # units imports this module

        if looks_like_unit_table(header):
            raise InputError(f"{path}: a unit table (columns "
                             f"{', '.join(c.strip() for c in header)}), not a "
                             "matrix; give it with --units")
    if not rows:
        raise InputError(f"{path}: a header row but no numbers")
    return header, rows, numbers


def _has_index(header, rows):
    """Whether the first column is an index: non-numeric in every data row,
    or under an empty header cell of a header as wide as the rows."""
    first_col_text = all(parse_number(r[0]) is None for r in rows if r)
    return first_col_text or (header is not None and header[0] == ""
                              and len(header) == len(rows[0]))


def _is_text_row(cells):
    """Whether every cell is non-empty text that is no number (not even one
    written with a decimal comma): a second header, or a second table."""
    return bool(cells) and all(parse_number(c) is None and c != ""
                               and not _DECIMAL_COMMA.match(c) for c in cells)


def _parse_row(path, row, line_no, width, index, several):
    """The numbers of one data row; owns its width check, the row-of-text
    check (only when ``several`` rows) and each cell's error."""
    if len(row) != width:
        raise InputError(f"{path}: row {line_no} has {len(row)} cells, "
                         f"expected {width} as in the first data row")
    cells = row[1:] if index else row
    if several and _is_text_row(cells):
        raise InputError(f"{path}: row {line_no} holds no numbers (a second "
                         "header, or two tables in one file?)")
    parsed = []
    for j, cell in enumerate(cells):
        v = parse_number(cell)
        if v is None:
            raise _cell_error(path, cell, line_no, j + 1 + index)
        parsed.append(v)
    return parsed


def read_text_table(path, suffix):
    """The numbers of a text table as a float64 array (see the module text).

    ``suffix`` (``.csv``, ``.tsv`` or ``.txt``) chooses the separator; a
    header row and an index column are dropped; any other problem is one
    InputError line naming the file, and the row and column.
    """
    lines = _nonblank_lines(path)
    rows, numbers = _table_rows(path, lines, suffix)
    del lines
    header, rows, numbers = _take_header(path, rows, numbers)
    index = _has_index(header, rows)
    width = len(rows[0])
    several = len(rows) > 1
    values = [_parse_row(path, row, line_no, width, index, several)
              for row, line_no in zip(rows, numbers, strict=True)]
    if header is not None and len(header) != width:
        raise InputError(f"{path}: header has {len(header)} cells but rows have "
                         f"{width}")
    return np.array(values, dtype=np.float64)
