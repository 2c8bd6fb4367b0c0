"""Arrays in binary files: ``.npy``, ``.npz`` and ``.mat``.

``.npy``
    One array. Loaded with ``allow_pickle=False``: a file holding Python
    objects is refused, never unpickled; the header (NPY format, NEP 1) is
    checked against the file's size and against the memory this process may
    use before any data is read.
``.npz``
    Several named arrays (``np.savez``); ``key`` names one, or the file must
    hold exactly one. Each member's header is checked as a ``.npy`` file's,
    inside the zip, before its data is read. A file written by
    ``scipy.sparse.save_npz`` (members ``format``, ``shape``, ``data`` and
    the indices of its format) is a sparse matrix: checked, then densified
    when the dense matrix fits.
``.mat``
    MATLAB files up to v7 (scipy.io.loadmat); ``key`` names the variable, or
    the file must hold exactly one. Shapes come from ``scipy.io.whosmat``
    before anything is loaded; MATLAB sparse matrices are densified when
    they fit.

Every failure is one :class:`~eidecomp.errors.InputError` line that names
the file.
"""

import numpy as np

from ..errors import InputError
from ..limits import check_fits
from .text import cannot_read, input_file, read_text_table

__all__ = ["MATRIX_SUFFIXES", "kind_name", "load_array", "load_need",
           "npy_header", "read_npy"]

MATRIX_SUFFIXES = (".npy", ".npz", ".csv", ".tsv", ".txt", ".mat")

MAGIC = b"\x93NUMPY"  # the NPY format's magic string (NEP 1)

_KINDS = {"c": "complex", "U": "text", "S": "text", "O": "object",
          "V": "structured", "M": "date", "m": "time-interval"}

# numpy dtype of each MATLAB class scipy.io.whosmat reports (a sparse matrix
# is densified to doubles); cells, structs, objects and functions are refused
_MAT_DTYPES = {"double": "f8", "single": "f4", "int8": "i1", "uint8": "u1",
               "int16": "i2", "uint16": "u2", "int32": "i4", "uint32": "u4",
               "int64": "i8", "uint64": "u8", "logical": "?", "char": "U1",
               "sparse": "f8"}


def kind_name(dtype):
    """A word for a dtype that is not a real number, for messages.

    >>> kind_name(np.dtype(complex)), kind_name(np.dtype("U3"))
    ('complex', 'text')
    """
    return _KINDS.get(dtype.kind, str(dtype))


def load_need(shape, dtype):
    """Bytes to hold an array of ``shape`` and ``dtype`` as stored and, unless
    it is native float64 already, its float64 copy.

    >>> load_need((1000, 1000), np.float64), load_need((1000, 1000), np.uint8)
    (8000000, 9000000)
    """
    dtype = np.dtype(dtype)
    count = float(np.prod(shape, dtype=np.float64))
    copy = 0 if dtype == np.float64 else 8
    return int(count * (dtype.itemsize + copy))


def _first_line(exc, width=80):
    return (str(exc).splitlines() or [type(exc).__name__])[0][:width]


def _parse_header(fh, where):
    """(shape, dtype, offset of the data) of the NPY stream ``fh``."""
    fmt = np.lib.format
    try:
        major, _ = fmt.read_magic(fh)
        read = fmt.read_array_header_1_0 if major == 1 else \
            fmt.read_array_header_2_0
        shape, _, dtype = read(fh)
    except InputError:
        raise
    except Exception as exc:  # ValueError, SyntaxError, EOFError, zip errors
        raise InputError(f"{where}: corrupt .npy header "
                         f"({_first_line(exc)})") from None
    if dtype.hasobject:
        raise InputError(f"{where}: holds Python objects; refused (eidecomp "
                         "never unpickles)")
    return shape, dtype, fh.tell()


def _check_size(where, shape, dtype, found):
    expected = int(np.prod(shape, dtype=np.float64)) * dtype.itemsize
    if found < expected:
        raise InputError(f"{where}: truncated .npy file: its header promises "
                         f"{expected} bytes for shape {shape}, {found} follow")


def _check_memory(name, shape, dtype, what, max_bytes=None):
    check_fits(load_need(shape, dtype), f"{name}: {what} of shape {shape} "
               f"({dtype})", max_bytes=max_bytes)


def npy_header(path, *, what="array", max_bytes=None, memory=True):
    """(shape, dtype) from a .npy file's header, checked before any data is
    read: against the file's size (a truncated file), for Python objects
    (refused, so nothing is ever unpickled) and then, with ``memory``,
    against the memory this process may use (``check_fits``)."""
    try:
        with open(path, "rb") as fh:
            if fh.read(6) != MAGIC:  # else np.load would try pickle
                raise InputError(f"{path}: not a .npy file (no NumPy header)")
            fh.seek(0)
            shape, dtype, data_start = _parse_header(fh, path)
            size = fh.seek(0, 2)
    except OSError as exc:
        raise cannot_read(path, exc) from None
    _check_size(path, shape, dtype, size - data_start)
    if memory:
        _check_memory(path, shape, dtype, what, max_bytes)
    return shape, dtype


