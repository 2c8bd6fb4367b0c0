"""Numbers in text tables: ``.csv``, ``.tsv`` and ``.txt``.

Numbers separated by commas, tabs, or (``.txt``) commas, tabs or white
space. An optional header row (any non-numeric cell in the first row) and
an optional index column (a first column that is non-numeric in every data
row, or under an empty header cell). Anything else non-numeric is an error
that names its row and column (1-based, as a spreadsheet shows them).
"""

import csv
import re
from pathlib import Path

import numpy as np

from ..errors import InputError

__all__ = ["read_text_table"]


def _parse_float(cell):
    try:
        return float(cell)
    except ValueError:
        return None


_DECIMAL_COMMA = re.compile(r"^[+-]?\d*,\d+([eE][+-]?\d+)?$")


def _cell_error(path, cell, line_no, col):
    if cell == "":
        what = "empty cell"
    elif _DECIMAL_COMMA.match(cell):
        what = f"decimal comma in {cell!r} (write {cell.replace(',', '.')!r})"
    else:
        what = f"non-numeric cell {cell!r}"
    return InputError(f"{path}: {what} at row {line_no}, column {col}")


def read_text_table(path, suffix):
    try:
        text = Path(path).read_text(encoding="utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError(f"{path}: not UTF-8 text (byte {exc.start})") from None
    lines = [(k + 1, ln) for k, ln in enumerate(text.splitlines()) if ln.strip()]
    if not lines:
        raise InputError(f"{path}: file is empty")
    for k, ln in lines:
        if ";" in ln:
            raise InputError(f"{path}: line {k} separates cells with ';' (a "
                             "decimal-comma export?); write '.' decimals "
                             "separated by commas or tabs")
    first = lines[0][1]
    if suffix == ".csv" or (suffix == ".txt" and "," in first):
        rows = list(csv.reader([ln for _, ln in lines]))
    elif suffix == ".tsv" or (suffix == ".txt" and "\t" in first):
        rows = list(csv.reader([ln for _, ln in lines], delimiter="\t"))
    else:
        rows = [ln.split() for _, ln in lines]
    numbers = [k for k, _ in lines]  # the file's line of each row
    rows = [[c.strip() for c in row] for row in rows]
    header = None
    if any(_parse_float(c) is None for c in rows[0]):
        for j, c in enumerate(rows[0]):
            if _DECIMAL_COMMA.match(c):
                raise _cell_error(path, c, numbers[0], j + 1)
        header, rows, numbers = rows[0], rows[1:], numbers[1:]
    if not rows:
        raise InputError(f"{path}: a header row but no numbers")
    first_col_text = all(_parse_float(r[0]) is None for r in rows if r)
    index = first_col_text or (header is not None and header[0] == ""
                               and len(header) == len(rows[0]))
    width = len(rows[0])
    values = []
    for row, line_no in zip(rows, numbers, strict=True):
        if len(row) != width:
            raise InputError(f"{path}: row {line_no} has {len(row)} cells, "
                             f"expected {width} as in the first data row")
        cells = row[1:] if index else row
        if len(rows) > 1 and cells and all(_parse_float(c) is None and c != ""
                                           and not _DECIMAL_COMMA.match(c)
                                           for c in cells):
            raise InputError(f"{path}: row {line_no} holds no numbers (a second "
                             "header, or two tables in one file?)")
        parsed = []
        for j, cell in enumerate(cells):
            v = _parse_float(cell)
            if v is None:
                raise _cell_error(path, cell, line_no, j + 1 + index)
            parsed.append(v)
        values.append(parsed)
    if header is not None and len(header) != width:
        raise InputError(f"{path}: header has {len(header)} cells but rows have "
                         f"{width}")
    return np.array(values, dtype=np.float64)


