"""Read weight matrices and masks; write result folders atomically.

Formats read (chosen by the file's ending):

``.npy``
    One array. Loaded with ``allow_pickle=False``: a file holding Python
    objects is refused, never unpickled.
``.npz``
    Several named arrays; ``key`` names one, or the file must hold exactly one.
``.csv`` / ``.tsv`` / ``.txt``
    Numbers separated by commas, tabs, or (``.txt``) commas, tabs or white
    space. An optional header row (any non-numeric cell in the first row) and
    an optional index column (a first column that is non-numeric in every data
    row, or under an empty header cell). Anything else non-numeric is an error
    that names its row and column (1-based, as a spreadsheet shows them).
``.mat``
    MATLAB files up to v7 (scipy.io.loadmat); ``key`` names the variable, or
    the file must hold exactly one.

Every matrix is W[post, pre]: row = target, column = source. ``transpose=True``
reads a file stored as [pre, post]. Errors are :class:`~eidecomp.errors.InputError`
with one line that names the file.

Writing: :func:`write_folder` writes every file of a result into a temporary
folder beside the target and renames it into place, so a failed or interrupted
run leaves no half-written output; an existing target is replaced only with
``force=True``.
"""

import csv
import hashlib
import io as _io
import json
import os
import re
import shutil
import tempfile
from contextlib import contextmanager
from pathlib import Path

import numpy as np

from .errors import InputError, WriteError

__all__ = [
    "CIRCUIT_FORMAT",
    "CIRCUIT_VERSION",
    "circuit_files",
    "file_checksum",
    "read_circuit",
    "read_kernel",
    "read_mask",
    "read_matrix",
    "read_units",
    "staged_folder",
    "write_file",
    "write_folder",
]

CIRCUIT_FORMAT = "eidecomp-circuit"
CIRCUIT_VERSION = 1
CIRCUIT_BLOCKS = ("J_EE", "J_EU", "J_UE", "J_ET", "J_TE")

MATRIX_SUFFIXES = (".npy", ".npz", ".csv", ".tsv", ".txt", ".mat")


def file_checksum(path):
    """SHA-256 of a file's bytes, as hex; of a folder (a zarr array), over
    its files' relative paths and bytes in sorted order."""
    path = Path(path)
    h = hashlib.sha256()
    files = sorted(p for p in path.rglob("*") if p.is_file()) if path.is_dir() \
        else [path]
    for f in files:
        if path.is_dir():
            h.update(f.relative_to(path).as_posix().encode() + b"\0")
        with open(f, "rb") as fh:
            for chunk in iter(lambda: fh.read(1 << 20), b""):
                h.update(chunk)
    return h.hexdigest()


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


def _read_text(path, suffix):
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
    for row, line_no in zip(rows, numbers):
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


def _npy_header(path):
    """(shape, dtype) from a .npy file's header, checked against the file's
    size before any data is read; a header promising Python objects is
    refused here, so nothing is ever unpickled."""
    fmt = np.lib.format
    with open(path, "rb") as fh:
        if fh.read(6) != b"\x93NUMPY":  # else np.load would try pickle
            raise InputError(f"{path}: not a .npy file (no NumPy header)")
        fh.seek(0)
        try:
            major, _ = fmt.read_magic(fh)
            read = fmt.read_array_header_1_0 if major == 1 else \
                fmt.read_array_header_2_0
            shape, _, dtype = read(fh)
        except (ValueError, SyntaxError, TypeError, EOFError, OSError) as exc:
            raise InputError(f"{path}: corrupt .npy header "
                             f"({str(exc).splitlines()[0][:80]})") from None
        data_start = fh.tell()
    if dtype.hasobject:
        raise InputError(f"{path}: holds Python objects; refused (eidecomp "
                         "never unpickles)")
    expected = int(np.prod(shape, dtype=np.float64)) * dtype.itemsize
    found = os.path.getsize(path) - data_start
    if found < expected:
        raise InputError(f"{path}: truncated .npy file: its header promises "
                         f"{expected} bytes for shape {shape}, {found} follow")
    return shape, dtype


def _pick(path, names, key, kind):
    if key is not None:
        if key not in names:
            raise InputError(f"{path}: no {kind} named {key!r}; it holds "
                             f"{', '.join(sorted(names)) or 'nothing'}")
        return key
    if len(names) != 1:
        raise InputError(f"{path}: holds {len(names)} {kind}s "
                         f"({', '.join(sorted(names))}); name one with --key")
    return next(iter(names))


