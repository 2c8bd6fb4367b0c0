"""The version of eidecomp: the one place it is written (pyproject reads it)."""

__version__ = "0.1.0"
