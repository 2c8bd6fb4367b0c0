"""Arrays in binary files: ``.npy``, ``.npz`` and ``.mat``.

``.npy``
    One array. Loaded with ``allow_pickle=False``: a file holding Python
    objects is refused, never unpickled; the header is checked against the
    file's size before any data is read.
``.npz``
    Several named arrays; ``key`` names one, or the file must hold exactly one.
``.mat``
    MATLAB files up to v7 (scipy.io.loadmat); ``key`` names the variable, or
    the file must hold exactly one.
"""

import os

import numpy as np

from ..errors import InputError
from .text import read_text_table

__all__ = ["MATRIX_SUFFIXES", "load_array", "npy_header"]

MATRIX_SUFFIXES = (".npy", ".npz", ".csv", ".tsv", ".txt", ".mat")


def npy_header(path):
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


def load_array(path, key):
    suffix = path.suffix.lower()
    if suffix == ".npy":
        npy_header(path)
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
        return read_text_table(path, suffix)
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


