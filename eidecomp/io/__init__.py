"""Everything eidecomp reads from and writes to disk.

``matrices``  weight matrices, unobserved entries and kernels (W[post, pre], checked)
``text``      numbers in .csv / .tsv / .txt tables
``binary``    .npy / .npz / .mat arrays (never unpickled)
``units``     the unit table
``limits``    magnitudes the solvers can square
``staging``   all-or-nothing writes (temporary name, then rename)
``bundles``   the folders eidecomp writes: format, version, checksums
"""

from ..limits import (
    MAX_MAGNITUDE,
    check_range,
    merge_range_stats,
    range_error,
    range_stats,
)
from .binary import MATRIX_SUFFIXES, read_npy
from .bundles import CIRCUIT_FORMAT, CIRCUIT_VERSION, circuit_files, read_circuit
from .jsondoc import load_json
from .matrices import file_checksum, read_kernel, read_matrix, read_unobserved
from .staging import staged_folder, write_file, write_folder
from .text import require_present
from .units import read_unit_table, read_units

__all__ = [
    "CIRCUIT_FORMAT",
    "CIRCUIT_VERSION",
    "MATRIX_SUFFIXES",
    "MAX_MAGNITUDE",
    "check_range",
    "circuit_files",
    "file_checksum",
    "load_json",
    "merge_range_stats",
    "range_error",
    "range_stats",
    "read_circuit",
    "read_kernel",
    "read_matrix",
    "read_unobserved",
    "read_npy",
    "read_unit_table",
    "read_units",
    "require_present",
    "staged_folder",
    "write_file",
    "write_folder",
]