def _load_array(path, key):
    suffix = path.suffix.lower()
    if suffix == ".npy":
        _npy_header(path)
        try:
            return np.load(path, allow_pickle=False)
        except ValueError as exc:
            if "pickle" in str(exc).lower() or "object" in str(exc).lower():
                raise InputError(f"{path}: holds Python objects; refused "
                                 "(eidecomp never unpickles)") from None
            raise InputError(f"{path}: not a valid .npy file ({exc})") from None
        except (OSError, EOFError) as exc:
            raise InputError(f"{path}: not a valid .npy file ({exc})") from None
    if suffix == ".npz":
        try:
            with np.load(path, allow_pickle=False) as data:
                name = _pick(path, data.files, key, "array")
                return data[name]
        except InputError:
            raise
        except Exception as exc:  # zipfile, zlib and numpy errors alike
            msg = (str(exc).splitlines() or [type(exc).__name__])[0][:80]
            if "pickle" in msg.lower() or "object" in msg.lower():
                raise InputError(f"{path}: holds Python objects; refused "
                                 "(eidecomp never unpickles)") from None
            raise InputError(f"{path}: not a valid .npz file ({msg})") from None
    if suffix in (".csv", ".tsv", ".txt"):
        return _read_text(path, suffix)
    if suffix == ".mat":
        import scipy.io

        try:
            data = scipy.io.loadmat(path)
        except NotImplementedError:
            raise InputError(f"{path}: MATLAB v7.3 (HDF5) files are not read; "
                             "save with -v7 or as .npy") from None
        except Exception as exc:  # scipy raises many kinds on corrupt files
            first = (str(exc).splitlines() or [type(exc).__name__])[0][:80]
            raise InputError(f"{path}: not a valid .mat file ({first})") from None
        names = [k for k in data if not k.startswith("__")]
        return data[_pick(path, names, key, "variable")]
    raise InputError(f"{path}: unknown file type {suffix or '(none)'!r}; "
                     f"expected one of {', '.join(MATRIX_SUFFIXES)}")


def read_matrix(path, *, key=None, transpose=False, square=True, what="matrix"):
    """Read a real 2-D float64 matrix W[post, pre] from ``path``.

    Parameters
    ----------
    path : str or Path
    key : str or None
        Array name in an ``.npz`` or variable in a ``.mat`` file.
    transpose : bool
        The file is stored [pre, post]; return its transpose.
    square : bool
        Require a square matrix (a weight matrix among one set of neurons).
    what : str
        Word used in error messages.

    Returns
    -------
    ndarray of float64, shape (n_post, n_pre)

    Raises
    ------
    InputError
        Missing file, unreadable format, non-numeric or non-finite values,
        wrong dimensionality or shape; the message names the file.

    Examples
    --------
    >>> import numpy as np, tempfile, os
    >>> from eidecomp.io import read_matrix
    >>> path = os.path.join(tempfile.mkdtemp(), "w.csv")
    >>> with open(path, "w") as fh:
    ...     _ = fh.write("post,a,b\\na,0,1.5\\nb,-2,0\\n")
    >>> read_matrix(path)
    array([[ 0. ,  1.5],
           [-2. ,  0. ]])
    """
    path = Path(path)
    if not path.exists():
        raise InputError(f"{path}: no such file")
    if path.is_dir():
        raise InputError(f"{path}: is a folder, expected a {what} file")
    if path.stat().st_size == 0:
        raise InputError(f"{path}: file is empty")
    arr = np.asarray(_load_array(path, key))
    if arr.dtype.kind not in "biuf":
        kind = {"c": "complex", "U": "text", "S": "text", "O": "object",
                "V": "structured"}.get(arr.dtype.kind, str(arr.dtype))
        raise InputError(f"{path}: holds {kind} values; a real numeric {what} "
                         "is needed")
    if arr.ndim != 2:
        raise InputError(f"{path}: {what} must be 2-D, got {arr.ndim}-D shape "
                         f"{arr.shape}")
    if arr.size == 0:
        raise InputError(f"{path}: {what} is empty (shape {arr.shape})")
    if arr.dtype.kind in "iu" and np.abs(arr).max() > 2**53:
        raise InputError(f"{path}: integer values beyond 2**53 lose precision "
                         "as float64")
    with np.errstate(over="ignore"):
        W = arr.astype(np.float64)
    bad = ~np.isfinite(W)
    if bad.any():
        i, j = np.argwhere(bad)[0]
        raise InputError(f"{path}: {int(bad.sum())} non-finite value(s) (NaN, "
                         f"Inf or beyond float64's range), first at row {i + 1}, "
                         f"column {j + 1}")
    check_range(W, path, what)
    if transpose:
        W = np.ascontiguousarray(W.T)
    if square and W.shape[0] != W.shape[1]:
        raise InputError(f"{path}: {what} must be square (W[post, pre] among one "
                         f"set of neurons), got shape {W.shape}")
    return W


