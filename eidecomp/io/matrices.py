"""Read weight matrices, files of unobserved entries and kernels, checked
at the boundary.

Every matrix is W[post, pre]: row = target, column = source. ``transpose=True``
reads a file stored as [pre, post]. Errors are :class:`~eidecomp.errors.InputError`
with one line that names the file. Formats: :mod:`.binary` and :mod:`.text`.
"""

import hashlib
from pathlib import Path

import numpy as np

from ..errors import InputError
from ..limits import check_range, observed_entries
from .binary import kind_name, load_array
from .text import cannot_read, input_file

__all__ = ["file_checksum", "read_kernel", "read_matrix", "read_unobserved"]


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
        try:
            with open(f, "rb") as fh:
                for chunk in iter(lambda fh=fh: fh.read(1 << 20), b""):
                    h.update(chunk)
        except OSError as exc:
            raise cannot_read(f, exc) from None
    return h.hexdigest()


def read_matrix(path, *, key=None, transpose=False, square=True, what="matrix",
                vector=False, key_option="--key"):
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
    vector : bool
        Also take a 1-D array, read as one column (a drive of N values).
    key_option : str or None
        The option that names an array (None: the file must hold one).

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
    size = input_file(path, what).st_size   # as given: 'w.csv/' is no file
    path = Path(path)
    if size == 0:
        raise InputError(f"{path}: file is empty")
    arr = np.asarray(load_array(path, key, what=what, key_option=key_option))
    if arr.dtype.kind not in "biuf":
        raise InputError(f"{path}: holds {kind_name(arr.dtype)} values; a real "
                         f"numeric {what} is needed")
    if vector and arr.ndim == 1:
        arr = arr[:, None]
    if arr.ndim != 2:
        raise InputError(f"{path}: {what} must be {'1-D or ' if vector else ''}"
                         f"2-D, got {arr.ndim}-D shape {arr.shape}")
    if arr.size == 0:
        raise InputError(f"{path}: {what} is empty (shape {arr.shape})")
    # max and min, not abs: abs of the smallest int64 overflows to itself
    if arr.dtype.kind in "iu" and max(int(arr.max()), -int(arr.min())) > 2**53:
        raise InputError(f"{path}: integer values beyond 2**53 lose precision "
                         "as float64")
    with np.errstate(over="ignore"):
        W = arr.astype(np.float64, copy=False)
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


def read_unobserved(path, shape, *, transpose=False, ignore_diagonal=False):
    """Read a file of *unobserved* entries; return the *observed* boolean array.

    The file holds 1 (or True) where an entry is unobserved and 0 where it is
    observed, stored as the matrix file is (``transpose``: both are [pre,
    post]), one array in it; ``ignore_diagonal`` leaves the diagonal out
    too. The "some entry is observed" check is
    :func:`eidecomp.limits.observed_entries`', the library's own.
    """
    name = f"{path}: the file of unobserved entries"
    M = read_matrix(path, square=False, what="file of unobserved entries",
                    key_option=None)
    stored = tuple(shape)[::-1] if transpose else tuple(shape)
    if M.shape != stored:
        raise InputError(f"{name} has shape {M.shape} but the matrix file has "
                         f"shape {stored}" + (" (both are read transposed)"
                                              if transpose else ""))
    if not np.isin(M, (0.0, 1.0)).all():
        raise InputError(f"{name} must hold only 0 (observed) and 1 "
                         "(unobserved)")
    observed = (M == 0.0).T if transpose else M == 0.0
    return observed_entries(np.ascontiguousarray(observed), shape,
                            ignore_diagonal=ignore_diagonal, name=name)


def read_kernel(path, *, key=None):
    """A 4-D kernel K[post_feature, pre_feature, dy, dx] from .npy or .npz."""
    path = Path(path)
    input_file(path, "kernel")
    if path.suffix.lower() not in (".npy", ".npz"):
        raise InputError(f"{path}: a kernel must be a .npy or .npz file")
    arr = np.asarray(load_array(path, key, what="kernel"))
    if arr.ndim != 4:
        raise InputError(f"{path}: expected a 4-D kernel K[post_feature, "
                         f"pre_feature, dy, dx], got a {arr.ndim}-D array "
                         f"of shape {arr.shape}")
    return arr


