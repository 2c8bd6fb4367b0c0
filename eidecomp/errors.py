"""Exceptions and warnings raised by eidecomp.

``InputError`` is for anything wrong with what the user gave us (a file, an
array, an option). Its message is one line that names the problem and where it
is; the command line prints that line and exits with status 2.

``WriteError`` is for an output that could not be written (a full disk, a
file size limit): nothing is left half-written; the command line prints one
line and exits with status 1.

``ConvergenceWarning`` is issued, never raised, when an iterative solver stops
at its iteration limit before reaching its tolerance. ``SolverFallbackWarning``
is issued when the convex solver asked for failed or is missing and the
other one solved the program.
"""

__all__ = ["ConvergenceWarning", "EidecompError", "InputError", "SolverError",
           "SolverFallbackWarning", "WriteError"]


class EidecompError(Exception):
    """Base class of eidecomp's own errors."""


class InputError(EidecompError, ValueError):
    """Bad input: a file, an array or an option that cannot be used."""


class SolverError(EidecompError, RuntimeError):
    """A numerical solver failed (not merely stopped early)."""


class WriteError(EidecompError, OSError):
    """An output could not be written; nothing was left half-written."""


class ConvergenceWarning(UserWarning):
    """An iterative solver stopped before reaching its tolerance."""


class SolverFallbackWarning(UserWarning):
    """The solver asked for failed or is missing; another one solved it."""