MAX_MAGNITUDE = {np.float64: 1e100, np.float32: 1e15}
"""The largest |w| accepted in each working dtype, and the reciprocal of the
smallest largest |w|: the solvers square entries (float64 overflows near
1e308 and underflows near 1e-308, float32 near 3e38 and 1e-38), and results
scale with W, so a matrix outside is rescaled by its user rather than
silently overflowed."""


def range_stats(W, row0=0):
    """(largest |w|, its (row, column), its value, number of subnormals, the
    first subnormal's (row, column)) of a block whose first row is ``row0``."""
    A = np.abs(W)
    k = int(A.argmax()) if A.size else 0
    top = float(A.flat[k]) if A.size else 0.0
    where = (row0 + k // max(W.shape[1], 1), k % max(W.shape[1], 1))
    sub = (A != 0) & (A < np.finfo(W.dtype if W.dtype.kind == "f"
                                   else np.float64).tiny)
    n_sub = int(sub.sum())
    first = None
    if n_sub:
        i, j = np.argwhere(sub)[0]
        first = (row0 + int(i), int(j))
    return top, where, float(W.flat[k]) if A.size else 0.0, n_sub, first


def merge_range_stats(parts):
    """range_stats of a matrix from those of its blocks (in row order)."""
    top, where, value, n_sub, first = 0.0, (0, 0), 0.0, 0, None
    for t, w, v, n, f in parts:
        if t > top or t != t:  # a NaN, once seen, stays the answer
            top, where, value = t, w, v
        n_sub += n
        first = first if first is not None else f
    return top, where, value, n_sub, first


def range_error(name, stats, what="matrix", base=1, dtype=np.float64):
    """The InputError for magnitudes the solvers cannot square, or None."""
    top, (i, j), value, n_sub, first = stats
    limit = MAX_MAGNITUDE[np.dtype(dtype).type]
    if top > limit:
        return InputError(f"{name}: value {value:.3g} at row {i + base}, column "
                          f"{j + base} is too large (limit {limit:.0e}: the "
                          f"solvers square entries); rescale the {what}, "
                          "results scale with it")
    if 0 < top < 1 / limit:
        return InputError(f"{name}: the largest |value| is {top:.3g}, too small "
                          f"(limit {1 / limit:.0e}: squares underflow); "
                          f"rescale the {what}, results scale with it")
    if n_sub:
        tiny = np.finfo(dtype).tiny
        return InputError(f"{name}: {n_sub} subnormal value(s) (nonzero but "
                          f"below {tiny:.2g}, without full precision), first at "
                          f"row {first[0] + base}, column {first[1] + base}; set "
                          f"them to 0 or rescale the {what}")
    return None


def check_range(W, name, what="matrix", base=1, dtype=np.float64):
    """Refuse magnitudes the solvers cannot square, and subnormal values.

    Works over blocks of rows (no full temporary). ``name`` starts the
    message (a file, or "W"); ``base`` numbers rows and columns from 1 (as
    a spreadsheet) or 0 (as numpy).
    """
    rows = max(1, (1 << 22) // max(W.shape[1], 1))
    stats = merge_range_stats(range_stats(W[s:s + rows], s)
                              for s in range(0, W.shape[0], rows))
    exc = range_error(name, stats, what, base, dtype)
    if exc is not None:
        raise exc


def read_mask(path, shape, *, key=None, transpose=False):
    """Read a mask of *unobserved* entries; return the *observed* boolean array.

    The file holds 1 (or True) where an entry is unobserved and 0 where it is
    observed, with W's shape and orientation.
    """
    M = read_matrix(path, key=key, transpose=transpose, square=False,
                    what="mask")
    if M.shape != tuple(shape):
        raise InputError(f"{path}: mask has shape {M.shape} but the matrix has "
                         f"shape {tuple(shape)}")
    if not np.isin(M, (0.0, 1.0)).all():
        raise InputError(f"{path}: mask must hold only 0 (observed) and 1 "
                         "(unobserved)")
    return M == 0.0


def _npy_bytes(arr):
    buf = _io.BytesIO()
    np.save(buf, np.ascontiguousarray(arr), allow_pickle=False)
    return buf.getvalue()


def _check_target(out, force, folder):
    if out.exists() and not force:
        raise InputError(f"{out}: already exists; use --force to replace it")
    if out.exists() and out.is_dir() != folder:
        raise InputError(f"{out}: exists and is not a {'folder' if folder else 'file'}")
    parent = out.resolve().parent
    if not parent.is_dir():
        raise InputError(f"{out}: parent folder {parent} does not exist")
    return parent


def _write_error(out, exc, existed):
    reason = exc.strerror or str(exc) or type(exc).__name__
    return WriteError(f"{out}: cannot write ({reason}); nothing written"
                      + (", the existing one is unchanged" if existed else ""))


def _write_bytes(path, data):
    """One file, flushed to disk before it counts as written."""
    with open(path, "wb") as fh:
        fh.write(data)
        fh.flush()
        os.fsync(fh.fileno())


@contextmanager
def staged_folder(out, *, force=False):
    """A temporary folder beside ``out``, renamed to ``out`` when the block
    ends without error.

    On any error or interrupt the temporary folder is removed and an
    existing ``out`` is left as it was; an OSError (a full disk, a file
    size limit) becomes a :class:`~eidecomp.errors.WriteError` saying so.

    >>> import tempfile, pathlib
    >>> out = pathlib.Path(tempfile.mkdtemp()) / "result"
    >>> with staged_folder(out) as tmp:
    ...     _ = (tmp / "a.txt").write_text("done")
    >>> sorted(p.name for p in out.iterdir())
    ['a.txt']
    """
    out = Path(out)
    parent = _check_target(out, force, folder=True)
    existed = out.exists()
    tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}.", suffix=".partial",
                                dir=parent))
    old = None
    try:
        yield tmp
        if existed:
            old = out.with_name(f".{out.name}.old-{os.getpid()}")
            os.rename(out, old)
        os.rename(tmp, out)
    except BaseException as exc:
        shutil.rmtree(tmp, ignore_errors=True)
        if old is not None and not out.exists():
            os.rename(old, out)
        if isinstance(exc, OSError):
            raise _write_error(out, exc, existed) from None
        raise
    if old is not None:
        shutil.rmtree(old, ignore_errors=True)


