"""All-or-nothing writes of result folders and files.

:func:`write_folder` writes every file of a result into a temporary folder
beside the target and renames it into place, so a failed or interrupted run
leaves no half-written output; an existing target is replaced only with
``force=True``.
"""

import io as _io
import json
import os
import shutil
import tempfile
from contextlib import contextmanager
from pathlib import Path

import numpy as np

from ..errors import InputError, WriteError

__all__ = ["npy_bytes", "staged_folder", "write_file", "write_folder"]


def npy_bytes(arr):
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
        return npy_bytes(value)
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


