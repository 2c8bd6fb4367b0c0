"""All-or-nothing writes of result folders and files, and the signals that
stop a run.

:func:`staged_folder` (and :func:`write_folder` on it) writes every file of a
result into a temporary folder beside the target and renames it into place;
:func:`write_file` does the same for one file. A failed or interrupted run
leaves no half-written output, and an existing target is replaced only with
``force=True`` and only when it is safe (:func:`check_output`).

Temporary names carry the process id, ``.{name}.eidecomp-{pid}-{random}.partial``
(and ``.{name}.eidecomp-{pid}-{random}.old`` for the output being replaced),
so the leftovers of a killed run (SIGKILL cannot be caught) are recognised
and removed by the next write to the same output once that process is gone.

:func:`handle_termination` makes SIGTERM and SIGHUP stop a run the way
SIGINT does, as :class:`Terminated` (a ``KeyboardInterrupt``), so the same
clean-up runs for all three.
"""

import io as _io
import json
import os
import re
import secrets
import shutil
import signal
import tempfile
import threading
from contextlib import contextmanager
from pathlib import Path

import numpy as np

from ..errors import InputError, WriteError

__all__ = ["FORCE_RULE", "TERMINATING_SIGNALS", "Terminated", "any_file",
           "check_output", "file_bytes", "fill_folder", "handle_termination",
           "npy_bytes", "staged_folder", "write_file", "write_folder"]

FORCE_RULE = ("replace an existing output only if eidecomp wrote it and "
              "nobody has changed it since (its provenance stamp still "
              "matches): never a file or folder of yours, an empty one "
              "included, never a symbolic link, never an input of the job")
"""What ``--force`` does, in the words of every command's help and of the
README (the rule itself: :func:`check_output` and eidecomp.io.provenance)."""

#: Signals that stop a run like SIGINT: ``kill``'s default, and a closed terminal.
TERMINATING_SIGNALS = (signal.SIGTERM, signal.SIGHUP)

_TAG = "eidecomp"
_RANDOM = "abcdefghijklmnopqrstuvwxyz0123456789_"  # tempfile's own alphabet
_MAX_STEM = 200  # bytes of the output's name kept in a temporary name (of 255)


def npy_bytes(arr):
    buf = _io.BytesIO()
    np.save(buf, np.ascontiguousarray(arr), allow_pickle=False)
    return buf.getvalue()


# --- signals -----------------------------------------------------------------


class Terminated(KeyboardInterrupt):
    """The run was stopped by a signal other than SIGINT (SIGTERM, SIGHUP).

    A ``KeyboardInterrupt``, so every clean-up that handles Ctrl-C handles
    it; ``signum`` is the signal's number (the exit status is 128 + signum).
    """

    def __init__(self, signum):
        super().__init__(signum)
        self.signum = int(signum)

    @property
    def name(self):
        """The signal's name, e.g. ``'SIGTERM'``."""
        try:
            return signal.Signals(self.signum).name
        except ValueError:
            return f"signal {self.signum}"


def _raise_terminated(signum, frame):
    raise Terminated(signum)


