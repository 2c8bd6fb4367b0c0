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
           "SolverFallbackWarning", "WriteError", "entry", "warn_stopped"]


class EidecompError(Exception):
    """Base class of eidecomp's own errors."""


class InputError(EidecompError, ValueError):
    """Bad input: a file, an array or an option that cannot be used."""


def entry(table, name, what):
    """``table[name]`` of a registry (formats, models, simulators), or the
    one wording of an unknown name: InputError naming the choices.

    >>> entry({"a": 1}, "b", "model")
    Traceback (most recent call last):
    ...
    eidecomp.errors.InputError: unknown model 'b' (choose from a)
    """
    try:
        return table[name]
    except (KeyError, TypeError):
        raise InputError(f"unknown {what} {name!r} (choose from "
                         f"{', '.join(table)})") from None


class SolverError(EidecompError, RuntimeError):
    """A numerical solver failed (not merely stopped early)."""


class WriteError(EidecompError, OSError):
    """An output could not be written; nothing was left half-written."""


class ConvergenceWarning(UserWarning):
    """An iterative solver stopped before reaching its tolerance."""


class SolverFallbackWarning(UserWarning):
    """The solver asked for failed or is missing; another one solved it."""


def warn_stopped(what, n_iter, *, unit="iterations", detail="",
                 advice="raise max_iter or loosen tol", stacklevel=3):
    """Issue the one ConvergenceWarning wording of every eidecomp solver.

    ``what`` names the solver ("robust PCA", "kernel robust PCA", "circuit
    refinement"); the warning says where it stopped (``detail``, e.g. the
    residuals, in parentheses) and what to do.

    >>> import warnings
    >>> with warnings.catch_warnings(record=True) as w:
    ...     warnings.simplefilter("always")
    ...     warn_stopped("robust PCA", 5000)
    >>> print(str(w[0].message).replace("; ", ";\\n"))
    robust PCA stopped after 5000 iterations before reaching its tolerance;
    raise max_iter or loosen tol
    """
    import warnings

    detail = f" ({detail})" if detail else ""
    warnings.warn(f"{what} stopped after {n_iter} {unit} before reaching its "
                  f"tolerance{detail}; {advice}", ConvergenceWarning,
                  stacklevel=stacklevel)