def write_file(out, data, *, force=False):
    """Write bytes to ``out`` through a temporary file renamed into place."""
    out = Path(out)
    parent = _check_target(out, force, folder=False)
    existed = out.exists()
    fd, tmp = tempfile.mkstemp(prefix=f".{out.name}.", suffix=".partial",
                               dir=parent)
    os.close(fd)
    try:
        _write_bytes(tmp, data)
        os.replace(tmp, out)
    except BaseException as exc:
        if os.path.exists(tmp):
            os.unlink(tmp)
        if isinstance(exc, OSError):
            raise _write_error(out, exc, existed) from None
        raise
    return out


def _file_bytes(value):
    if isinstance(value, np.ndarray):
        return _npy_bytes(value)
    if isinstance(value, dict):
        return (json.dumps(value, indent=2, sort_keys=True, allow_nan=True)
                + "\n").encode()
    if isinstance(value, str):
        return value.encode()
    return bytes(value)


def write_folder(out, files, *, force=False):
    """Write ``files`` (name -> ndarray | dict | str | bytes) into folder ``out``.

    Arrays become ``.npy``, dicts JSON (sorted keys), str UTF-8 text. Written
    through :func:`staged_folder`: all or nothing, and an existing ``out``
    is replaced only with ``force``.
    """
    with staged_folder(out, force=force) as tmp:
        for name, value in files.items():
            _write_bytes(tmp / name, _file_bytes(value))
    return Path(out)


# --- kernels -------------------------------------------------------------------