def _np_load_npy(path, what):
    try:
        return np.load(path, allow_pickle=False)
    except ValueError as exc:
        if "pickle" in str(exc).lower() or "object" in str(exc).lower():
            raise InputError(f"{path}: holds Python objects; refused "
                             "(eidecomp never unpickles)") from None
        raise InputError(f"{path}: not a valid .npy file "
                         f"({_first_line(exc)})") from None
    except MemoryError:
        raise InputError(f"{path}: not enough memory to read the {what}") from None
    except OSError as exc:
        if exc.errno is not None:
            raise cannot_read(path, exc) from None
        raise InputError(f"{path}: not a valid .npy file "
                         f"({_first_line(exc)})") from None
    except Exception as exc:  # EOFError and the like
        raise InputError(f"{path}: not a valid .npy file "
                         f"({_first_line(exc)})") from None


def read_npy(path, *, what="array", ndim=None, max_bytes=None):
    """A real numeric array from a .npy file, as float64, checked first.

    For the arrays inside eidecomp's own folders (blocks, features,
    positions, factors): the header is checked before any data is read
    (truncation, Python objects, non-real dtypes, ``ndim`` when given, and
    the size against ``max_bytes`` or the memory this process may use);
    any failure is one InputError line naming the file.

    >>> import tempfile, os
    >>> p = os.path.join(tempfile.mkdtemp(), "features.npy")
    >>> np.save(p, np.arange(3, dtype=np.int32))
    >>> read_npy(p, what="features", ndim=1)
    array([0., 1., 2.])
    >>> read_npy(p, what="features", ndim=2)  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    eidecomp.errors.InputError: ...features.npy: features must be 2-D, got 1-D ...
    """
    input_file(path, what)
    shape, dtype = npy_header(path, what=what, memory=False)
    if dtype.kind not in "biuf":
        raise InputError(f"{path}: {what} holds {kind_name(dtype)} values; "
                         "real numbers are needed")
    if ndim is not None and len(shape) != ndim:
        raise InputError(f"{path}: {what} must be {ndim}-D, got {len(shape)}-D "
                         f"shape {shape}")
    _check_memory(path, shape, dtype, what, max_bytes)
    with np.errstate(over="ignore"):
        return _np_load_npy(path, what).astype(np.float64, copy=False)


def _pick(path, names, key, kind, key_option="--key", what="array"):
    if key is not None:
        if key not in names:
            raise InputError(f"{path}: no {kind} named {key!r}; it holds "
                             f"{', '.join(sorted(names)) or 'nothing'}")
        return key
    if len(names) != 1:
        raise InputError(f"{path}: holds {len(names)} {kind}s "
                         f"({', '.join(sorted(names))}); " + (
                             f"name one with {key_option}" if key_option
                             else f"a {what} holds one"))
    return next(iter(names))


# --- .npz -------------------------------------------------------------------

def _member_header(path, zf, info, name):
    """(shape, dtype) of one .npy member of an open zip, size-checked."""
    where = f"{path}: array {name!r}"
    with zf.open(info) as fh:
        if fh.read(6) != MAGIC:
            raise InputError(f"{where} is not a .npy member (np.savez writes "
                             "one .npy file per array)")
        fh.seek(0)
        shape, dtype, start = _parse_header(fh, where)
    _check_size(where, shape, dtype, info.file_size - start)
    return shape, dtype


def _read_member(path, zf, info, name):
    with zf.open(info) as fh:
        return np.lib.format.read_array(fh, allow_pickle=False)


def _npz_error(path, exc):
    if isinstance(exc, OSError) and exc.errno is not None:
        return cannot_read(path, exc)
    msg = _first_line(exc)
    if "pickle" in msg.lower() or "object" in msg.lower():
        return InputError(f"{path}: holds Python objects; refused (eidecomp "
                          "never unpickles)")
    return InputError(f"{path}: not a valid .npz file ({msg})")


_SPARSE_INDICES = ({"indices", "indptr"}, {"row", "col"}, {"coords"},
                   {"offsets"})


def _is_sparse_npz(names):
    return {"format", "shape", "data"} <= set(names) and any(
        s <= set(names) for s in _SPARSE_INDICES)


def _probe(path, n=8):
    """The first ``n`` bytes of ``path``: an unreadable file is one line here,
    before a library turns the OSError into a message of its own."""
    try:
        with open(path, "rb") as fh:
            return fh.read(n)
    except OSError as exc:
        raise cannot_read(path, exc) from None


def _load_npz(path, key, what, key_option="--key"):
    import zipfile

    if _probe(path, 2) != b"PK":  # every zip starts so (np.load's own test)
        raise InputError(f"{path}: not a valid .npz file (not a zip file)")
    try:
        zf = zipfile.ZipFile(path)
    except Exception as exc:  # BadZipFile, OSError, ValueError...
        raise _npz_error(path, exc) from None
    try:
        with zf:
            members = {(i.filename[:-4] if i.filename.endswith(".npy")
                        else i.filename): i for i in zf.infolist()}
            if key is None and _is_sparse_npz(members):
                return _load_sparse_npz(path, zf, members, what)
            name = _pick(path, members, key, "array", key_option, what)
            shape, dtype = _member_header(path, zf, members[name], name)
            _check_memory(f"{path}: array {name!r}", shape, dtype, what)
            return _read_member(path, zf, members[name], name)
    except InputError:
        raise
    except MemoryError:
        raise InputError(f"{path}: not enough memory to read the {what}") from None
    except Exception as exc:  # zipfile, zlib and numpy errors alike
        raise _npz_error(path, exc) from None


