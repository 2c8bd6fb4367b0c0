"""The drive of W's units: one reader for every command and export.

A drive is an array H of shape (N, T): N values (one per unit of W, in W's
order) for each of T successive segments, held in turn. **The time axis is
the second one (columns).** A file of N values (1-D ``.npy``, one column,
or one row of a text file) is one segment. The random drive is N values
uniform on :data:`DRIVE_RANGE`, drawn from ``numpy.random.default_rng(seed)``.
"""

from dataclasses import dataclass

import numpy as np

from ..errors import InputError

__all__ = ["DRIVE_RANGE", "RANDOM", "Drive", "drive_of", "random_drive",
           "read_drive"]

DRIVE_RANGE = (0.5, 1.5)
"""The random drive: each unit's value uniform on [0.5, 1.5] (common
practice for a positive drive of order one; not from a source)."""

RANDOM = "random"
"""The name that asks for the random drive instead of a file."""


@dataclass(frozen=True)
class Drive:
    """A drive of W's units, ``values`` (N, T) with time along axis 1, and
    the words that say where it came from.

    >>> d = random_drive(3, seed=0)
    >>> d.values.shape, d.n_segments, d.source
    ((3, 1), 1, 'random U(0.5, 1.5), seed 0')
    """

    values: np.ndarray
    source: str

    def __post_init__(self):
        values = np.asarray(self.values, dtype=float)
        if values.ndim == 1:
            values = values[:, None]
        if values.ndim != 2 or values.shape[1] == 0:
            raise InputError(f"a drive is N values or an (N, T) array, got "
                             f"shape {np.shape(self.values)}")
        if not np.isfinite(values).all():
            raise InputError("the drive holds NaN or Inf")
        values.setflags(write=False)
        object.__setattr__(self, "values", values)

    @property
    def n_units(self):
        return self.values.shape[0]

    @property
    def n_segments(self):
        return self.values.shape[1]


def random_drive(n, seed=0):
    """The seeded random drive of ``n`` units (one segment)."""
    lo, hi = DRIVE_RANGE
    values = np.random.default_rng(seed).uniform(lo, hi, n)
    return Drive(values, f"random U({lo:g}, {hi:g}), seed {seed}")


def drive_of(h, n, name="drive"):
    """A :class:`Drive` from an array of N values or (N, T), checked against
    ``n`` units of W.

    >>> drive_of([1.0, 2.0], 2).values.tolist()
    [[1.0], [2.0]]
    >>> drive_of(np.ones((3, 1)), 2)
    Traceback (most recent call last):
    ...
    eidecomp.errors.InputError: drive has 3 values per segment; it needs one \
per unit of W, 2
    """
    values = np.asarray(h, dtype=float)
    if values.ndim == 2 and values.shape[0] == 1 and n != 1:
        values = values.T                   # one row of N values
    if values.ndim == 1:
        values = values[:, None]
    if values.ndim != 2:
        raise InputError(f"{name} must be N values or an (N, T) array (time "
                         f"along the columns), got shape {values.shape}")
    if values.shape[0] != n:
        raise InputError(f"{name} has {values.shape[0]} values per segment; "
                         f"it needs one per unit of W, {n}")
    return Drive(values, name)


def read_drive(spec, n, seed=0):
    """The drive named by ``spec``: :data:`RANDOM` (seeded by ``seed``), or a
    file (.npy, .npz, .csv, .tsv, .txt, .mat) of N values, (N, 1) or (N, T)
    with time along the columns; every value finite (a seed other than 0
    with a file is refused: it would seed nothing).

    >>> read_drive("random", 2, seed=1).source
    'random U(0.5, 1.5), seed 1'
    """
    if spec == RANDOM:
        return random_drive(n, seed)
    if seed != 0:
        raise InputError(f"{spec}: a seed ({seed}) applies to the random drive "
                         "only, not to a drive file")
    from ..io import read_matrix

    values = read_matrix(spec, square=False, what="drive", vector=True)
    try:
        return Drive(drive_of(values, n, name=f"{spec}: drive").values, str(spec))
    except InputError as exc:
        raise InputError(str(exc)) from None
