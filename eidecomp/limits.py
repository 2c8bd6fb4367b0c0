"""Limits on what the solvers and this process can take: magnitudes."""

import numpy as np

from .errors import InputError

__all__ = ["MAX_MAGNITUDE", "check_fits", "check_range", "dense_input",
           "merge_range_stats", "range_error", "range_stats", "size_text"]


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




# --- memory -------------------------------------------------------------------

def _proc_field(path, field):
    """A "Field: N kB" line of a /proc file, in bytes (0 if unknown)."""
    try:
        with open(path) as fh:
            for line in fh:
                if line.startswith(field + ":"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    return 0


def _meminfo_available():
    return _proc_field("/proc/meminfo", "MemAvailable")


def _vm_size():
    """This process's virtual size in bytes (what RLIMIT_AS counts)."""
    return _proc_field("/proc/self/status", "VmSize")


def _physical_memory():
    try:
        import os

        return os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")
    except (ValueError, OSError, AttributeError):
        return 0


def available_memory():
    """Bytes this process may still allocate: the smaller of the machine's
    available memory (MemAvailable) and what its own limits leave
    (RLIMIT_AS less the current virtual size, RLIMIT_DATA); 0 if unknown.
    """
    have = [_meminfo_available() or _physical_memory()]
    try:
        import resource

        for lim, used in ((resource.RLIMIT_AS, _vm_size()),
                          (resource.RLIMIT_DATA, 0)):
            soft, _ = resource.getrlimit(lim)
            if soft != resource.RLIM_INFINITY:
                have.append(max(int(soft) - used, 0))
    except (ImportError, ValueError, OSError):
        pass
    known = [h for h in have if h]
    return min(known) if known else 0


def check_fits(need, what, *, max_bytes=None, advice=""):
    """Refuse, before anything is allocated, ``need`` bytes for ``what``.

    The limit is ``max_bytes`` when given, else :func:`available_memory`.
    The message gives both figures and ``advice`` (a leading "; ...").

    >>> check_fits(10, "a tiny array")   # fits: returns None
    >>> try:
    ...     check_fits(2**40, "a huge array", max_bytes=2**30)
    ... except InputError as exc:
    ...     print(str(exc).replace(", ", ",\\n"))
    a huge array needs about 1024.0 GiB,
    more than the 1.0 GiB this process may use
    """
    limit = available_memory() if max_bytes is None else max_bytes
    if limit and need > limit:
        raise InputError(f"{what} needs about {need / 2**30:.1f} GiB, more than "
                         f"the {limit / 2**30:.1f} GiB this process may use"
                         f"{advice}")


def dense_input(W, name="W"):
    """W as an array: a scipy.sparse matrix densified (after a memory check:
    every solver here works on dense N x N arrays), a pandas DataFrame or
    anything array-like as ``np.asarray`` reads it. The one door through
    which the library's functions take a matrix from Python.

    >>> from scipy import sparse
    >>> dense_input(sparse.eye(2, format="csr")).tolist()
    [[1.0, 0.0], [0.0, 1.0]]
    """
    if isinstance(W, np.ma.MaskedArray):
        hidden = int(np.ma.getmaskarray(W).sum())
        if hidden:   # np.asarray would drop the mask and use the values under it
            raise InputError(f"{name} is a masked array with {hidden} masked "
                             "entries, which eidecomp would read as numbers; "
                             "give robust_pca observed= (True where observed) "
                             "or fill them")
        W = W.data
    if hasattr(W, "tocoo") and hasattr(W, "nnz"):   # scipy.sparse, any format
        shape = tuple(int(s) for s in W.shape)
        itemsize = np.dtype(W.dtype).itemsize if W.dtype.kind in "fiub" else 8
        check_fits(int(np.prod(shape, dtype=np.int64)) * max(itemsize, 8),
                   f"densifying the sparse {name} of shape {shape}")
        return W.toarray()
    return np.asarray(W)


def observed_entries(observed, shape, *, ignore_diagonal=False,
                     name="observed"):
    """The boolean array of W's observed entries, or None for all of them:
    the one check of which entries count, for the library and the command.

    ``observed`` is None or W's shape of True/False (or 1/0), True where the
    entry is observed; ``ignore_diagonal`` leaves the diagonal out too. An
    array of another shape or other values, a non-square W with
    ``ignore_diagonal``, or no observed entry left is one InputError that
    starts with ``name``.

    >>> observed_entries(None, (2, 2), ignore_diagonal=True).tolist()
    [[False, True], [True, False]]
    >>> observed_entries([[0, 0], [0, 0]], (2, 2))
    Traceback (most recent call last):
    ...
    eidecomp.errors.InputError: observed leaves no entry of W observed
    """
    obs = None
    if observed is not None:
        if hasattr(observed, "toarray"):             # scipy.sparse
            observed = observed.toarray()
        if isinstance(observed, np.ma.MaskedArray):
            if np.ma.getmaskarray(observed).any():
                raise InputError(f"{name} is a masked array with masked "
                                 "entries; give plain True/False")
            observed = observed.data
        try:
            obs = np.asarray(observed)
        except ValueError:                           # a ragged list
            raise InputError(f"{name} is not an array of W's shape "
                             f"{tuple(shape)}") from None
        if obs.shape != tuple(shape):
            raise InputError(f"{name} has shape {obs.shape} but W has shape "
                             f"{tuple(shape)}")
        if obs.dtype != bool:
            if obs.dtype.kind not in "iuf" or not np.isin(obs, (0, 1)).all():
                raise InputError(f"{name} must hold only True/False (or 1/0), "
                                 "True where an entry is observed")
            obs = obs.astype(bool)
        elif isinstance(observed, np.ndarray):   # the caller's own array
            obs = obs.copy()      # copied: results freeze their arrays
    if ignore_diagonal:
        if shape[0] != shape[1]:
            raise InputError(f"ignore_diagonal needs a square W, got "
                             f"{tuple(shape)}")
        obs = np.ones(shape, bool) if obs is None else obs.copy()
        np.fill_diagonal(obs, False)
    if obs is not None and not obs.any():
        raise InputError(
            "ignoring the diagonal leaves no entry of W observed"
            if observed is None else f"{name}"
            f"{' with the diagonal ignored' if ignore_diagonal else ''} leaves "
            "no entry of W observed")
    return obs


def size_text(n_bytes):
    """Bytes as a reader wants them: GiB from 1 GiB up, else MiB.

    >>> size_text(3 * 2**30), size_text(5 * 2**20)
    ('3.0 GiB', '5 MiB')
    """
    if n_bytes >= 2**30:
        return f"{n_bytes / 2**30:,.1f} GiB"
    return f"{max(n_bytes / 2**20, 1):.0f} MiB"