def _load_sparse_npz(path, zf, members, what):
    """A scipy.sparse.save_npz file: shapes checked, then densified."""
    import scipy.sparse

    heads = {n: _member_header(path, zf, members[n], n) for n in members}
    s_shape, s_dtype = heads["shape"]
    if s_dtype.kind not in "iu" or len(s_shape) != 1 or s_shape[0] > 64:
        raise InputError(f"{path}: a scipy.sparse file whose 'shape' is not a "
                         "list of integers")
    shape = tuple(int(v) for v in _read_member(path, zf, members["shape"], "shape"))
    if len(shape) != 2:
        raise InputError(f"{path}: {what} must be 2-D, got {len(shape)}-D shape "
                         f"{shape} (a scipy.sparse array)")
    if min(shape) < 0:
        raise InputError(f"{path}: a scipy.sparse file with a negative shape "
                         f"{shape}")
    d_dtype = heads["data"][1]
    stored = sum(int(np.prod(s, dtype=np.float64)) * d.itemsize
                 for s, d in heads.values())
    check_fits(load_need(shape, d_dtype) + stored,
               f"{path}: {what} of shape {shape} ({d_dtype}, scipy.sparse, "
               "densified)")
    try:
        M = scipy.sparse.load_npz(path)
    except InputError:
        raise
    except Exception as exc:
        raise InputError(f"{path}: not a valid scipy.sparse matrix "
                         f"({_first_line(exc)})") from None
    return densify(path, M, what)


def densify(path, M, what="matrix"):
    """The dense array of a scipy.sparse matrix read from ``path``, after
    scipy's own full check of its index arrays (scipy's C++ routines trust
    them). The dense size is the caller's to check first."""
    try:
        if M.format in ("csr", "csc", "bsr"):
            M.check_format(full_check=True)
        return M.toarray()
    except MemoryError:
        raise InputError(f"{path}: not enough memory to densify the {what}") \
            from None
    except Exception as exc:  # ValueError, IndexError from scipy's checks
        raise InputError(f"{path}: not a valid scipy.sparse matrix "
                         f"({_first_line(exc)})") from None


# --- .mat -------------------------------------------------------------------

def _mat_error(path, exc):
    if isinstance(exc, NotImplementedError):
        return InputError(f"{path}: MATLAB v7.3 (HDF5) files are not read; "
                          "save with -v7 or as .npy")
    if isinstance(exc, OSError) and exc.errno is not None:
        return cannot_read(path, exc)
    return InputError(f"{path}: not a valid .mat file ({_first_line(exc)})")


def _load_mat(path, key, what, key_option="--key"):
    import scipy.io
    import scipy.sparse

    _probe(path)
    try:
        variables = {name: (shape, cls) for name, shape, cls
                     in scipy.io.whosmat(path)}
    except Exception as exc:  # scipy raises many kinds on corrupt files
        raise _mat_error(path, exc) from None
    name = _pick(path, variables, key, "variable", key_option, what)
    shape, cls = variables[name]
    if cls not in _MAT_DTYPES:
        raise InputError(f"{path}: variable {name!r} is a MATLAB {cls}; a real "
                         f"numeric {what} is needed")
    _check_memory(f"{path}: variable {name!r}", tuple(shape),
                  np.dtype(_MAT_DTYPES[cls]), what)
    try:
        arr = scipy.io.loadmat(path, variable_names=[name])[name]
    except MemoryError:
        raise InputError(f"{path}: not enough memory to read the {what}") from None
    except Exception as exc:
        raise _mat_error(path, exc) from None
    if scipy.sparse.issparse(arr):
        arr = densify(path, arr, what)
    return arr


def load_array(path, key, *, what="array", key_option="--key"):
    """The array stored in ``path`` (any of MATRIX_SUFFIXES), checked at the
    boundary; ``key`` names an array of an .npz or a variable of a .mat (the
    option that gives it is ``key_option``; None: none can, the file must
    hold one)."""
    suffix = path.suffix.lower()
    if key is not None and suffix in (".npy", ".csv", ".tsv", ".txt"):
        raise InputError(f"{path}: a {suffix} file holds one array; a key "
                         "(--key) names one in a .npz or .mat file")
    if suffix == ".npy":
        npy_header(path, what=what)
        return _np_load_npy(path, what)
    if suffix == ".npz":
        return _load_npz(path, key, what, key_option)
    if suffix in (".csv", ".tsv", ".txt"):
        return read_text_table(path, suffix)
    if suffix == ".mat":
        return _load_mat(path, key, what, key_option)
    raise InputError(f"{path}: unknown file type {suffix or '(none)'!r}; "
                     f"expected one of {', '.join(MATRIX_SUFFIXES)}")
