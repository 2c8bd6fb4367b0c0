"""Exceptions and warnings raised by eidecomp.

``InputError`` is for anything wrong with what the user gave us (a file, an
array, an option). Its message is one line that names the problem and where it
is; the command line prints that line and exits with status 2.

``ConvergenceWarning`` is issued, never raised, when an iterative solver stops
at its iteration limit before reaching its tolerance.
"""

__all__ = ["ConvergenceWarning", "EidecompError", "InputError", "SolverError"]


class EidecompError(Exception):
    """Base class of eidecomp's own errors."""


class InputError(EidecompError, ValueError):
    """Bad input: a file, an array or an option that cannot be used."""


class SolverError(EidecompError, RuntimeError):
    """A numerical solver failed (not merely stopped early)."""


class ConvergenceWarning(UserWarning):
    """An iterative solver stopped before reaching its tolerance."""