def read_kernel(path, *, key=None):
    """A 4-D kernel K[post_feature, pre_feature, dy, dx] from .npy or .npz."""
    path = Path(path)
    if not path.is_file():
        raise InputError(f"{path}: kernel file not found")
    if path.suffix.lower() not in (".npy", ".npz"):
        raise InputError(f"{path}: a kernel must be a .npy or .npz file")
    arr = _load_array(path, key)
    if arr.ndim != 4:
        raise InputError(f"{path}: expected a 4-D kernel K[post_feature, "
                         f"pre_feature, dy, dx], got a {arr.ndim}-D array "
                         f"of shape {arr.shape}")
    return arr


# --- unit tables ---------------------------------------------------------------

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


# --- circuit bundles ------------------------------------------------------------

def circuit_files(circuit, meta):
    """The files of a circuit bundle: the blocks as .npy, and circuit.json.

    ``meta`` (a dict: parameters, metrics, provenance) is stored in
    circuit.json with the format name and version, the populations and the
    SHA-256 of every block file, which :func:`read_circuit` verifies.
    """
    files = {f"{b}.npy": np.asarray(getattr(circuit, b)) for b in CIRCUIT_BLOCKS}
    sums = {name: hashlib.sha256(_npy_bytes(a)).hexdigest()
            for name, a in files.items()}
    doc = {"format": CIRCUIT_FORMAT, "format_version": CIRCUIT_VERSION,
           "convention": "blocks are nonnegative magnitudes, [post, pre]; "
                         "the sign is the presynaptic population's",
           "populations": [{"name": p.name, "kind": p.kind, "size": p.size,
                            "sign": p.sign} for p in circuit.populations],
           "sha256": sums, **meta}
    files["circuit.json"] = doc
    return files


def read_circuit(folder):
    """Load a circuit bundle written by ``eidecomp assemble`` or ``run``.

    Checks the format name and version, every block's checksum, and the
    shapes and signs of the blocks. Returns ``(Circuit, meta)`` where meta is
    the parsed circuit.json.
    """
    from .types import Circuit

    folder = Path(folder)
    doc_path = folder / "circuit.json"
    if not folder.is_dir():
        raise InputError(f"{folder}: not a folder (expected a circuit bundle)")
    if not doc_path.is_file():
        raise InputError(f"{folder}: no circuit.json; not a circuit bundle")
    try:
        doc = json.loads(doc_path.read_text(encoding="utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise InputError(f"{doc_path}: corrupt JSON ({exc})") from None
    if not isinstance(doc, dict) or doc.get("format") != CIRCUIT_FORMAT:
        raise InputError(f"{doc_path}: not an eidecomp circuit bundle")
    version = doc.get("format_version")
    if not isinstance(version, int) or isinstance(version, bool) or version < 1:
        raise InputError(f"{doc_path}: format version {version!r} is not a "
                         "version eidecomp writes")
    if version > CIRCUIT_VERSION:
        raise InputError(f"{doc_path}: format version {version!r} is newer than "
                         f"this eidecomp reads ({CIRCUIT_VERSION}); upgrade")
    sums = doc.get("sha256")
    if not isinstance(sums, dict):
        raise InputError(f"{doc_path}: no 'sha256' table of the block files")
    params = doc.get("parameters", {})
    if not isinstance(params, dict):
        raise InputError(f"{doc_path}: 'parameters' must be an object")
    blocks = {}
    for b in CIRCUIT_BLOCKS:
        p = folder / f"{b}.npy"
        if not p.is_file():
            raise InputError(f"{p}: missing from the bundle")
        if sums.get(p.name) != file_checksum(p):
            raise InputError(f"{p}: checksum does not match circuit.json "
                             "(the file was changed or truncated)")
        try:
            blocks[b] = np.load(p, allow_pickle=False)
        except ValueError as exc:
            raise InputError(f"{p}: unreadable block ({exc})") from None
    try:
        circuit = Circuit(**blocks, params=params)
    except ValueError as exc:
        raise InputError(f"{folder}: {exc}") from None
    ids = doc.get("unit_ids")
    if ids is not None and not (isinstance(ids, list) and len(ids) ==
                                circuit.n_excitatory
                                and all(isinstance(u, str) for u in ids)):
        raise InputError(f"{doc_path}: 'unit_ids' must be a list of "
                         f"{circuit.n_excitatory} names (one per excitatory "
                         "unit) or null")
    return circuit, doc
