"""The unit table: one row per excitatory unit of W, in W's order."""

import csv
import io as _io
from pathlib import Path

import numpy as np

from ..errors import InputError

__all__ = ["read_units"]


def read_units(path, n_units, *, period=180.0):
    """A table of the excitatory units, one row per unit of W, in W's order.

    A CSV file with a header row. Columns: ``feature`` (the preferred
    feature in degrees, in [0, period)), and optionally ``id`` (unique
    names), ``x`` and ``y`` (positions in micrometres).

    Returns a dict of arrays: ``feature``, and ``id``, ``x``, ``y`` when
    present.
    """
    path = Path(path)
    if not path.is_file():
        raise InputError(f"{path}: unit table not found")
    try:
        text = path.read_text(encoding="utf-8-sig")
    except UnicodeDecodeError:
        raise InputError(f"{path}: unit table is not UTF-8 text") from None
    rows = [r for r in csv.reader(_io.StringIO(text)) if any(c.strip() for c in r)]
    if not rows:
        raise InputError(f"{path}: unit table is empty")
    header = [c.strip().lower() for c in rows[0]]
    if "feature" not in header:
        raise InputError(f"{path}: unit table has no 'feature' column "
                         f"(columns: {', '.join(header)})")
    if len(set(header)) != len(header):
        raise InputError(f"{path}: unit table has a repeated column name")
    body = rows[1:]
    if len(body) != n_units:
        raise InputError(f"{path}: unit table has {len(body)} rows, W has "
                         f"{n_units} units")
    out = {}
    for name in ("feature", "x", "y"):
        if name not in header:
            continue
        j = header.index(name)
        vals = np.empty(len(body))
        for i, row in enumerate(body):
            cell = row[j].strip() if j < len(row) else ""
            try:
                vals[i] = float(cell)
            except ValueError:
                raise InputError(f"{path}: row {i + 2}, column '{name}': "
                                 f"not a number: {cell!r}") from None
            if not np.isfinite(vals[i]):
                raise InputError(f"{path}: row {i + 2}, column '{name}': "
                                 f"{cell} is not finite")
        out[name] = vals
    bad = np.flatnonzero((out["feature"] < 0) | (out["feature"] >= period))
    if bad.size:
        i = int(bad[0])
        raise InputError(f"{path}: row {i + 2}, column 'feature': "
                         f"{out['feature'][i]:g} is outside [0, {period:g})")
    if "id" in header:
        j = header.index("id")
        ids = [row[j].strip() if j < len(row) else "" for row in body]
        seen = {}
        for i, name in enumerate(ids):
            if not name:
                raise InputError(f"{path}: row {i + 2}: missing unit id")
            if name in seen:
                raise InputError(f"{path}: row {i + 2}: duplicate unit id "
                                 f"{name!r} (first on row {seen[name] + 2})")
            seen[name] = i
        out["id"] = np.array(ids, dtype=str)
    return out


