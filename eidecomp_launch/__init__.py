"""The ``eidecomp`` command's entry point, outside the eidecomp package.

Importing eidecomp imports numpy, scipy and scikit-learn, which takes a
noticeable moment; an interrupt (Ctrl-C) in that moment, or an import that
fails for want of memory (``ulimit -v``), would be a Python traceback if the
command started inside the package. Here nothing is imported before the
handlers are in place, so each is one line and the README's exit status:
130 for an interrupt, 1 for a start that failed (nothing is written either
way). Once eidecomp is imported, :func:`eidecomp.cli.main` takes over.
"""

import sys

__all__ = ["main"]


def _say(line):
    try:
        print(line, file=sys.stderr)
    except (OSError, ValueError):      # no terminal left: the status says it
        pass


def main():
    """Import eidecomp's command line and run it; its exit status."""
    try:
        from eidecomp.cli import main as run
    except KeyboardInterrupt:
        _say("eidecomp: interrupted while starting; nothing written")
        return 130
    except (ImportError, MemoryError, OSError) as exc:
        while exc.__cause__ is not None:      # numpy's wrapper: its cause
            exc = exc.__cause__
        reason = (str(exc).strip().splitlines() or [type(exc).__name__])[0]
        _say(f"eidecomp: error: cannot start ({reason}); nothing written. Too "
             "little memory (a ulimit -v?) or a broken installation "
             "(install eidecomp again)")
        return 1
    return run()