@contextmanager
def handle_termination(signals=TERMINATING_SIGNALS):
    """Within the block, ``signals`` raise :class:`Terminated`.

    Handlers can only be set in the main thread; elsewhere the block runs
    unchanged. A signal that is ignored on entry (``nohup`` ignores SIGHUP)
    stays ignored. The previous handlers are restored on exit.

    >>> import os, signal
    >>> with handle_termination():
    ...     try:
    ...         os.kill(os.getpid(), signal.SIGTERM)
    ...     except Terminated as exc:
    ...         print(exc.name, 128 + exc.signum)
    SIGTERM 143
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    previous = {}
    try:
        for s in signals:
            old = signal.getsignal(s)
            if old is signal.SIG_IGN:
                continue
            signal.signal(s, _raise_terminated)
            previous[s] = old
        yield
    finally:
        for s, old in previous.items():
            signal.signal(s, signal.SIG_DFL if old is None else old)


_BLOCKED = {signal.SIGINT, *TERMINATING_SIGNALS}


@contextmanager
def _signals_held():
    """Hold SIGINT, SIGTERM and SIGHUP (POSIX pthread_sigmask) while a rename
    pair or a clean-up runs, so it is never cut in half; a signal that came
    in the meantime is delivered on exit."""
    if not hasattr(signal, "pthread_sigmask"):
        yield
        return
    old = signal.pthread_sigmask(signal.SIG_BLOCK, _BLOCKED)
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)


# --- modes -------------------------------------------------------------------


def _umask():
    """The process umask, read without changing it where Linux allows
    (/proc/self/status, since 4.7), else by the os.umask round trip."""
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError, IndexError):
        pass
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _folder_mode():
    return 0o777 & ~_umask()


def _file_mode():
    return 0o666 & ~_umask()


# --- names of temporary copies -------------------------------------------------


def _stem(name):
    """``name`` cut to _MAX_STEM bytes, so a temporary name fits NAME_MAX."""
    raw = os.fsencode(name)
    return os.fsdecode(raw[:_MAX_STEM]) if len(raw) > _MAX_STEM else name


def _temp_prefix(target):
    return f".{_stem(target.name)}.{_TAG}-{os.getpid()}-"


def _old_name(target):
    rand = "".join(secrets.choice(_RANDOM) for _ in range(8))
    return target.with_name(f"{_temp_prefix(target)}{rand}.old")


def _leftover_pattern(target):
    return re.compile(rf"\.{re.escape(_stem(target.name))}\.{_TAG}-"
                      rf"([1-9][0-9]{{0,9}})-[{_RANDOM}]{{8}}\.(partial|old)")


def _process_gone(pid):
    """True when no process has this id (kill(pid, 0) fails with ESRCH)."""
    if pid == os.getpid():
        return False
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return True
    except (PermissionError, OverflowError, OSError):
        return False  # alive under another user, or not a pid at all: keep
    return False


def _remove(path):
    if os.path.isdir(path) and not os.path.islink(path):
        shutil.rmtree(path, ignore_errors=True)
    else:
        try:
            os.unlink(path)
        except OSError:
            pass


def _sweep(target):
    """Remove the temporary copies a killed run left beside ``target``.

    Only names that match the pattern exactly, of a process that is gone;
    symbolic links are never touched. A ``.old`` copy whose run died
    between its two renames holds the previous output: it is put back when
    ``target`` is missing, and removed otherwise.
    """
    pattern = _leftover_pattern(target)
    try:
        with os.scandir(target.parent) as it:
            found = sorted(e.name for e in it if pattern.fullmatch(e.name))
    except OSError:
        return
    for name in found:
        m = pattern.fullmatch(name)
        path = target.parent / name
        if os.path.islink(path) or not _process_gone(int(m.group(1))):
            continue
        with _signals_held():
            if m.group(2) == "old" and not os.path.lexists(target) \
                    and os.path.isdir(path):
                try:
                    os.rename(path, target)
                except OSError:
                    pass
                continue
            _remove(path)


# --- checks --------------------------------------------------------------------


def _target(out):
    """The directory entry a write to ``out`` replaces: its parent with every
    symbolic link resolved, and its own name ('.', '..' and '' resolved)."""
    if not out.is_absolute():
        try:
            os.getcwd()
        except FileNotFoundError:
            raise InputError(f"{out}: the current folder was deleted, so a "
                             "relative path names no place; give an absolute "
                             "one") from None
    if out.name in ("", ".", ".."):
        return Path(os.path.realpath(out))
    return Path(os.path.realpath(out.parent)) / out.name


def _within(path, folder):
    """``path`` is ``folder`` or lies inside it (both absolute, resolved)."""
    return path == folder or folder in path.parents


def _check_inputs(out, target, inputs):
    spots = {target, Path(os.path.realpath(target))}
    for inp in inputs:
        if inp is None or not os.path.lexists(inp):
            continue
        real = Path(os.path.realpath(inp))
        if real in spots:
            raise InputError(f"{out}: is the input {inp}; write the output "
                             "elsewhere")
        if any(s in real.parents for s in spots):
            raise InputError(f"{out}: contains the input {inp}; replacing it "
                             "would delete the input")
        if real.is_dir() and any(real in s.parents for s in spots):
            raise InputError(f"{out}: inside the input folder {inp}; write "
                             "the output elsewhere")


def _check_parent(out, target):
    parent = target.parent
    if parent.is_dir():
        return
    p = parent
    while not os.path.lexists(p) and p != p.parent:
        p = p.parent
    if os.path.lexists(p) and not p.is_dir():
        raise InputError(f"{out}: {p} is a file, not a folder")
    raise InputError(f"{out}: parent folder {parent} does not exist")


def _check_existing(out, target, folder, replaceable):
    if folder:
        if not target.is_dir():
            raise InputError(f"{out}: not a folder; not replaced")
        reason = ("a folder not known to be an eidecomp output"
                  if replaceable is None else replaceable(out))
        if reason:
            raise InputError(f"{out}: {reason}; not replaced")
        return
    if target.is_dir():
        raise InputError(f"{out}: is a folder, not a file; not replaced")
    if not target.is_file():
        raise InputError(f"{out}: not a regular file; not replaced")
    reason = ("a file not known to be an eidecomp output" if replaceable is None
              else replaceable(out))
    if reason:
        raise InputError(f"{out}: {reason}; not replaced")


def _check(out, force, folder, replaceable, inputs, sweep=True):
    out = Path(out)
    target = _target(out)
    _check_inputs(out, target, inputs)
    try:
        cwd = Path(os.path.realpath(os.getcwd()))
    except OSError:  # the current folder was removed: nothing to protect
        cwd = None
    if cwd is not None and _within(cwd, target):
        raise InputError(f"{out}: holds the current folder {cwd}; not replaced")
    _check_parent(out, target)
    existed = os.path.lexists(target)
    if existed and os.path.islink(target):
        raise InputError(f"{out}: a symbolic link, which eidecomp never "
                         "writes through or replaces; not replaced")
    if existed:
        if not force:
            raise InputError(f"{out}: already exists; use --force to replace it")
        _check_existing(out, target, folder, replaceable)
    _check_not_inside_ours(out, target)
    # stale temporaries are swept only once the write may go ahead, so that
    # a refusal changes nothing; a killed run's output that the sweep put
    # back is checked again
    if sweep:
        _sweep(target)
        if not existed and os.path.lexists(target):
            return _check(out, force, folder, replaceable, inputs,
                          sweep=False)
    return target, existed


def _check_not_inside_ours(out, target):
    """Refuse an output inside a folder eidecomp wrote (a bundle, an export
    folder, report figures): writing there would break that folder's
    manifest, which lists every file it holds."""
    from .bundles import KINDS
    from .provenance import FOLDER_MANIFEST, is_manifest

    parent = target.parent
    for manifest in sorted({FOLDER_MANIFEST} | {k.manifest for k in KINDS}):
        if is_manifest(parent / manifest):
            raise InputError(f"{out}: inside {parent}, a folder eidecomp "
                             f"wrote ({manifest} lists its files); write "
                             "elsewhere")


def any_file(path):
    """The ``replaceable`` rule of the library's own writers, which replace
    the file their caller names as ``open(path, "w")`` does."""
    return None


def check_output(out, *, force=False, folder=True, replaceable=None, inputs=()):
    """Check that ``out`` may be written, before any work is done.

    Also removes what killed runs left beside ``out`` (see :func:`_sweep`).

    Parameters
    ----------
    out : path
        The output: a folder (``folder=True``) or a file.
    force : bool
        Replace an existing output (``--force``).
    replaceable : callable or None
        For a folder: ``replaceable(out)`` returns None when the existing
        folder may be replaced, else the reason it may not (``"not an
        eidecomp circuit bundle"``). Without it an existing folder that is
        not empty is never replaced. For a file the same: a regular file,
        and only one that ``replaceable`` accepts (without it, none).
    inputs : iterable of paths
        What the job reads: ``out`` may not be one, hold one, or lie inside
        an input folder.

    Returns
    -------
    Path
        ``out``.

    Raises
    ------
    InputError
        One line naming ``out`` and what is wrong.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> (d / "notes").mkdir(); _ = (d / "notes" / "todo.txt").write_text("x")
    >>> try:
    ...     check_output(d / "notes", force=True)
    ... except InputError as exc:
    ...     print(str(exc).replace(str(d), "D").replace("; ", ";\\n"))
    D/notes: a folder not known to be an eidecomp output;
    not replaced
    """
    _check(out, force, folder, replaceable, inputs)
    return Path(out)


# --- writing --------------------------------------------------------------------


def _write_error(out, exc, existed):
    reason = exc.strerror or str(exc) or type(exc).__name__
    return WriteError(f"{out}: cannot write ({reason}); nothing written"
                      + (", the existing one is unchanged" if existed else ""))


def _passes_through(exc):
    return isinstance(exc, (WriteError, InputError)) or not isinstance(exc, OSError)


def _write_bytes(path, data):
    """One file, flushed to disk before it counts as written."""
    with open(path, "wb") as fh:
        fh.write(data)
        fh.flush()
        os.fsync(fh.fileno())


def _fsync(path, flags=os.O_RDONLY):
    fd = os.open(path, flags)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _fsync_folder(path):
    """A folder's entries on disk (POSIX: a rename is durable once its folder
    is synced); not every file system can sync a folder, so failures pass."""
    try:
        _fsync(path, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    except OSError:
        pass


def _fsync_tree(folder):
    """Every file and folder written under ``folder``, on disk."""
    for root, _, files in os.walk(folder):
        for name in files:
            p = os.path.join(root, name)
            if os.path.isfile(p) and not os.path.islink(p):
                _fsync(p)
        _fsync_folder(root)


@contextmanager
def staged_folder(out, *, force=False, replaceable=None, inputs=()):
    """A temporary folder beside ``out``, renamed to ``out`` when the block
    ends without error.

    ``out`` is checked first (:func:`check_output`, with ``force``,
    ``replaceable`` and ``inputs``) and again just before the rename. On any
    error or interrupt the temporary folder is removed and an existing
    ``out`` is left as it was; an OSError (a full disk, a file size limit,
    a read-only folder) becomes a :class:`~eidecomp.errors.WriteError`
    saying so. The folder gets the mode of ``mkdir`` under the umask.

    >>> import tempfile, pathlib
    >>> out = pathlib.Path(tempfile.mkdtemp()) / "result"
    >>> with staged_folder(out) as tmp:
    ...     _ = (tmp / "a.txt").write_text("done")
    >>> sorted(p.name for p in out.iterdir())
    ['a.txt']
    """
    out = Path(out)
    target, existed = _check(out, force, True, replaceable, inputs)
    tmp = old = None
    try:
        with _signals_held():
            tmp = Path(tempfile.mkdtemp(prefix=_temp_prefix(target),
                                        suffix=".partial", dir=target.parent))
        os.chmod(tmp, _folder_mode())
        yield tmp
        _fsync_tree(tmp)
        # the block may have run for hours: check again just before renaming
        _, existed = _check(out, force, True, replaceable, inputs, sweep=False)
        with _signals_held():
            if existed:
                old = _old_name(target)
                os.rename(target, old)
            os.rename(tmp, target)
            tmp = None
    except BaseException as exc:
        with _signals_held():
            if tmp is not None:
                shutil.rmtree(tmp, ignore_errors=True)
            if old is not None and not os.path.lexists(target):
                try:
                    os.rename(old, target)
                except OSError:
                    pass  # left as .old: the next write puts it back
                old = None
        if _passes_through(exc):
            raise
        raise _write_error(out, exc, existed) from None
    if old is not None:
        with _signals_held():  # the new output is in place: finish quietly
            _remove(old)
    _fsync_folder(target.parent)


def write_file(out, data, *, force=False, replaceable=None, inputs=()):
    """Write bytes to ``out`` through a temporary file renamed into place.

    Checked as :func:`check_output` with ``folder=False``: an existing
    ``out`` is replaced only with ``force``, only when it is a regular file
    and only when ``replaceable(out)`` says it may be (an eidecomp output of
    the same kind). The file gets the mode of ``open`` under the umask.

    >>> import tempfile, pathlib
    >>> out = pathlib.Path(tempfile.mkdtemp()) / "a.txt"
    >>> write_file(out, b"done").read_bytes()
    b'done'
    """
    out = Path(out)
    target, existed = _check(out, force, False, replaceable, inputs)
    tmp = None
    try:
        with _signals_held():
            fd, tmp = tempfile.mkstemp(prefix=_temp_prefix(target),
                                       suffix=".partial", dir=target.parent)
            os.close(fd)
        os.chmod(tmp, _file_mode())
        _write_bytes(tmp, data)
        _, existed = _check(out, force, False, replaceable, inputs,
                            sweep=False)
        with _signals_held():
            os.replace(tmp, target)
            tmp = None
    except BaseException as exc:
        with _signals_held():
            if tmp is not None:
                try:
                    os.unlink(tmp)
                except FileNotFoundError:
                    pass
        if _passes_through(exc):
            raise
        raise _write_error(out, exc, existed) from None
    _fsync_folder(target.parent)
    return out


def file_bytes(value):
    """The bytes of a file: an ndarray as .npy, a dict as JSON (sorted keys),
    str as UTF-8 (a lone surrogate, from a file name that is not UTF-8, as
    its backslash escape), anything else as bytes(value)."""
    if isinstance(value, np.ndarray):
        return npy_bytes(value)
    if isinstance(value, dict):
        return (json.dumps(value, indent=2, sort_keys=True, allow_nan=True)
                + "\n").encode()
    if isinstance(value, str):
        return value.encode("utf-8", "backslashreplace")
    return bytes(value)


def write_folder(out, files, *, force=False, replaceable=None, inputs=()):
    """Write ``files`` (name -> ndarray | dict | str | bytes) into folder ``out``.

    Arrays become ``.npy``, dicts JSON (sorted keys), str UTF-8 text. Written
    through :func:`staged_folder`: all or nothing, and an existing ``out``
    is replaced only with ``force`` (and ``replaceable``, see
    :func:`check_output`).
    """
    with staged_folder(out, force=force, replaceable=replaceable,
                       inputs=inputs) as tmp:
        fill_folder(tmp, files)
    return Path(out)


def fill_folder(folder, files):
    """Write ``files`` (as in :func:`write_folder`) into an existing folder,
    typically the temporary one of :func:`staged_folder`, each flushed to
    disk."""
    for name, value in files.items():
        _write_bytes(Path(folder) / name, file_bytes(value))
