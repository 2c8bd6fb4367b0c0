"""One table of malformed inputs, each with the exact line eidecomp must print.

Every row runs the command line (``main``) in a fresh folder and checks the
contract of the README: exit status 2, exactly one line on stderr that names
the problem and the file, no traceback, and nothing written (the folder's
listing is unchanged, no partial file left behind).

References: the broken files are made with the writers whose formats they
break (numpy's ``np.save``/``np.savez`` and the NPY format specification,
NEP 1, for headers; Python's ``pickle`` for the object array; Python's
``codecs`` for the UTF-16 byte-order mark; Python's ``zipfile`` for the
members of an ``.npz``; ``scipy.io.savemat`` and the MAT-file header of the
MATLAB v7.3 format; ``scipy.sparse.save_npz``; Python's ``csv`` module and
its field size limit; the W3C XML 1.0 specification, section 2.2, ``Char``,
for the unit names; POSIX ``stat``/``open`` (ENOTDIR, a named pipe from
``os.mkfifo``, EACCES, EIO) for unreadable paths): each file is broken by the
rules of its format, not by eidecomp's. Sizes refused before anything is
allocated are checked against a fixed budget (``MEMORY``, standing in for
``eidecomp.limits.available_memory``) on files whose data is a hole of a
sparse file or zeros compressed by zlib, so no row needs the memory it
refuses.
"""

import builtins
import errno
import hashlib
import io
import json
import os
import shutil
import zipfile

import numpy as np
import pytest
import scipy.io
import scipy.sparse

from eidecomp.cli import main
from eidecomp.errors import InputError
from eidecomp.io.provenance import stamp, stamp_doc


def npy(arr, **kw):
    buf = io.BytesIO()
    np.save(buf, arr, **kw)
    return buf.getvalue()


def npz(**arrays):
    buf = io.BytesIO()
    np.savez(buf, **arrays)
    return buf.getvalue()


class _Touch:
    """Unpickling this runs a shell command that creates a file."""

    def __init__(self, target):
        self.target = target

    def __reduce__(self):
        import os

        return (os.system, (f"touch {self.target}",))


def object_npy(target):
    arr = np.empty((2, 2), dtype=object)
    arr[0, 0] = _Touch(target)
    return npy(arr, allow_pickle=True)


def npy_hole(shape, descr="<f8"):
    """A .npy file whose header promises ``shape`` and whose data is the hole
    of a sparse file of the full size (written by ``_make``)."""
    return ("HOLE", shape, descr)


def npy_head(shape, descr="<f8", data=b""):
    """A .npy file (NEP 1 header by numpy's own writer) promising ``shape``,
    followed by ``data`` only."""
    head = io.BytesIO()
    np.lib.format.write_array_header_1_0(head, {"descr": descr,
                                                "fortran_order": False,
                                                "shape": shape})
    return head.getvalue() + data


def zip_of(**members):
    """An .npz made member by member with Python's zipfile (np.savez's
    layout: one NAME.npy member an array), from raw bytes."""
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w") as zf:
        for name, data in members.items():
            zf.writestr(name, data)
    return buf.getvalue()


def npz_compressed(**arrays):
    def make():
        buf = io.BytesIO()
        np.savez_compressed(buf, **arrays)
        return buf.getvalue()
    return make  # made when the row runs, not at import


def sparse_npz(matrix):
    buf = io.BytesIO()
    scipy.sparse.save_npz(buf, matrix, compressed=False)
    return buf.getvalue()


def sparse_layout(fmt, shape, **arrays):
    """The members scipy.sparse.save_npz writes (format, shape, data and the
    index arrays), with values no scipy.sparse matrix would hold."""
    return npz(format=np.array(fmt.encode()), shape=np.array(shape), **arrays)


def mat(compress=False, **variables):
    def make():
        buf = io.BytesIO()
        scipy.io.savemat(buf, variables, do_compression=compress)
        return buf.getvalue()
    return make


# The 128-byte header of a MATLAB v7.3 file (an HDF5 file behind it): text,
# subsystem offset, version 0x0200, endian indicator 'IM'.
MAT73 = b"MATLAB 7.3 MAT-file, Platform: GLNXA64".ljust(116) + bytes(8) + \
    b"\x00\x02IM"

MEMORY = 2**30 // 10  # "0.1 GiB": the budget of the rows that name it

GOOD = "0,-0.2,0.1\n0.3,0,-0.1\n-0.2,0.1,0\n"
FEATURES = "feature\n0\n60\n120\n"

# (id, {file name: content}, argv, expected line); "{d}" is the folder.
# The W of the unit-table and E:I rows is the 3 x 3 GOOD matrix.
DEC = ["decompose", "{d}/bad", "-o", "{d}/out"]
RUN = ["run", "{d}/w.csv", "-o", "{d}/out", "--ei-ratio", "1"]
UNITS = RUN + ["--units", "{d}/u.csv"]
ASM_DEC = ["assemble", "{d}/dec", "-o", "{d}/out"]
ROWS = [
    ("empty-file", {"bad.csv": b""}, DEC, "{d}/bad.csv: file is empty"),
    ("blank-lines", {"bad.csv": b"\n \n\t\n"}, DEC, "{d}/bad.csv: file is empty"),
    ("utf16-bom", {"bad.csv": "1,2\n3,4\n".encode("utf-16")}, DEC,
     "{d}/bad.csv: not UTF-8 text (byte 0)"),
    ("decimal-commas-semicolons", {"bad.csv": b"0;0,5\n-0,5;0\n"}, DEC,
     "{d}/bad.csv: line 1 separates cells with ';' (a decimal-comma export?); "
     "write '.' decimals separated by commas or tabs"),
    ("decimal-comma-tsv", {"bad.tsv": b"0\t0,5\n0,25\t0\n"}, DEC,
     "{d}/bad.tsv: decimal comma in '0,5' (write '0.5') at row 1, column 2"),
    ("header-in-the-middle", {"bad.csv": b"a,b\n0,1\npre,post\n1,0\n"}, DEC,
     "{d}/bad.csv: row 3 holds no numbers (a second header, or two tables "
     "in one file?)"),
    ("ragged-rows", {"bad.csv": b"0,1,2\n3,4\n5,6,7\n"}, DEC,
     "{d}/bad.csv: row 2 has 2 cells, expected 3 as in the first data row"),
    ("text-cell", {"bad.csv": b"0,1\n2,abc\n"}, DEC,
     "{d}/bad.csv: non-numeric cell 'abc' at row 2, column 2"),
    ("empty-cell", {"bad.csv": b"0,1\n,3\n"}, DEC,
     "{d}/bad.csv: empty cell at row 2, column 1"),
    ("nan", {"bad.csv": b"0,nan\n1,0\n"}, DEC,
     "{d}/bad.csv: 1 non-finite value(s) (NaN, Inf or beyond float64's "
     "range), first at row 1, column 2"),
    ("inf", {"bad.npy": npy(np.array([[0.0, 1.0], [-np.inf, 0.0]]))}, DEC,
     "{d}/bad.npy: 1 non-finite value(s) (NaN, Inf or beyond float64's "
     "range), first at row 2, column 1"),
    ("beyond-float64", {"bad.txt": b"0 1e309\n1 0\n"}, DEC,
     "{d}/bad.txt: 1 non-finite value(s) (NaN, Inf or beyond float64's "
     "range), first at row 1, column 2"),
    ("1e308", {"bad.npy": npy(np.array([[0.0, 1e308], [1.0, 0.0]]))}, DEC,
     "{d}/bad.npy: value 1e+308 at row 1, column 2 is too large (limit "
     "1e+100: the solvers square entries); rescale the weight matrix, "
     "results scale with it"),
    ("denormal", {"bad.npy": npy(np.array([[0.0, 1.0], [5e-320, 0.0]]))}, DEC,
     "{d}/bad.npy: 1 subnormal value(s) (nonzero but below 2.2e-308, without "
     "full precision), first at row 2, column 1; set them to 0 or rescale "
     "the weight matrix"),
    ("integer-overflow", {"bad.npy": npy(np.array([[0, 2**62], [1, 0]]))}, DEC,
     "{d}/bad.npy: integer values beyond 2**53 lose precision as float64"),
    # the smallest int64 is its own absolute value in numpy (two's complement)
    ("integer-int64-min", {"bad.npy": npy(np.array([[np.iinfo(np.int64).min]]))},
     DEC, "{d}/bad.npy: integer values beyond 2**53 lose precision as float64"),
    # decompose takes rectangular matrices; assembling a circuit needs square
    ("non-square", {"bad.csv": b"0,1,2\n3,4,5\n"},
     ["run", "{d}/bad", "-o", "{d}/out"],
     "{d}/bad.csv: weight matrix must be square (W[post, pre] among one set "
     "of neurons), got shape (2, 3)"),
    ("one-dimensional", {"bad.npy": npy(np.zeros(4))}, DEC,
     "{d}/bad.npy: weight matrix must be 2-D, got 1-D shape (4,)"),
    ("three-dimensional", {"bad.npy": npy(np.zeros((2, 2, 2)))}, DEC,
     "{d}/bad.npy: weight matrix must be 2-D, got 3-D shape (2, 2, 2)"),
    ("pickled-objects", {"bad.npy": "OBJECT"}, DEC,
     "{d}/bad.npy: holds Python objects; refused (eidecomp never unpickles)"),
    ("npz-several-arrays",
     {"bad.npz": npz(a=np.eye(2), b=np.eye(2))}, DEC,
     "{d}/bad.npz: holds 2 arrays (a, b); name one with --key"),
    ("npz-wrong-key", {"bad.npz": npz(a=np.eye(2))},
     DEC + ["--key", "c"], "{d}/bad.npz: no array named 'c'; it holds a"),
    ("truncated-npy", {"bad.npy": npy(np.eye(4))[:-40]}, DEC,
     "{d}/bad.npy: truncated .npy file: its header promises 128 bytes for "
     "shape (4, 4), 88 follow"),
    ("not-npy", {"bad.npy": b"0,1\n1,0\n"}, DEC,
     "{d}/bad.npy: not a .npy file (no NumPy header)"),
    ("complex", {"bad.npy": npy(np.eye(2) * 1j)}, DEC,
     "{d}/bad.npy: holds complex values; a real numeric weight matrix is "
     "needed"),
    ("unknown-type", {"bad.xlsx": b"PK"}, DEC,
     "{d}/bad.xlsx: unknown file type '.xlsx'; expected one of .npy, .npz, "
     ".csv, .tsv, .txt, .mat"),
    ("missing-file", {}, ["decompose", "{d}/none.csv", "-o", "{d}/out"],
     "{d}/none.csv: no such file"),
    ("unobserved-wrong-shape", {"w.csv": GOOD, "m.csv": b"0,1\n1,0\n"},
     ["decompose", "{d}/w.csv", "--unobserved", "{d}/m.csv", "-o", "{d}/out"],
     "{d}/m.csv: the file of unobserved entries has shape (2, 2) but the "
     "matrix file has shape (3, 3)"),
    ("unobserved-not-binary", {"w.csv": GOOD, "m.csv": b"0,1,0\n1,0,2\n0,0,0\n"},
     ["decompose", "{d}/w.csv", "--unobserved", "{d}/m.csv", "-o", "{d}/out"],
     "{d}/m.csv: the file of unobserved entries must hold only 0 (observed) "
     "and 1 (unobserved)"),
    ("units-wrong-rows", {"w.csv": GOOD, "u.csv": b"feature\n0\n90\n"},
     UNITS,
     "{d}/u.csv: unit table has 2 rows, W has 3 units"),
    ("units-duplicate-id", {"w.csv": GOOD, "u.csv": b"id,feature\na,0\nb,60\na,120\n"},
     UNITS,
     "{d}/u.csv: row 4: duplicate unit id 'a' (first on row 2)"),
    ("units-missing-id", {"w.csv": GOOD, "u.csv": b"id,feature\na,0\n,60\nc,120\n"},
     UNITS, "{d}/u.csv: row 3: missing unit id"),
    ("units-angle-outside-period", {"w.csv": GOOD, "u.csv": b"feature\n0\n200\n30\n"},
     UNITS,
     "{d}/u.csv: row 3, column 'feature': 200 is outside [0, 180)"),
    ("units-negative-angle", {"w.csv": GOOD, "u.csv": b"feature\n-5\n20\n30\n"},
     UNITS,
     "{d}/u.csv: row 2, column 'feature': -5 is outside [0, 180)"),
    ("units-no-feature", {"w.csv": GOOD, "u.csv": b"id,x\na,0\nb,1\nc,2\n"},
     UNITS,
     "{d}/u.csv: unit table has no 'feature' column (no column name is close "
     "to it)"),
    # the closest of the user's names (difflib.get_close_matches, Python's
    # standard library), as spelled
    ("units-feature-misspelt",
     {"w.csv": GOOD, "u.csv": b"ID,Featur,Feat_deg,X\na,0,0,0\nb,1,1,1\nc,2,2,2\n"},
     UNITS,
     "{d}/u.csv: unit table has no 'feature' column (closest: 'Featur', "
     "'Feat_deg')"),
    ("units-text-position",
     {"w.csv": GOOD, "u.csv": b"feature,x\n0,1\n60,far\n120,3\n"},
     UNITS,
     "{d}/u.csv: row 3, column 'x': not a number: 'far'"),
    ("units-negative-distance-scale", {"w.csv": GOOD, "u.csv": FEATURES},
     UNITS + ["--position-unit", "deg", "--magnification", "-300"],
     "argument --magnification: must be a positive number: '-300' "
     "(see 'eidecomp run --help')"),
    ("ratio-zero", {"w.csv": GOOD}, RUN[:-1] + ["0"],
     "E:I ratio '0' must be positive and finite"),
    ("ratio-negative", {"w.csv": GOOD}, RUN[:-1] + ["-1"],
     "E:I ratio '-1' must be positive and finite"),
    ("ratio-text", {"w.csv": GOOD}, RUN[:-1] + ["abc"],
     "E:I ratio 'abc' is not a ratio like 4:1 or a number"),
    ("ratio-zero-inhibitory", {"w.csv": GOOD}, RUN[:-1] + ["4:0"],
     "E:I ratio '4:0': the inhibitory side must be positive"),
    ("ratio-no-interneuron", {"w.csv": GOOD}, RUN[:-1] + ["7:1"],
     "E:I ratio 7:1 leaves no interneuron for 3 excitatory units "
     "(round(3/7) = 0)"),
    ("bundle-corrupt-json", {"BUNDLE": "json"},
     ["export", "{d}/c", "--format", "graphml", "-o", "{d}/out"],
     "{d}/c/circuit.json: corrupt JSON (Expecting value: line 1 column 1 "
     "(char 0))"),
    ("bundle-truncated-block", {"BUNDLE": "truncate"},
     ["export", "{d}/c", "--format", "graphml", "-o", "{d}/out"],
     "{d}/c/J_EE.npy: truncated .npy file: its header promises 3200 bytes for "
     "shape (20, 20), 1536 follow"),
    ("bundle-missing-block", {"BUNDLE": "missing"},
     ["export", "{d}/c", "--format", "graphml", "-o", "{d}/out"],
     "{d}/c/J_TE.npy: missing from the circuit bundle"),
    ("bundle-newer-version", {"BUNDLE": "version"},
     ["export", "{d}/c", "--format", "graphml", "-o", "{d}/out"],
     "{d}/c/circuit.json: format version 99 is newer than this eidecomp "
     "reads (3); upgrade"),
    ("bundle-not-a-bundle", {"c/readme.txt": b"hello"},
     ["export", "{d}/c", "--format", "graphml", "-o", "{d}/out"],
     "{d}/c: no circuit.json; not a circuit bundle"),
    ("unknown-option", {"w.csv": GOOD},
     ["decompose", "{d}/w.csv", "-o", "{d}/out", "--bogus"],
     "unrecognized arguments: --bogus (see 'eidecomp decompose --help')"),
    ("negative-tol", {"w.csv": GOOD},
     ["decompose", "{d}/w.csv", "-o", "{d}/out", "--tol", "-1"],
     "argument --tol: must be a positive number: '-1' "
     "(see 'eidecomp decompose --help')"),
    ("text-seed", {"w.csv": GOOD},
     ["decompose", "{d}/w.csv", "-o", "{d}/out", "--seed", "abc"],
     "argument --seed: not a whole number: 'abc' "
     "(see 'eidecomp decompose --help')"),
    # --- unreadable paths (POSIX stat/open) --------------------------------
    ("unreadable-parent-is-a-file", {"w.csv": GOOD},
     ["decompose", "{d}/w.csv/x.csv", "-o", "{d}/out"],
     "{d}/w.csv/x.csv: cannot read (Not a directory)"),
    ("unreadable-fifo-matrix", {"bad.csv": "FIFO"}, DEC,
     "{d}/bad.csv: cannot read (a named pipe, not a regular file)"),
    ("unreadable-device-matrix", {},
     ["decompose", "/dev/null", "-o", "{d}/out"],
     "/dev/null: cannot read (a character device, not a regular file)"),
    ("unreadable-folder-as-matrix", {"bad.npy/x.npy": npy(np.eye(2))}, DEC,
     "{d}/bad.npy: is a folder, expected a weight matrix file"),
    ("unreadable-fifo-unobserved", {"w.csv": GOOD, "m.csv": "FIFO"},
     ["decompose", "{d}/w.csv", "--unobserved", "{d}/m.csv", "-o", "{d}/out"],
     "{d}/m.csv: cannot read (a named pipe, not a regular file)"),
    ("unreadable-fifo-units", {"w.csv": GOOD, "u.csv": "FIFO"}, UNITS,
     "{d}/u.csv: cannot read (a named pipe, not a regular file)"),
    ("unreadable-folder-as-units", {"w.csv": GOOD, "u.csv/a": b"feature\n"},
     UNITS, "{d}/u.csv: is a folder, expected a unit table file"),
    ("unreadable-fifo-kernel", {"k.npy": "FIFO"},
     ["decompose", "--kernel", "{d}/k.npy", "--grid", "8x8", "-o", "{d}/out"],
     "{d}/k.npy: cannot read (a named pipe, not a regular file)"),
    ("unreadable-fifo-drive", {"BUNDLE": "copy", "h.csv": "FIFO"},
     ["simulate", "{d}/c", "--input", "{d}/h.csv"],
     "{d}/h.csv: cannot read (a named pipe, not a regular file)"),
    # --- sizes refused before allocating (NEP 1 headers, zip members) ------
    ("npy-beyond-memory", {"bad.npy": npy_hole((20000, 20000)),
                           "MEMORY": MEMORY}, DEC,
     "{d}/bad.npy: weight matrix of shape (20000, 20000) (float64) needs "
     "about 3.0 GiB, more than the 0.1 GiB this process may use"),
    ("npy-beyond-memory-with-float64-copy",
     {"bad.npy": npy_hole((6000, 6000), "|u1"), "MEMORY": MEMORY}, DEC,
     "{d}/bad.npy: weight matrix of shape (6000, 6000) (uint8) needs about "
     "0.3 GiB, more than the 0.1 GiB this process may use"),
    ("npy-truncation-before-memory",
     {"bad.npy": npy_head((20000, 20000), data=bytes(128)), "MEMORY": MEMORY},
     DEC,
     "{d}/bad.npy: truncated .npy file: its header promises 3200000000 bytes "
     "for shape (20000, 20000), 128 follow"),
    ("npz-member-truncation-before-memory",
     {"bad.npz": zip_of(**{"w.npy": npy_head((20000, 20000), data=bytes(128))}),
      "MEMORY": MEMORY}, DEC,
     "{d}/bad.npz: array 'w': truncated .npy file: its header promises "
     "3200000000 bytes for shape (20000, 20000), 128 follow"),
    ("kernel-beyond-memory", {"k.npy": npy_hole((64, 64, 99, 99)),
                              "MEMORY": MEMORY},
     ["decompose", "--kernel", "{d}/k.npy", "--grid", "128x128", "-o",
      "{d}/out"],
     "{d}/k.npy: kernel of shape (64, 64, 99, 99) (float64) needs about "
     "0.3 GiB, more than the 0.1 GiB this process may use"),
    ("npz-member-beyond-memory",
     {"bad.npz": npz_compressed(w=np.zeros((6000, 6000), np.uint8)),
      "MEMORY": MEMORY}, DEC,
     "{d}/bad.npz: array 'w': weight matrix of shape (6000, 6000) (uint8) "
     "needs about 0.3 GiB, more than the 0.1 GiB this process may use"),
    ("npz-member-truncated", {"bad.npz": zip_of(**{"w.npy": npy(np.eye(4))[:-40]})},
     DEC,
     "{d}/bad.npz: array 'w': truncated .npy file: its header promises 128 "
     "bytes for shape (4, 4), 88 follow"),
    ("npz-member-pickled", {"bad.npz": "OBJECT-NPZ"}, DEC,
     "{d}/bad.npz: array 'w': holds Python objects; refused (eidecomp never "
     "unpickles)"),
    ("npz-member-not-npy", {"bad.npz": zip_of(**{"w.txt": b"0,1\n1,0\n"})}, DEC,
     "{d}/bad.npz: array 'w.txt' is not a .npy member (np.savez writes one "
     ".npy file per array)"),
    ("npz-member-corrupt-header",
     {"bad.npz": zip_of(**{"w.npy": npy(np.eye(2)).replace(b"'<f8'", b"'<x8'")})},
     DEC,
     "{d}/bad.npz: array 'w': corrupt .npy header (descr is not a valid dtype "
     "descriptor: '<x8')"),
    ("npz-not-a-zip", {"bad.npz": b"0,1\n1,0\n"}, DEC,
     "{d}/bad.npz: not a valid .npz file (not a zip file)"),
    ("npz-truncated-zip", {"bad.npz": npz(w=np.eye(3))[:150]}, DEC,
     "{d}/bad.npz: not a valid .npz file (File is not a zip file)"),
    # --- scipy.sparse.save_npz files ---------------------------------------
    ("sparse-npz-beyond-memory",
     {"bad.npz": sparse_npz(scipy.sparse.csr_matrix(
         ([1.0], ([0], [1])), shape=(100000, 100000))), "MEMORY": MEMORY}, DEC,
     "{d}/bad.npz: weight matrix of shape (100000, 100000) (float64, "
     "scipy.sparse, densified) needs about 74.5 GiB, more than the 0.1 GiB "
     "this process may use"),
    ("sparse-npz-index-out-of-range",
     {"bad.npz": sparse_layout("csr", (3, 3), data=np.ones(2),
                               indices=np.array([0, 7], np.int32),
                               indptr=np.array([0, 1, 2, 2], np.int32))}, DEC,
     "{d}/bad.npz: not a valid scipy.sparse matrix (indices must be < 3)"),
    ("sparse-npz-coo-out-of-range",
     {"bad.npz": sparse_layout("coo", (3, 3), data=np.ones(2),
                               row=np.array([0, 7]), col=np.array([0, 1]))}, DEC,
     "{d}/bad.npz: not a valid scipy.sparse matrix (axis 0 index 7 exceeds "
     "matrix dimension 3)"),
    ("sparse-npz-three-dimensional",
     {"bad.npz": sparse_layout("coo", (2, 2, 2), data=np.ones(1),
                               coords=np.zeros((3, 1), np.int64))}, DEC,
     "{d}/bad.npz: weight matrix must be 2-D, got 3-D shape (2, 2, 2) (a "
     "scipy.sparse array)"),
    ("sparse-npz-nan",
     {"bad.npz": sparse_npz(scipy.sparse.csr_matrix(
         ([1.0, np.nan], ([0, 2], [1, 0])), shape=(3, 3)))}, DEC,
     "{d}/bad.npz: 1 non-finite value(s) (NaN, Inf or beyond float64's "
     "range), first at row 3, column 1"),
    ("sparse-npz-1e308",
     {"bad.npz": sparse_npz(scipy.sparse.csc_matrix(
         ([1e308], ([1], [2])), shape=(3, 3)))}, DEC,
     "{d}/bad.npz: value 1e+308 at row 2, column 3 is too large (limit "
     "1e+100: the solvers square entries); rescale the weight matrix, "
     "results scale with it"),
    ("sparse-npz-complex",
     {"bad.npz": sparse_npz(scipy.sparse.coo_matrix(
         ([1j], ([0], [1])), shape=(2, 2)))}, DEC,
     "{d}/bad.npz: holds complex values; a real numeric weight matrix is "
     "needed"),
    # --- .mat (scipy.io.savemat; shapes from scipy.io.whosmat) -------------
    ("mat-beyond-memory",
     {"bad.mat": mat(compress=True, w=np.zeros((6000, 6000), np.uint8)),
      "MEMORY": MEMORY}, DEC,
     "{d}/bad.mat: variable 'w': weight matrix of shape (6000, 6000) (uint8) "
     "needs about 0.3 GiB, more than the 0.1 GiB this process may use"),
    ("mat-sparse-beyond-memory",
     {"bad.mat": mat(w=scipy.sparse.csc_matrix(([1.0], ([0], [1])),
                                               shape=(100000, 100000))),
      "MEMORY": MEMORY}, DEC,
     "{d}/bad.mat: variable 'w': weight matrix of shape (100000, 100000) "
     "(float64) needs about 74.5 GiB, more than the 0.1 GiB this process may "
     "use"),
    ("mat-sparse-inf",
     {"bad.mat": mat(w=scipy.sparse.csc_matrix(([np.inf], ([1], [0])),
                                               shape=(2, 2)))}, DEC,
     "{d}/bad.mat: 1 non-finite value(s) (NaN, Inf or beyond float64's "
     "range), first at row 2, column 1"),
    ("mat-struct", {"bad.mat": mat(w={"a": np.eye(2)})}, DEC,
     "{d}/bad.mat: variable 'w' is a MATLAB struct; a real numeric weight "
     "matrix is needed"),
    ("mat-cell", {"bad.mat": mat(w=np.array([[1.0, "x"]], dtype=object))}, DEC,
     "{d}/bad.mat: variable 'w' is a MATLAB cell; a real numeric weight "
     "matrix is needed"),
    ("mat-text", {"bad.mat": mat(w="abc")}, DEC,
     "{d}/bad.mat: holds text values; a real numeric weight matrix is needed"),
    ("mat-two-variables", {"bad.mat": mat(a=np.eye(2), b=np.eye(2))}, DEC,
     "{d}/bad.mat: holds 2 variables (a, b); name one with --key"),
    ("mat-v73", {"bad.mat": MAT73}, DEC,
     "{d}/bad.mat: MATLAB v7.3 (HDF5) files are not read; save with -v7 or "
     "as .npy"),
    # --- text tables (Python's csv module) ---------------------------------
    ("csv-field-beyond-csv-limit",
     {"bad.csv": b"0,1\n0,\"" + b"1" * 131073 + b"\"\n"}, DEC,
     "{d}/bad.csv: row 2: field larger than field limit (131072)"),
    ("csv-cell-beyond-number-length", {"bad.csv": b"0," + b"1" * 5000 + b"\n1,0\n"},
     DEC,
     "{d}/bad.csv: cell at row 1, column 2 has 5000 characters (limit 1024 in "
     "a table of numbers)"),
    ("txt-cell-beyond-number-length", {"bad.txt": b"0 1\n1 " + b"x" * 2000 + b"\n"},
     DEC,
     "{d}/bad.txt: cell at row 2, column 2 has 2000 characters (limit 1024 in "
     "a table of numbers)"),
    ("csv-long-text-cell-cut", {"bad.csv": b"0,1\n1," + b"x" * 100 + b"\n"}, DEC,
     "{d}/bad.csv: non-numeric cell 'xxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxx'"
     "... (100 characters) at row 2, column 2"),
    ("csv-quoted-cell-over-line-break", {"bad.csv": b'0,1\n"2\n3",4\n5,6\n'}, DEC,
     "{d}/bad.csv: row 2: a quoted cell runs over a line break (a table of "
     "numbers holds none)"),
    ("csv-nul-cell", {"bad.csv": b"0,1\n1,\x00\n"}, DEC,
     "{d}/bad.csv: line 2 holds a NUL character (a binary file, or not text?)"),
    # --- unit tables (XML 1.0 Char, section 2.2; csv limits) ---------------
    ("units-bell-in-id",
     {"w.csv": GOOD, "u.csv": b"id,feature\na,0\nb\x07,60\nc,120\n"},
     UNITS,
     "{d}/u.csv: row 3, column 'id': character U+0007 cannot be stored in XML "
     "(GraphML, NeuroML2)"),
    ("units-nul-in-id", {"w.csv": GOOD, "u.csv": b"id,feature\na\x00,0\nb,60\nc,120\n"},
     UNITS,
     "{d}/u.csv: row 2, column 'id': character U+0000 cannot be stored in XML "
     "(GraphML, NeuroML2)"),
    ("units-nul-in-unused-column",
     {"w.csv": GOOD, "u.csv": b"feature,note\n0,x\n60,\x00\n120,z\n"}, UNITS,
     "{d}/u.csv: row 3, column 'note': character U+0000 cannot be stored in "
     "XML (GraphML, NeuroML2)"),
    ("units-noncharacter-fffe",
     {"w.csv": GOOD, "u.csv": "id,feature\na,0\nb,60\nc\ufffe,120\n".encode()},
     UNITS,
     "{d}/u.csv: row 4, column 'id': character U+FFFE cannot be stored in XML "
     "(GraphML, NeuroML2)"),
    ("units-escape-in-quoted-id",
     {"w.csv": GOOD, "u.csv": b'id,feature\n"a\x1b[31m",0\nb,60\nc,120\n'}, UNITS,
     "{d}/u.csv: row 2, column 'id': character U+001B cannot be stored in XML "
     "(GraphML, NeuroML2)"),
    ("units-control-in-header",
     {"w.csv": GOOD, "u.csv": b"feature,no\x01te\n0,a\n60,b\n120,c\n"}, UNITS,
     "{d}/u.csv: row 1, column 2: character U+0001 cannot be stored in XML "
     "(GraphML, NeuroML2)"),
    ("units-id-beyond-field-limit",
     {"w.csv": GOOD, "u.csv": b"id,feature\n" + b"a" * 5000 + b",0\nb,60\nc,120\n"},
     UNITS,
     "{d}/u.csv: row 2, column 'id': a cell of 5000 characters (limit 4096)"),
    ("units-field-beyond-csv-limit",
     {"w.csv": GOOD,
      "u.csv": b'id,feature\na,0\n"' + b"b" * 131073 + b'",60\nc,120\n'}, UNITS,
     "{d}/u.csv: row 3: field larger than field limit (131072)"),
    ("units-long-text-position-cut",
     {"w.csv": GOOD, "u.csv": b"feature,x\n0,1\n60," + b"far" * 30 + b"\n120,3\n"},
     UNITS,
     "{d}/u.csv: row 3, column 'x': not a number: "
     "'farfarfarfarfarfarfarfarfarfarfarfarfarf'... (90 characters)"),
    # --- unobserved entries -----------------------------------------------------------
    ("unobserved-none-observed", {"w.csv": GOOD, "m.csv": b"1,1,1\n1,1,1\n1,1,1\n"},
     ["decompose", "{d}/w.csv", "--unobserved", "{d}/m.csv", "-o", "{d}/out"],
     "{d}/m.csv: the file of unobserved entries leaves no entry of W observed"),
    # --- one owner for every format: bundles, and options that do not apply.
    # References: the JSON text format (RFC 8259) for the hand-edited
    # manifests; numpy's NPY format (NEP 1) for the planted headers; SHA-256
    # (FIPS 180-4, Python's hashlib) for the checksums.
    ("dec-lam-ignored", {"DEC": "ok"}, ASM_DEC + ["--lam", "0.5"],
     "--lam does not apply to a decomposition folder (it was decomposed "
     "already: decompose again, or give the matrix)"),
    ("dec-unobserved-refused", {"DEC": "ok", "m.csv": "0,0,0\n0,0,0\n0,0,1\n"},
     ASM_DEC + ["--unobserved", "{d}/m.csv"],
     "--unobserved does not apply to a decomposition folder (it was decomposed "
     "already: decompose again, or give the matrix)"),
    ("dec-transpose-ignored", {"DEC": "ok"}, ASM_DEC + ["--transpose"],
     "--transpose does not apply to a decomposition folder (it was decomposed "
     "already: decompose again, or give the matrix)"),
    ("dec-key-ignored", {"DEC": "ok"}, ASM_DEC + ["--key", "W"],
     "--key does not apply to a decomposition folder (it was decomposed "
     "already: decompose again, or give the matrix)"),
    ("dec-diagonal-ignored", {"DEC": "ok"}, ASM_DEC + ["--ignore-diagonal"],
     "--ignore-diagonal does not apply to a decomposition folder (it was "
     "decomposed already: decompose again, or give the matrix)"),
    ("dec-tol-ignored", {"DEC": "ok"}, ASM_DEC + ["--tol", "1e-6"],
     "--tol does not apply to a decomposition folder (it was decomposed "
     "already: decompose again, or give the matrix)"),
    ("dec-float32-ignored", {"DEC": "ok"}, ASM_DEC + ["--float32"],
     "--float32 does not apply to a decomposition folder (it was decomposed "
     "already: decompose again, or give the matrix)"),
    ("dec-swapped-part", {"DEC": "swap"}, ASM_DEC,
     "{d}/dec/low_rank.npy: checksum does not match summary.json (the file "
     "was changed, swapped or truncated)"),
    ("dec-unlisted-part", {"DEC": "unlist"}, ASM_DEC,
     "{d}/dec/summary.json: no checksum for sparse.npy"),
    ("dec-old-version", {"DEC": "v1"}, ASM_DEC,
     "{d}/dec/summary.json: format version 1 was written by an older "
     "eidecomp, whose manifests carry no provenance stamp; write it again "
     "with this one"),
    ("dec-missing-key", {"DEC": "no-rank"}, ASM_DEC,
     "{d}/dec/summary.json: missing key 'rank'"),
    ("dec-read-as-circuit", {"DEC": "ok"},
     ["report", "{d}/dec", "-o", "{d}/r.html"],
     "{d}/dec: a decomposition folder, not a circuit bundle"),
    ("dec-simulated", {"DEC": "ok"}, ["simulate", "{d}/dec"],
     "{d}/dec: a decomposition folder, not a circuit bundle"),
    ("circuit-read-as-dec", {"BUNDLE": "ok"},
     ["assemble", "{d}/c", "-o", "{d}/out"],
     "{d}/c: a circuit bundle, not a decomposition folder; assemble reads a "
     "matrix or a folder written by 'eidecomp decompose'"),
    ("plain-folder-as-dec", {"x/notes.txt": "mine"},
     ["assemble", "{d}/x", "-o", "{d}/out"],
     "{d}/x: not an eidecomp decomposition folder; assemble reads a matrix "
     "or a folder written by 'eidecomp decompose'"),
    ("bundle-missing-key", {"BUNDLE": "drop:counts"},
     ["export", "{d}/c", "--format", "graphml", "-o", "{d}/out"],
     "{d}/c/circuit.json: missing key 'counts'"),
    ("bundle-missing-nested-key", {"BUNDLE": "drop:metrics.share_rule"},
     ["report", "{d}/c", "-o", "{d}/r.html"],
     "{d}/c/circuit.json: metrics: missing key 'share_rule'"),
    ("bundle-baseline-key", {"BUNDLE": "drop:baselines.0.name"},
     ["report", "{d}/c", "-o", "{d}/r.html"],
     "{d}/c/circuit.json: baselines[0]: missing key 'name'"),
    ("bundle-wrong-type", {"BUNDLE": "set:counts=3"},
     ["export", "{d}/c", "--format", "json", "-o", "{d}/out"],
     "{d}/c/circuit.json: key 'counts' must be an object (got an integer)"),
    ("bundle-no-sums", {"BUNDLE": "drop:sha256"},
     ["simulate", "{d}/c"], "{d}/c/circuit.json: missing key 'sha256'"),
    ("bundle-foreign-path", {"BUNDLE": "sum:../w.npy"},
     ["simulate", "{d}/c"],
     "{d}/c/circuit.json: 'sha256' lists '../w.npy', not a file of the bundle"),
    ("bundle-deep-nesting", {"BUNDLE": "deep"},
     ["export", "{d}/c", "--format", "csv", "-o", "{d}/out"],
     "{d}/c/circuit.json: JSON nested deeper than 64 levels"),
    ("bundle-huge-string", {"BUNDLE": "long-id"},
     ["export", "{d}/c", "--format", "csv", "-o", "{d}/out"],
     "{d}/c/circuit.json: unit_ids[0] is a string of 2000000 characters "
     "(limit 1048576)"),
    ("bundle-huge-header", {"BUNDLE": "plant:J_EE.npy:huge", "MEMORY": MEMORY},
     ["export", "{d}/c", "--format", "csv", "-o", "{d}/out"],
     "{d}/c/J_EE.npy: J_EE.npy of shape (100000, 100000) (float64) needs "
     "about 74.5 GiB, more than the 0.1 GiB this process may use"),
    ("bundle-corrupt-features", {"BUNDLE": "plant:features.npy:garbage"},
     ["export", "{d}/c", "--format", "graphml", "-o", "{d}/out"],
     "{d}/c/features.npy: not a .npy file (no NumPy header)"),
    ("bundle-features-wrong-shape", {"BUNDLE": "plant:features.npy:short"},
     ["report", "{d}/c", "-o", "{d}/r.html"],
     "{d}/c/features.npy: shape (3,), expected (20,) for 20 units"),
    ("bundle-swapped-split", {"BUNDLE": "swap"}, ["simulate", "{d}/c"],
     "{d}/c/low_rank.npy: checksum does not match circuit.json (the file "
     "was changed, swapped or truncated)"),
    ("bundle-blocks-disagree", {"BUNDLE": "plant:J_EU.npy:wide"},
     ["simulate", "{d}/c"],
     "{d}/c: J_UE has shape (2, 20), expected (3, 20)"),
    ("matrix-grid-option", {"w.csv": GOOD},
     ["decompose", "{d}/w.csv", "-o", "{d}/out", "--grid", "4x4"],
     "--grid does not apply to a matrix"),
    ("matrix-boundary-option", {"w.csv": GOOD},
     ["decompose", "{d}/w.csv", "-o", "{d}/out", "--boundary", "zero"],
     "--boundary does not apply to a matrix"),
    ("matrix-scheduler-option", {"w.csv": GOOD},
     ["decompose", "{d}/w.csv", "-o", "{d}/out", "--scheduler", "tcp://x:1"],
     "--scheduler does not apply to a matrix"),
    ("matrix-expand-option", {"w.csv": GOOD},
     ["assemble", "{d}/w.csv", "-o", "{d}/out", "--expand"],
     "--expand does not apply to a matrix"),
    ("kernel-unobserved-option", {"k.npy": npy(np.ones((1, 1, 3, 3))),
                            "m.csv": "0\n"},
     ["decompose", "--kernel", "{d}/k.npy", "--grid", "4x4", "-o", "{d}/out",
      "--unobserved", "{d}/m.csv"],
     "--unobserved does not apply to a kernel (--kernel)"),
    ("kernel-units-option", {"k.npy": npy(np.ones((1, 1, 3, 3))),
                             "u.csv": FEATURES},
     ["assemble", "--kernel", "{d}/k.npy", "--grid", "4x4", "-o", "{d}/out",
      "--units", "{d}/u.csv"], "--units does not apply to a kernel (--kernel)"),
    ("kernel-method-option", {"k.npy": npy(np.ones((1, 1, 3, 3)))},
     ["decompose", "--kernel", "{d}/k.npy", "--grid", "4x4", "-o", "{d}/out",
      "--method", "convex"], "--method does not apply to a kernel (--kernel)"),
    ("kernel-huge-grid", {"k.npy": npy(np.ones((4, 4, 3, 3))), "MEMORY": MEMORY},
     ["decompose", "--kernel", "{d}/k.npy", "--grid", "100000x100000", "-o",
      "{d}/out"],
     "{d}/k.npy: 4 features on a 100000x100000 grid (the solver's 8 full-grid "
     "kernels) needs about 9536.7 GiB, more than the 0.1 GiB this process "
     "may use"),
    ("kernel-and-matrix", {"w.csv": GOOD, "k.npy": npy(np.ones((1, 1, 3, 3)))},
     ["decompose", "{d}/w.csv", "--kernel", "{d}/k.npy", "--grid", "4x4", "-o",
      "{d}/out"], "give either a matrix or --kernel"),
    ("dask-unobserved-option", {"w.npy": npy(np.eye(3)),
                                "m.csv": "0,0,0\n0,0,0\n0,0,1\n"},
     ["decompose", "{d}/w.npy", "--engine", "dask", "-o", "{d}/out", "--unobserved",
      "{d}/m.csv"],
     "--unobserved does not apply to the dask engine (plain PCP with the ALM)"),
    ("dask-method-option", {"w.npy": npy(np.eye(3))},
     ["decompose", "{d}/w.npy", "--engine", "dask", "-o", "{d}/out",
      "--method", "convex"],
     "--method does not apply to the dask engine (plain PCP with the ALM)"),
    # --- held-out families of the adversarial pass: options that a job does
    # not use, --force over what eidecomp did not write, typed manifests
    ("key-on-npy", {"w.npy": npy(np.eye(3))},
     ["decompose", "{d}/w.npy", "--key", "W", "-o", "{d}/out"],
     "{d}/w.npy: a .npy file holds one array; a key (--key) names one in a "
     ".npz or .mat file"),
    ("key-on-csv", {"w.csv": GOOD},
     ["decompose", "{d}/w.csv", "--key", "W", "-o", "{d}/out"],
     "{d}/w.csv: a .csv file holds one array; a key (--key) names one in a "
     ".npz or .mat file"),
    ("key-on-example", {}, ["decompose", "example", "--key", "W", "-o",
                            "{d}/out"],
     "--key does not apply to the built-in example"),
    ("solver-without-convex", {"w.csv": GOOD},
     ["decompose", "{d}/w.csv", "--solver", "SCS", "-o", "{d}/out"],
     "--solver does not apply to --method ialm"),
    ("lam-and-target-rank", {"w.csv": GOOD},
     ["decompose", "{d}/w.csv", "--lam", "0.1", "--target-rank", "1", "-o",
      "{d}/out"],
     "--lam and --target-rank exclude each other (the rank search chooses lam)"),
    ("tau-on-a-graph-format", {"BUNDLE": "ok"},
     ["export", "{d}/c", "--format", "graphml", "--tau-e", "20", "-o",
      "{d}/g.graphml"], "--tau-e does not apply to the graphml format"),
    ("raw-csv-on-json", {"BUNDLE": "ok"},
     ["export", "{d}/c", "--format", "json", "--raw-csv", "-o", "{d}/g.json"],
     "--raw-csv does not apply to the json format"),
    ("period-without-units", {"w.csv": GOOD}, RUN + ["--period", "360"],
     "--period applies to a unit table (--units)"),
    ("position-unit-without-units", {"w.csv": GOOD},
     RUN + ["--position-unit", "deg", "--magnification", "300"],
     "--position-unit applies to a unit table (--units)"),
    ("magnification-in-um", {"w.csv": GOOD, "u.csv": "feature,x,y\n0,1,1\n"
                             "60,2,2\n120,3,3\n"},
     UNITS + ["--magnification", "300"],
     "--magnification applies to positions in degrees (--position-unit deg)"),
    ("degrees-without-positions", {"w.csv": GOOD, "u.csv": FEATURES},
     UNITS + ["--position-unit", "deg", "--magnification", "300"],
     "{d}/u.csv: --position-unit deg, but the table has no x and y columns"),
    ("force-over-a-user-file", {"BUNDLE": "ok", "notes.txt": "mine\n"},
     ["export", "{d}/c", "--format", "json", "-o", "{d}/notes.txt", "--force"],
     "{d}/notes.txt: not written by eidecomp (it carries no provenance "
     "stamp); not replaced"),
    ("force-over-another-export", {"BUNDLE": "ok",
                                   "g.graphml": '<graphml><key attr.name="population"'
                                                '/></graphml>'},
     ["export", "{d}/c", "--format", "json", "-o", "{d}/g.graphml", "--force"],
     "{d}/g.graphml: not written by eidecomp (it carries no provenance "
     "stamp); not replaced"),
    ("force-over-a-user-page", {"BUNDLE": "ok", "m.html": "<html>mine</html>"},
     ["report", "{d}/c", "-o", "{d}/m.html", "--force"],
     "{d}/m.html: not written by eidecomp (it carries no provenance "
     "stamp); not replaced"),
    ("force-over-a-fake-manifest", {"w.csv": GOOD,
                                    "out/circuit.json": '{"format": '
                                                        '"eidecomp-circuit"}',
                                    "out/thesis.tex": "mine"},
     RUN + ["--force"],
     "{d}/out: circuit.json: not written by eidecomp (it carries no "
     "provenance stamp); not replaced"),
    ("force-over-a-bundle-with-notes", {"BUNDLE": "ok", "w.csv": GOOD,
                                        "c/notes.txt": "mine"},
     ["run", "{d}/w.csv", "-o", "{d}/c", "--ei-ratio", "1", "--force"],
     "{d}/c: holds 'notes.txt', which its circuit.json does not list (a file "
     "of yours?); not replaced"),
    ("kernel-no-features", {"k.npy": npy(np.zeros((0, 0, 3, 3)))},
     ["decompose", "--kernel", "{d}/k.npy", "--grid", "8x8", "-o", "{d}/out"],
     "{d}/k.npy: the kernel has no features (shape (0, 0, 3, 3))"),
    ("ratio-overflows", {"w.csv": GOOD}, RUN[:-1] + ["1:1e308"],
     "E:I ratio 1:1e+308 asks for more interneurons than the 3 excitatory "
     "units"),
    ("bundle-text-abscissa", {"BUNDLE": 'set:stability.max_stable_tau_ratio="x"'},
     ["report", "{d}/c", "-o", "{d}/r.html"],
     "{d}/c/circuit.json: stability: key 'max_stable_tau_ratio' must be a "
     "number or null (got a string)"),
    ("bundle-list-abscissa", {"BUNDLE": "set:stability.original_spectral_abscissa=[1]"},
     ["report", "{d}/c", "-o", "{d}/r.html"],
     "{d}/c/circuit.json: stability: key 'original_spectral_abscissa' must be a "
     "number or null (got an array)"),
    ("bundle-text-period", {"BUNDLE": 'set:parameters.period="x"'},
     ["report", "{d}/c", "-o", "{d}/r.html"],
     "{d}/c/circuit.json: parameters: key 'period' must be a number or null "
     "(got a string)"),
    ("bundle-zero-period", {"BUNDLE": "set:parameters.period=0"},
     ["report", "{d}/c", "-o", "{d}/r.html"],
     "{d}/c/circuit.json: parameters: 'period' must be a positive number of "
     "degrees, got 0"),
    ("bundle-text-rank", {"BUNDLE": 'set:decomposition.rank="x"'},
     ["report", "{d}/c", "-o", "{d}/r.html"],
     "{d}/c/circuit.json: decomposition: key 'rank' must be a number or null "
     "(got a string)"),
    ("bundle-counts-contradict", {"BUNDLE": "set:counts.excitatory=7"},
     ["export", "{d}/c", "--format", "csv", "-o", "{d}/out"],
     "{d}/c/circuit.json: counts: 'excitatory' is 7 but the blocks hold 20"),
    ("bundle-nan-features", {"BUNDLE": "plant:features.npy:nan"},
     ["report", "{d}/c", "-o", "{d}/r.html"],
     "{d}/c/features.npy: holds NaN or Inf"),
    ("first-row-typo", {"bad.csv": b"0,0.5,O.3\n0.1,0,0.2\n0.3,0.1,0\n"}, DEC,
     "{d}/bad.csv: non-numeric cell 'O.3' at row 1, column 3"),
    ("first-row-hex", {"bad.csv": b"0,0x10\n1,0\n"}, DEC,
     "{d}/bad.csv: non-numeric cell '0x10' at row 1, column 2"),
    ("nul-in-text", {"bad.csv": b"0\x00,1\n1,0\n"}, DEC,
     "{d}/bad.csv: line 1 holds a NUL character (a binary file, or not text?)"),
    ("units-extra-cell", {"w.csv": GOOD, "u.csv": "id,feature\na,0,zz\nb,60\n"
                                                   "c,120\n"}, UNITS,
     "{d}/u.csv: row 2 has 3 cells, the header 2"),
]

# --- one number grammar for every text input (issue 28) ----------------------
# Reference: the grammar the README states (ASCII digits, point, exponent;
# eidecomp.io.text.NUMBER) against what Python's float() also takes (PEP 515
# underscores, Unicode decimal digits, Unicode white space).
def _cell(cell):
    return {"bad.csv": f"0,{cell}\n1,0\n".encode()}


def _bad_cell(cell):
    return f"{{d}}/bad.csv: non-numeric cell {cell!r} at row 1, column 2"


NUMBER_ROWS = [("1_0", "underscore-ten"), ("0_5", "underscore-five"),
               ("1__0", "underscores"), ("\uff11", "full-width-one"),
               ("\u0663", "arabic-indic-three"), ("\u00b2", "superscript-two"),
               ("\u00a00.5", "no-break-space-before"),
               ("0.5\u2007", "figure-space-after"),
               ("\u22121", "unicode-minus"), ("1.5e", "exponent-without-digits"),
               ("1e5.5", "fractional-exponent"), ("--1", "double-sign"),
               ("0.5\u2028", "line-separator-after"), ("1,5e3", None),
               ("\u0031\u0301", "combining-mark")]
ROWS += [(f"number-{name}", _cell(cell), DEC, _bad_cell(cell))
         for cell, name in NUMBER_ROWS if name is not None]
ROWS += [
    ("number-units-underscore", {"w.csv": GOOD, "u.csv": "feature\n0\n6_0\n"
                                                         "120\n"}, UNITS,
     "{d}/u.csv: row 3, column 'feature': not a number: '6_0'"),
    ("number-units-full-width", {"w.csv": GOOD, "u.csv": "feature\n0\n"
                                                         "\uff16\uff10\n120\n"},
     UNITS, "{d}/u.csv: row 3, column 'feature': not a number: "
            "'\uff16\uff10'"),
    ("number-option-underscore", {"w.csv": GOOD},
     ["decompose", "{d}/w.csv", "-o", "{d}/out", "--lam", "1_0"],
     "argument --lam: not a number: '1_0' (see 'eidecomp decompose --help')"),
    ("number-option-full-width", {"w.csv": GOOD},
     RUN + ["--alpha", "\uff11"],
     "argument --alpha: not a number: '\uff11' (see 'eidecomp run --help')"),
    ("number-txt-no-break-space-separator", {"bad.txt": "1 0\n0\u00a01\n"},
     DEC, "{d}/bad.txt: row 2 has 1 cells, expected 2 as in the first data "
          "row"),
]

# --- provenance: --force replaces only an unedited eidecomp output (issue 28)
# Reference: the README's "Provenance" table and --force rule; SHA-256 by
# Python's hashlib. Each row tries one way a file or folder that is not an
# unedited eidecomp output could pass for one.
NOT_OURS = "not written by eidecomp (it carries no provenance stamp); not replaced"
EDITED = ("edited after eidecomp wrote it (its provenance digest does not "
          "match); not replaced")
LINK = "a symbolic link, which eidecomp never writes through or replaces; not replaced"


def _export(fmt, edit=None):
    """A file or folder KIND for _make: an export of the test bundle, then
    one hand edit (see _make)."""
    return ("EXPORT", fmt, edit)


def _stamped(data, syntax, edit=lambda b: b):
    return lambda: edit(stamp(data, syntax))


def _json_export(c):
    return ["export", "{d}/c", "--format", "json", "-o", c, "--force"]


def _to(fmt, out):
    return ["export", "{d}/c", "--format", fmt, "-o", out, "--force"]


ROWS += [
    # markers are no proof: files that begin as an export of ours does
    ("force-json-with-markers", {"BUNDLE": "ok", "cfg.json":
                                 '{"population": "V1", "synapse": 1, '
                                 '"notes": "irreplaceable"}\n'},
     _json_export("{d}/cfg.json"), f"{{d}}/cfg.json: {NOT_OURS}"),
    ("force-graphml-with-markers", {"BUNDLE": "ok", "g.graphml":
                                    '<graphml><key attr.name="synapse"/><key '
                                    'attr.name="population"/></graphml>\n'},
     _to("graphml", "{d}/g.graphml"), f"{{d}}/g.graphml: {NOT_OURS}"),
    ("force-csv-sharing-the-header", {"BUNDLE": "ok", "e.csv":
                                      '"pre","post","pre_population",'
                                      '"post_population","synapse","weight"\n'
                                      '"my","own","E","E","excitatory",1\n'},
     _to("csv", "{d}/e.csv"), f"{{d}}/e.csv: {NOT_OURS}"),
    ("force-populations-header", {"BUNDLE": "ok", "p.csv":
                                  '"pre_population","post_population"\nx,y\n'},
     _to("populations", "{d}/p.csv"), f"{{d}}/p.csv: {NOT_OURS}"),
    ("force-page-with-the-title", {"BUNDLE": "ok", "m.html":
                                   "<title>eidecomp circuit report</title>mine"},
     ["report", "{d}/c", "-o", "{d}/m.html", "--force"],
     f"{{d}}/m.html: {NOT_OURS}"),
    ("force-a-stamp-copied-onto-another-file",
     {"BUNDLE": "ok", "n.csv": _stamped(b"a,b\n", "hash",
                                        lambda b: b"mine\n" + b)},
     _to("csv", "{d}/n.csv"), f"{{d}}/n.csv: {EDITED}"),
    ("force-stamp-then-text-after-it",
     {"BUNDLE": "ok", "n.csv": _stamped(b"a,b\n", "hash",
                                        lambda b: b + b"1,2\n")},
     _to("csv", "{d}/n.csv"), f"{{d}}/n.csv: {NOT_OURS}"),
    ("force-stamp-with-a-short-digest",
     {"BUNDLE": "ok", "n.csv": b"a,b\n# eidecomp provenance sha256:abc\n"},
     _to("csv", "{d}/n.csv"), f"{{d}}/n.csv: {NOT_OURS}"),
    ("force-stamp-with-capital-hex",
     {"BUNDLE": "ok", "n.csv": _stamped(b"a,b\n", "hash",
                                        lambda b: b[:-66] + b[-66:].upper())},
     _to("csv", "{d}/n.csv"), f"{{d}}/n.csv: {NOT_OURS}"),
    ("force-stamp-without-its-line-break",
     {"BUNDLE": "ok", "n.csv": _stamped(b"a,b\n", "hash", lambda b: b[:-1])},
     _to("csv", "{d}/n.csv"), f"{{d}}/n.csv: {NOT_OURS}"),
    ("force-xml-stamp-edited",
     {"BUNDLE": "ok", "n.graphml": _stamped(b"<graphml/>", "xml",
                                            lambda b: b.replace(b"ml/", b"ml /"))},
     _to("graphml", "{d}/n.graphml"), f"{{d}}/n.graphml: {EDITED}"),
    ("force-json-stamp-value-edited",
     {"BUNDLE": "ok", "g.json": _stamped(b'{"a": 1, "b": [2, 3]}', "json",
                                         lambda b: b.replace(b"[2", b"[9"))},
     _json_export("{d}/g.json"), f"{{d}}/g.json: {EDITED}"),
    ("force-json-stamp-key-added",
     {"BUNDLE": "ok", "g.json": _stamped(b'{"a": 1}', "json",
                                         lambda b: b.replace(b"{", b'{"x": 0, ', 1))},
     _json_export("{d}/g.json"), f"{{d}}/g.json: {EDITED}"),
    ("force-json-stamp-duplicate-key",
     {"BUNDLE": "ok", "g.json": _stamped(b'{"a": 1}', "json",
                                         lambda b: b.replace(b"{", b'{"a": 1, ', 1))},
     _json_export("{d}/g.json"), f"{{d}}/g.json: {EDITED}"),
    ("force-json-stamp-not-an-object",
     {"BUNDLE": "ok", "g.json": b'[{"eidecomp_provenance": {"sha256": "0"}}]'},
     _json_export("{d}/g.json"), f"{{d}}/g.json: {NOT_OURS}"),
    ("force-json-stamp-digest-a-number",
     {"BUNDLE": "ok", "g.json": b'{"eidecomp_provenance": {"sha256": 1}}'},
     _json_export("{d}/g.json"), f"{{d}}/g.json: {EDITED}"),
    ("force-over-an-edited-csv-export",
     {"BUNDLE": "ok", "e.csv": _export("csv", "flip")},
     _to("csv", "{d}/e.csv"), f"{{d}}/e.csv: {EDITED}"),
    ("force-over-an-edited-graphml-export",
     {"BUNDLE": "ok", "g.graphml": _export("graphml", "flip")},
     _to("graphml", "{d}/g.graphml"), f"{{d}}/g.graphml: {EDITED}"),
    ("force-over-an-edited-json-export",
     {"BUNDLE": "ok", "g.json": _export("json", "flip")},
     _json_export("{d}/g.json"), f"{{d}}/g.json: {EDITED}"),
    ("force-over-an-edited-report",
     {"BUNDLE": "ok", "r.html": ("REPORT", "flip")},
     ["report", "{d}/c", "-o", "{d}/r.html", "--force"],
     f"{{d}}/r.html: {EDITED}"),
    ("force-over-edited-report-figures",
     {"BUNDLE": "ok", "r.html": ("REPORT", "figure")},
     ["report", "{d}/c", "-o", "{d}/r.html", "--force"],
     "{d}/r-figures: '01-matrix-w.svg' was changed after eidecomp "
     "wrote it; not replaced (the folder of the report's SVG figures, beside "
     "r.html)"),
    # symbolic links: never written through or replaced, --force or not
    ("link-to-our-own-export", {"BUNDLE": "ok", "e.csv": _export("csv"),
                                "l.csv": ("LINK", "e.csv")},
     _to("csv", "{d}/l.csv"), f"{{d}}/l.csv: {LINK}"),
    ("link-without-force", {"BUNDLE": "ok", "e.csv": _export("csv"),
                            "l.csv": ("LINK", "e.csv")},
     ["export", "{d}/c", "--format", "csv", "-o", "{d}/l.csv"],
     f"{{d}}/l.csv: {LINK}"),
    ("link-dangling", {"BUNDLE": "ok", "l.csv": ("LINK", "gone.csv")},
     _to("csv", "{d}/l.csv"), f"{{d}}/l.csv: {LINK}"),
    ("link-to-an-export-folder", {"BUNDLE": "ok", "n": _export("nest"),
                                  "l": ("LINK", "n")},
     _to("nest", "{d}/l"), f"{{d}}/l: {LINK}"),
    ("link-to-our-own-bundle", {"BUNDLE": "ok", "w.csv": GOOD,
                                "l": ("LINK", "c")},
     ["run", "{d}/w.csv", "-o", "{d}/l", "--ei-ratio", "1", "--force"],
     f"{{d}}/l: {LINK}"),
    ("link-as-the-report-page", {"BUNDLE": "ok", "l.html": ("LINK", "x.html")},
     ["report", "{d}/c", "-o", "{d}/l.html", "--force"],
     f"{{d}}/l.html: {LINK}"),
    ("link-as-a-decomposition", {"w.csv": GOOD, "l": ("LINK", "elsewhere")},
     ["decompose", "{d}/w.csv", "-o", "{d}/l", "--force"], f"{{d}}/l: {LINK}"),
    # empty folders: yours, never replaced
    ("force-over-an-empty-folder", {"w.csv": GOOD, "out": "DIR"},
     RUN + ["--force"],
     "{d}/out: an empty folder that eidecomp did not write; not replaced"),
    ("force-export-folder-over-an-empty-folder", {"BUNDLE": "ok", "n": "DIR"},
     _to("nest", "{d}/n"),
     "{d}/n: an empty folder that eidecomp did not write; not replaced"),
    ("force-decompose-over-an-empty-folder", {"w.csv": GOOD, "o": "DIR"},
     ["decompose", "{d}/w.csv", "-o", "{d}/o", "--force"],
     "{d}/o: an empty folder that eidecomp did not write; not replaced"),
    # export folders: the manifest lists every file, each as written
    ("force-export-folder-with-a-note", {"BUNDLE": "ok",
                                         "n": _export("nest", "add")},
     _to("nest", "{d}/n"),
     "{d}/n: holds 'notes.txt', which its eidecomp-manifest.json does not "
     "list (a file of yours?); not replaced"),
    ("force-export-folder-script-edited", {"BUNDLE": "ok",
                                           "n": _export("nest", "script")},
     _to("nest", "{d}/n"),
     "{d}/n: 'circuit_nest.py' was changed after eidecomp wrote it; not "
     "replaced"),
    ("force-export-folder-data-edited", {"BUNDLE": "ok",
                                         "n": _export("brian2", "data")},
     _to("brian2", "{d}/n"),
     "{d}/n: 'circuit_rate_data.npz' was changed after eidecomp wrote it; "
     "not replaced"),
    ("force-export-folder-file-missing", {"BUNDLE": "ok",
                                          "n": _export("nest", "drop")},
     _to("nest", "{d}/n"),
     "{d}/n: lacks 'circuit_rate_data.npz', which its eidecomp-manifest.json "
     "lists; not replaced"),
    ("force-export-folder-manifest-edited", {"BUNDLE": "ok",
                                             "n": _export("nest", "manifest")},
     _to("nest", "{d}/n"),
     f"{{d}}/n: eidecomp-manifest.json: {EDITED[:-len('; not replaced')]}; "
     "not replaced"),
    ("force-export-folder-file-now-a-link", {"BUNDLE": "ok",
                                             "n": _export("nest", "link")},
     _to("nest", "{d}/n"),
     "{d}/n: 'circuit_rate_data.npz' is a symbolic link; not replaced"),
    ("force-export-folder-without-manifest", {"BUNDLE": "ok",
                                              "n": _export("nest", "unlist")},
     _to("nest", "{d}/n"),
     "{d}/n: has no eidecomp-manifest.json: not a folder eidecomp wrote; not "
     "replaced"),
    # bundles: the manifest's own stamp, and every file as written
    ("force-bundle-block-edited", {"BUNDLE": "swap", "w.csv": GOOD},
     ["run", "{d}/w.csv", "-o", "{d}/c", "--ei-ratio", "1", "--force"],
     "{d}/c: 'low_rank.npy' was changed after eidecomp wrote it; not replaced"),
    ("force-bundle-manifest-edited", {"BUNDLE": "raw-set:parameters.ei_ratio="
                                                '"9:2"', "w.csv": GOOD},
     ["run", "{d}/w.csv", "-o", "{d}/c", "--ei-ratio", "1", "--force"],
     f"{{d}}/c: circuit.json: {EDITED[:-len('; not replaced')]}; not replaced"),
    ("force-decomposition-over-a-circuit", {"BUNDLE": "ok", "w.csv": GOOD},
     ["decompose", "{d}/w.csv", "-o", "{d}/c", "--force"],
     "{d}/c: holds an eidecomp circuit bundle, not a decomposition folder; "
     "not replaced"),
    # edited manifests are never believed
    ("read-manifest-ratio-edited", {"BUNDLE": 'raw-set:parameters.ei_ratio="9:2"'},
     ["report", "{d}/c", "-o", "{d}/r.html"],
     "{d}/c/circuit.json: edited after eidecomp wrote it (its provenance "
     "digest does not match); not read"),
    ("read-manifest-shape-edited", {"BUNDLE": "raw-set:input.shape=[1e9, 1e9]"},
     ["export", "{d}/c", "--format", "csv", "-o", "{d}/e.csv"],
     "{d}/c/circuit.json: edited after eidecomp wrote it (its provenance "
     "digest does not match); not read"),
    ("read-manifest-stamp-removed", {"BUNDLE": "unstamp"},
     ["simulate", "{d}/c"],
     "{d}/c/circuit.json: not written by eidecomp (it carries no provenance "
     "stamp); not read"),
    ("read-manifest-digest-zeroed", {"BUNDLE": "zero-stamp"},
     ["report", "{d}/c", "-o", "{d}/r.html"],
     "{d}/c/circuit.json: edited after eidecomp wrote it (its provenance "
     "digest does not match); not read"),
    # a manifest stamped again after an edit must still agree with its arrays
    ("restamped-ratio", {"BUNDLE": 'set:parameters.ei_ratio="9:2"'},
     ["report", "{d}/c", "-o", "{d}/r.html"],
     "{d}/c/circuit.json: parameters: 'ei_ratio' 9:2 gives 4 interneurons, "
     "but the blocks hold 5"),
    ("restamped-ratio-not-a-ratio", {"BUNDLE": 'set:parameters.ei_ratio="x"'},
     ["report", "{d}/c", "-o", "{d}/r.html"],
     "E:I ratio 'x' is not a ratio like 4:1 or a number"),
    ("restamped-interneuron-count", {"BUNDLE": "set:parameters.n_inhibitory=9"},
     ["simulate", "{d}/c"],
     "{d}/c/circuit.json: parameters: 'n_inhibitory' is 9 but the blocks "
     "hold 5 interneurons"),
    ("restamped-huge-shape", {"BUNDLE": "set:input.shape=[1000000000, "
                                        "1000000000]"},
     ["export", "{d}/c", "--format", "csv", "-o", "{d}/e.csv"],
     "{d}/c/circuit.json: input: 'shape' is [1000000000, 1000000000] but the "
     "blocks are of a 20 x 20 W"),
    ("restamped-shape-text", {"BUNDLE": 'set:input.shape="20x20"'},
     ["export", "{d}/c", "--format", "csv", "-o", "{d}/e.csv"],
     "{d}/c/circuit.json: input: 'shape' is '20x20' but the blocks are of a "
     "20 x 20 W"),
    ("restamped-nan-error", {"BUNDLE": "set:metrics.relative_error=NaN"},
     ["report", "{d}/c", "-o", "{d}/r.html"],
     "{d}/c/circuit.json: metrics.relative_error is nan, not a finite "
     "number"),
    ("restamped-1e999", {"BUNDLE": "set:stability.original_spectral_abscissa="
                                   "1e999"},
     ["report", "{d}/c", "-o", "{d}/r.html"],
     "{d}/c/circuit.json: stability.original_spectral_abscissa is inf, not a "
     "finite number"),
    ("restamped-minus-infinity", {"BUNDLE": "set:parameters.lam=-Infinity"},
     ["simulate", "{d}/c"],
     "{d}/c/circuit.json: parameters.lam is -inf, not a finite number"),
    ("restamped-duplicate-ids", {"BUNDLE": 'set:unit_ids=["u", "v", "u", "w", '
                                           '"x", "y", "z", "a", "b", "c", "d", '
                                           '"e", "f", "g", "h", "i", "j", "k", '
                                           '"l", "m"]'},
     ["export", "{d}/c", "--format", "csv", "-o", "{d}/e.csv"],
     "{d}/c/circuit.json: 'unit_ids' names 'u' twice"),
    ("restamped-dec-rank-huge", {"DEC": "set:rank=1000000"}, ASM_DEC,
     "{d}/dec/summary.json: 'rank' is 1000000, outside 0 to 3 for a 3 x 3 "
     "matrix"),
    ("restamped-dec-rank-negative", {"DEC": "set:rank=-1"}, ASM_DEC,
     "{d}/dec/summary.json: 'rank' is -1, outside 0 to 3 for a 3 x 3 matrix"),
    ("restamped-dec-shape", {"DEC": "shape"}, ASM_DEC,
     "{d}/dec/summary.json: input: 'shape' is [9, 9] but the arrays are "
     "3 x 3"),
    ("restamped-dec-lam-nan", {"DEC": "set:lam=NaN"}, ASM_DEC,
     "{d}/dec/summary.json: lam is nan, not a finite number"),
    ("dec-manifest-edited", {"DEC": "raw-lam"}, ASM_DEC,
     "{d}/dec/summary.json: edited after eidecomp wrote it (its provenance "
     "digest does not match); not read"),
    # found by the adversarial pass over the change (issue 28)
    ("restamped-dec-lam-huge-integer", {"DEC": "set:lam=" + "1" + "0" * 400},
     ASM_DEC, "{d}/dec/summary.json: lam is an integer of 401 digits, beyond "
              "2**53 (no count or size eidecomp writes is)"),
    ("restamped-period-huge-integer", {"BUNDLE": "set:parameters.period=1"
                                                 + "0" * 400},
     ["export", "{d}/c", "--format", "json", "-o", "{d}/g.json"],
     "{d}/c/circuit.json: parameters.period is an integer of 401 digits, "
     "beyond 2**53 (no count or size eidecomp writes is)"),
    ("restamped-w-index-far", {"BUNDLE": "set:w_index=" + str(
        list(range(24)) + [10**9])},
     ["export", "{d}/c", "--format", "csv", "-o", "{d}/e.csv"],
     "{d}/c: w_index must name every W unit at least once, each E unit "
     "once, and no unit as both E and I"),
    ("restamped-ratio-own-neurons-missing",
     {"BUNDLE": 'drop:parameters.own_neurons;set:parameters.ei_ratio="1:1"'},
     ["export", "{d}/c", "--format", "csv", "-o", "{d}/e.csv"],
     "{d}/c/circuit.json: parameters: 'ei_ratio' 1:1 gives 20 interneurons, "
     "but the blocks hold 5"),
    ("restamped-own-neurons-claimed", {"BUNDLE": "set:parameters.own_neurons="
                                                 "true"},
     ["export", "{d}/c", "--format", "csv", "-o", "{d}/e.csv"],
     "{d}/c/circuit.json: parameters: 'own_neurons' is true but the blocks "
     "are not a circuit of W's own neurons"),
    ("restamped-own-neurons-text", {"BUNDLE": 'set:parameters.own_neurons="no"'},
     ["export", "{d}/c", "--format", "csv", "-o", "{d}/e.csv"],
     "{d}/c/circuit.json: parameters: key 'own_neurons' must be true or false "
     "(got a string)"),
    ("read-manifest-stamp-with-a-note", {"BUNDLE": "stamp-note"},
     ["report", "{d}/c", "-o", "{d}/r.html"],
     "{d}/c/circuit.json: edited after eidecomp wrote it (its provenance "
     "digest does not match); not read"),
    ("force-json-stamp-with-a-note",
     {"BUNDLE": "ok", "g.json": _stamped(b'{"a": 1}', "json",
                                         lambda b: b.replace(b'"}', b'", "n": 1}'))},
     _json_export("{d}/g.json"), f"{{d}}/g.json: {EDITED}"),
    ("force-export-folder-over-report-figures", {"BUNDLE": "ok",
                                                 "r.html": ("REPORT", None)},
     _to("pynn", "{d}/r-figures"),
     "{d}/r-figures: holds eidecomp report figures, not eidecomp pynn export; "
     "not replaced"),
    ("force-nest-over-brian2-folder", {"BUNDLE": "ok",
                                       "n": _export("brian2")},
     _to("nest", "{d}/n"),
     "{d}/n: holds eidecomp brian2 export, not eidecomp nest export; not "
     "replaced"),
    ("output-inside-another-bundle", {"BUNDLE": "ok", "w.csv": GOOD,
                                      "c2": ("COPY", "c")},
     ["export", "{d}/c", "--format", "json", "-o", "{d}/c2/circuit.json",
      "--force"],
     "{d}/c2/circuit.json: inside {d}/c2, a folder eidecomp wrote "
     "(circuit.json lists its files); write elsewhere"),
    ("output-new-file-inside-an-export-folder", {"BUNDLE": "ok",
                                                 "n": _export("nest")},
     ["export", "{d}/c", "--format", "csv", "-o", "{d}/n/e.csv"],
     "{d}/n/e.csv: inside {d}/n, a folder eidecomp wrote "
     "(eidecomp-manifest.json lists its files); write elsewhere"),
    # smaller points of issue 28
    ("folder-export-named-as-a-script", {"BUNDLE": "ok"},
     ["export", "{d}/c", "--format", "pynn", "-o", "{d}/y9.py"],
     "{d}/y9.py: the pynn export is a folder (a script and its data), not a "
     ".py file; give a folder name"),
    ("folder-export-named-as-neuroml", {"BUNDLE": "ok"},
     ["export", "{d}/c", "--format", "nest", "-o", "{d}/n.net.nml"],
     "{d}/n.net.nml: the nest export is a folder (a script and its data), "
     "not a .nml file; give a folder name"),
    ("unit-table-given-as-the-matrix", {"bad.csv": "id,feature,x\na,0,1\n"
                                                   "b,60,2\nc,120,3\n"}, DEC,
     "{d}/bad.csv: a unit table (columns id, feature, x), not a matrix; give "
     "it with --units"),
    ("unit-table-as-matrix-capitals", {"bad.tsv": "Feature\tY\n0\t1\n"
                                                  "60\t2\n"}, DEC,
     "{d}/bad.tsv: a unit table (columns Feature, Y), not a matrix; give it "
     "with --units"),
    ("matrix-path-with-a-trailing-slash", {"w.csv": GOOD},
     ["decompose", "{d}/w.csv/", "-o", "{d}/out"],
     "{d}/w.csv/: cannot read (Not a directory)"),
    ("units-path-with-a-trailing-slash", {"w.csv": GOOD, "u.csv": FEATURES},
     RUN + ["--units", "{d}/u.csv/"], "{d}/u.csv/: cannot read (Not a "
                                      "directory)"),
    ("units-row-of-separators", {"w.csv": GOOD, "u.csv": "feature,x\n0,1\n"
                                                         ",\n120,3\n"},
     UNITS, "{d}/u.csv: line 3 holds only separators; every unit needs its "
            "row"),
    ("read-manifest-duplicate-key", {"BUNDLE": "dup-key"},
     ["export", "{d}/c", "--format", "csv", "-o", "{d}/e.csv"],
     "{d}/c/circuit.json: corrupt JSON (the key 'format' appears twice in one "
     "object)"),
    # the decomposition folder's record of the entries left out, checked
    ("dec-unobserved-ignore-diagonal-not-bool",
     {"DEC": 'hidden-set:ignore_diagonal="yes"'}, ASM_DEC,
     "{d}/dec/summary.json: key 'ignore_diagonal' must be true or false (got "
     "a string)"),
    ("dec-unobserved-path-a-number", {"DEC": "hidden-set:path=5"}, ASM_DEC,
     "{d}/dec/summary.json: key 'path' must be a string or null (got an "
     "integer)"),
    ("dec-unobserved-diagonal-not-left-out",
     {"DEC": "hidden-set:ignore_diagonal=true"}, ASM_DEC,
     "{d}/dec/summary.json: ignore_diagonal is true but observed.npy does not "
     "leave the diagonal out"),
    ("dec-unobserved-count-disagrees", {"DEC": "hidden-set:n_unobserved=2"},
     ASM_DEC, "{d}/dec/summary.json: n_unobserved is 2 but observed.npy leaves "
              "out 1 entries"),
    ("dec-manifest-duplicate-key", {"DEC": "dup-key"}, ASM_DEC,
     "{d}/dec/summary.json: corrupt JSON (the key 'format' appears twice in "
     "one object)"),
    # a seed seeds the random drive only
    ("simulate-seed-with-a-drive-file", {"BUNDLE": "ok", "h.csv": "1\n" * 20},
     ["simulate", "{d}/c", "--input", "{d}/h.csv", "--seed", "3"],
     "{d}/h.csv: a seed (3) applies to the random drive only, not to a drive "
     "file"),
    # a missing circuit bundle is a missing input too
    ("missing-bundle-export", {}, ["export", "{d}/c", "--format", "json", "-o",
                                   "{d}/g.json"], "{d}/c: no such file"),
    ("missing-bundle-report", {"r.html": "mine"},
     ["report", "{d}/c", "-o", "{d}/r.html", "--force"], "{d}/c: no such file"),
    ("missing-bundle-simulate", {}, ["simulate", "{d}/c"], "{d}/c: no such file"),
    ("dangling-link-as-the-bundle", {"c": ("LINK", "gone")},
     ["simulate", "{d}/c"], "{d}/c: no such file"),
    # a missing input is named before the output is looked at (issue 28)
    ("missing-matrix-before-existing-output", {"out": "DIR"},
     ["decompose", "{d}/nope.csv", "-o", "{d}/out"], "{d}/nope.csv: no such file"),
    ("missing-matrix-before-existing-circuit", {"out": "DIR"},
     RUN[:1] + ["{d}/nope.npy"] + RUN[2:], "{d}/nope.npy: no such file"),
    ("missing-decomposition-before-existing-output", {"out.txt": "mine"},
     ["assemble", "{d}/dec/", "-o", "{d}/out.txt"], "{d}/dec/: no such file"),
    ("missing-unobserved-before-existing-output", {"w.csv": GOOD, "out": "DIR"},
     ["decompose", "{d}/w.csv", "--unobserved", "{d}/m.csv", "-o", "{d}/out"],
     "{d}/m.csv: no such file"),
    ("missing-units-before-existing-output", {"w.csv": GOOD, "out": "DIR"},
     RUN + ["--units", "{d}/u.csv"], "{d}/u.csv: no such file"),
    ("missing-kernel-before-existing-output", {"out": "DIR"},
     ["assemble", "--kernel", "{d}/k.npy", "--grid", "4x4", "-o", "{d}/out"],
     "{d}/k.npy: no such file"),
    ("missing-kernel-before-existing-decomposition", {"o": "x"},
     ["decompose", "--kernel", "{d}/k.npy", "--grid", "4x4", "-o", "{d}/o"],
     "{d}/k.npy: no such file"),
    ("missing-units-named-before-forced-output", {"w.csv": GOOD, "out": "DIR"},
     RUN + ["--units", "{d}/u.csv", "--force"], "{d}/u.csv: no such file"),
    ("dangling-link-as-the-input", {"w.csv": ("LINK", "gone.csv"), "out": "DIR"},
     ["decompose", "{d}/w.csv", "-o", "{d}/out"], "{d}/w.csv: no such file"),
    # the file of unobserved entries: one owner of its checks with observed=
    ("unobserved-all-ones-with-the-diagonal", {"w.csv": GOOD,
                                               "m.csv": "0,1,1\n1,0,1\n1,1,0\n"},
     ["decompose", "{d}/w.csv", "--unobserved", "{d}/m.csv", "--ignore-diagonal",
      "-o", "{d}/out"],
     "{d}/m.csv: the file of unobserved entries with the diagonal ignored "
     "leaves no entry of W observed"),
    ("ignore-diagonal-of-a-one-unit-matrix", {"w.csv": "0.5\n"},
     ["decompose", "{d}/w.csv", "--ignore-diagonal", "-o", "{d}/out"],
     "ignoring the diagonal leaves no entry of W observed"),
    ("unobserved-transposed-shape", {"w.csv": "1,2,3\n4,5,6\n",
                                     "m.csv": "0,0\n0,0\n0,1\n"},
     ["decompose", "{d}/w.csv", "--unobserved", "{d}/m.csv", "-o", "{d}/out"],
     "{d}/m.csv: the file of unobserved entries has shape (3, 2) but the "
     "matrix file has shape (2, 3)"),
    ("unobserved-in-ws-orientation-with-transpose",
     {"w.csv": "1,2,3\n4,5,6\n", "m.csv": "0,0\n0,0\n0,1\n"},
     ["decompose", "{d}/w.csv", "--transpose", "--unobserved", "{d}/m.csv",
      "-o", "{d}/out"],
     "{d}/m.csv: the file of unobserved entries has shape (3, 2) but the "
     "matrix file has shape (2, 3) (both are read transposed)"),
    ("unobserved-npz-of-two-arrays", {"w.csv": GOOD,
                                      "m.npz": lambda: zip_of(
                                          **{"a.npy": npy(np.zeros((3, 3))),
                                             "b.npy": npy(np.zeros((3, 3)))})},
     ["decompose", "{d}/w.csv", "--unobserved", "{d}/m.npz", "-o", "{d}/out"],
     "{d}/m.npz: holds 2 arrays (a, b); a file of unobserved entries holds "
     "one"),
    ("ignore-diagonal-of-a-rectangular-matrix", {"w.csv": "1,2,3\n4,5,6\n"},
     ["decompose", "{d}/w.csv", "--ignore-diagonal", "-o", "{d}/out"],
     "{d}/w.csv: --ignore-diagonal needs a square matrix, got 2x3"),
    ("unobserved-negative-zero-and-half", {"w.csv": GOOD,
                                           "m.csv": "0,0,0\n0,0.5,0\n0,0,0\n"},
     ["decompose", "{d}/w.csv", "--unobserved", "{d}/m.csv", "-o", "{d}/out"],
     "{d}/m.csv: the file of unobserved entries must hold only 0 (observed) "
     "and 1 (unobserved)"),
    ("the-old-mask-option", {"w.csv": GOOD, "m.csv": "0,0,0\n0,0,0\n0,0,1\n"},
     ["decompose", "{d}/w.csv", "--mask", "{d}/m.csv", "-o", "{d}/out"],
     "unrecognized arguments: --mask {d}/m.csv (see 'eidecomp decompose "
     "--help')"),
]


@pytest.fixture(scope="module")
def bundle(tmp_path_factory):
    """A valid circuit bundle to break (10 units at 4:1)."""
    from eidecomp.datasets import make_planted_circuit

    d = tmp_path_factory.mktemp("bundle")
    W, _, _ = make_planted_circuit(20, n_untuned=1, n_tuned=4, pool=3, seed=0)
    # scaled to max Re eig 0.5 (numpy): stable, as the script exports require
    np.save(d / "w.npy", 0.5 * W / np.linalg.eigvals(W).real.max())
    assert main(["run", str(d / "w.npy"), "-o", str(d / "c"), "-q"]) == 0
    return d / "c"


def _edit_manifest(path, edit, restamp=True):
    """Edit a manifest; ``restamp`` gives it a matching provenance stamp
    again (eidecomp.io.provenance), as a writer that knows the format
    would, so the checks past the stamp are the ones tried."""
    doc = json.loads(path.read_text())
    edit(doc)
    path.write_text(json.dumps(stamp_doc(doc) if restamp else doc))


def _drop(doc, dotted):
    *parents, key = dotted.split(".")
    for k in parents:
        doc = doc[int(k)] if isinstance(doc, list) else doc[k]
    del doc[key]


PLANTS = {  # bytes planted into a bundle, their checksum put into circuit.json
    "garbage": lambda: b"not an array at all",
    "short": lambda: npy(np.zeros(3)),
    "nan": lambda: npy(np.full(20, np.nan)),
    "wide": lambda: npy(np.zeros((20, 3))),
}


def _edit_bundle(c, mode):
    """The hand edits of a circuit bundle; True when ``mode`` is one (or
    several joined by ';', made in turn)."""
    if ";" in mode:
        return all([_edit_bundle(c, m) for m in mode.split(";")])
    doc = c / "circuit.json"
    if mode == "ok":
        return True
    kind, _, arg = mode.partition(":")
    if kind == "drop":
        _edit_manifest(doc, lambda m: _drop(m, arg))
    elif kind == "set":  # set:section.key=JSON
        key, value = arg.split("=", 1)
        path, value = key.split("."), json.loads(value)

        def put(m):
            for k in path[:-1]:
                m = m[k]
            m[path[-1]] = value
        _edit_manifest(doc, put)
    elif kind == "raw-set":   # an edit by hand, the stamp left as it was
        key, value = arg.split("=", 1)
        path, value = key.split("."), json.loads(value)

        def put_raw(m):
            for k in path[:-1]:
                m = m[k]
            m[path[-1]] = value
        _edit_manifest(doc, put_raw, restamp=False)
    elif mode == "unstamp":
        _edit_manifest(doc, lambda m: m.pop("eidecomp_provenance"),
                       restamp=False)
    elif mode == "zero-stamp":
        _edit_manifest(doc, lambda m: m["eidecomp_provenance"].__setitem__(
            "sha256", "0" * 64), restamp=False)
    elif mode == "stamp-note":   # a member added inside the stamp itself
        _edit_manifest(doc, lambda m: m["eidecomp_provenance"].__setitem__(
            "note", "mine"), restamp=False)
    elif mode == "dup-key":     # the format named twice, the second a lie
        text = doc.read_text()
        doc.write_text(text.replace("{", '{"format": "x", ', 1))
    elif kind == "sum":
        _edit_manifest(doc, lambda m: m["sha256"].__setitem__(arg, "0" * 64))
    elif kind == "plant" and arg.endswith(":huge"):
        # a block whose header claims 10^5 x 10^5 float64 (80 GB): a sparse
        # hole after the header (POSIX ftruncate), refused before it is read
        # or hashed
        head = npy_head((10**5, 10**5))
        with open(c / arg.split(":")[0], "wb") as fh:
            fh.write(head)
            fh.truncate(len(head) + 8 * 10**10)
    elif kind == "plant":
        name, what = arg.split(":")
        data = PLANTS[what]()
        (c / name).write_bytes(data)
        _edit_manifest(doc, lambda m: m["sha256"].__setitem__(
            name, hashlib.sha256(data).hexdigest()))
    elif mode == "deep":
        doc.write_text("[" * 100_000)
    elif mode == "long-id":
        _edit_manifest(doc, lambda m: m.__setitem__(
            "unit_ids", ["x" * 2_000_000] + ["u"] * 19))
    elif mode == "swap":
        low, sparse = (c / "low_rank.npy").read_bytes(), (c / "sparse.npy").read_bytes()
        (c / "low_rank.npy").write_bytes(sparse)
        (c / "sparse.npy").write_bytes(low)
    else:
        return False
    return True


def _make_decomposition(folder, mode):
    """A decomposition folder of the GOOD matrix (modes "hidden..."): with
    its (0, 1) entry left out), then one hand edit."""
    folder.parent.mkdir(parents=True, exist_ok=True)
    (folder.parent / "w_for_dec.csv").write_text(GOOD)
    hidden = []
    if mode.startswith("hidden"):
        (folder.parent / "u_for_dec.csv").write_text("0,1,0\n0,0,0\n0,0,0\n")
        hidden = ["--unobserved", str(folder.parent / "u_for_dec.csv")]
    assert main(["decompose", str(folder.parent / "w_for_dec.csv"), "-o",
                 str(folder), "-q", *hidden]) == 0
    doc = folder / "summary.json"
    if mode.startswith("hidden-set:"):   # hidden-set:key=JSON in "unobserved"
        key, value = mode[11:].split("=", 1)
        _edit_manifest(doc, lambda m: m["unobserved"].__setitem__(
            key, json.loads(value)))
    elif mode == "dup-key":     # the format named twice, the second a lie
        doc.write_text(doc.read_text().replace("{", '{"format": "x", ', 1))
    elif mode == "swap":
        low = (folder / "low_rank.npy").read_bytes()
        (folder / "low_rank.npy").write_bytes((folder / "sparse.npy").read_bytes())
        (folder / "sparse.npy").write_bytes(low)
    elif mode == "unlist":
        _edit_manifest(doc, lambda m: m["sha256"].pop("sparse.npy"))
    elif mode == "v1":
        _edit_manifest(doc, lambda m: m.__setitem__("format_version", 1))
    elif mode == "no-rank":
        _edit_manifest(doc, lambda m: m.pop("rank"))
    elif mode.startswith("set:"):      # set:key=JSON, stamped again
        key, value = mode[4:].split("=", 1)
        _edit_manifest(doc, lambda m: m.__setitem__(key, json.loads(value)))
    elif mode == "raw-lam":            # by hand: the stamp left as it was
        _edit_manifest(doc, lambda m: m.__setitem__("lam", 0.123), restamp=False)
    elif mode == "shape":
        _edit_manifest(doc, lambda m: m["input"].__setitem__("shape", [9, 9]))


def _flip(path):
    """One byte of ``path`` changed, in its middle."""
    data = bytearray(path.read_bytes())
    data[len(data) // 2] ^= 0x01
    path.write_bytes(bytes(data))


def _made_output(path, kind, bundle):
    """An export (("EXPORT", format, edit)) or a report (("REPORT", edit))
    of the test bundle written by the command at ``path``, then one edit:
    flip (a byte of the file), add / script / data / drop / manifest / link
    / unlist (an export folder's note added, script or data changed, data
    removed, manifest edited, data made a link, manifest removed), figure
    (a byte of the report's first figure)."""
    if kind[0] == "REPORT":
        argv, edit = ["report", str(bundle), "-o", str(path)], kind[1]
    else:
        argv = ["export", str(bundle), "--format", kind[1], "-o", str(path)]
        edit = kind[2]
    assert main(argv + ["-q"]) == 0
    files = sorted(path.iterdir()) if path.is_dir() else []
    by_end = {p.suffix: p for p in files}
    if edit == "flip":
        _flip(path)
    elif edit == "figure":
        _flip(sorted(path.with_name(f"{path.stem}-figures").glob("*.svg"))[0])
    elif edit == "add":
        (path / "notes.txt").write_text("mine\n")
    elif edit == "script":
        _flip(by_end[".py"])
    elif edit == "data":
        _flip(by_end[".npz"])
    elif edit == "drop":
        by_end[".npz"].unlink()
    elif edit == "manifest":
        m = path / "eidecomp-manifest.json"
        m.write_text(m.read_text().replace("eidecomp nest export", "mine"))
    elif edit == "link":
        data = by_end[".npz"]
        copy = path.parent / "elsewhere.npz"
        data.rename(copy)
        data.symlink_to(copy)
    elif edit == "unlist":
        (path / "eidecomp-manifest.json").unlink()


def _make(d, files, bundle):
    for name, content in files.items():
        if name == "MEMORY":
            continue
        if name == "DEC":
            _make_decomposition(d / "dec", content)
            continue
        if name == "BUNDLE":
            shutil.copytree(bundle, d / "c")
            doc = d / "c" / "circuit.json"
            if _edit_bundle(d / "c", content):
                continue
            if content == "json":
                doc.write_text("")
            elif content == "truncate":
                data = (d / "c" / "J_EE.npy").read_bytes()
                (d / "c" / "J_EE.npy").write_bytes(data[:len(data) // 2])
            elif content == "missing":
                (d / "c" / "J_TE.npy").unlink()
            elif content == "version":   # as a newer eidecomp writes it
                _edit_manifest(doc, lambda m: m.__setitem__("format_version",
                                                            99))
            continue
        path = d / name
        path.parent.mkdir(parents=True, exist_ok=True)
        if content == "FIFO":  # a named pipe (POSIX mkfifo): opening it blocks
            os.mkfifo(path)
            continue
        if isinstance(content, tuple) and content[0] == "HOLE":
            head = npy_head(content[1], content[2])
            size = int(np.prod(content[1])) * np.dtype(content[2]).itemsize
            with open(path, "wb") as fh:
                fh.write(head)
                fh.truncate(len(head) + size)  # a hole: no disk used
            continue
        if content == "DIR":
            path.mkdir()
            continue
        if isinstance(content, tuple) and content[0] == "COPY":
            shutil.copytree(d / content[1], path)
            continue
        if isinstance(content, tuple) and content[0] == "LINK":
            path.symlink_to(d / content[1])
            continue
        if isinstance(content, tuple) and content[0] in ("EXPORT", "REPORT"):
            _made_output(path, content, bundle)
            continue
        if callable(content):
            content = content()
        if content == "OBJECT":
            content = object_npy(d / "PWNED")
        if content == "OBJECT-NPZ":
            content = zip_of(**{"w.npy": object_npy(d / "PWNED")})
        path.write_bytes(content.encode() if isinstance(content, str) else content)


def _listing(d):
    return sorted((str(p.relative_to(d)), p.lstat().st_size,
                   p.lstat().st_mtime_ns) for p in d.rglob("*"))


def test_the_hole_rows_use_no_disk(tmp_path):
    """The sparse files of the memory rows really are holes (POSIX
    ftruncate beyond the end), so the table runs on a small disk."""
    _make(tmp_path, {"w.npy": npy_hole((20000, 20000))}, None)
    st = os.stat(tmp_path / "w.npy")
    assert st.st_size > 3 * 10**9 and st.st_blocks * 512 < 10**6


def test_the_table_has_at_least_thirty_rows():
    assert len(ROWS) >= 30 and len({r[0] for r in ROWS}) == len(ROWS)


@pytest.mark.parametrize(("files", "argv", "expected"),
                         [r[1:] for r in ROWS], ids=[r[0] for r in ROWS])
def test_malformed_input(tmp_path, capsys, monkeypatch, bundle, files, argv,
                         expected):
    d = tmp_path
    if "MEMORY" in files:  # a fixed budget in place of the machine's
        monkeypatch.setattr("eidecomp.limits.available_memory",
                            lambda: files["MEMORY"])
    _make(d, files, bundle)
    bad = [p.name for p in d.iterdir() if p.name.startswith("bad.")]
    # "{d}/bad" is the row's one bad file, whatever its ending
    argv = [f"{{d}}/{bad[0]}" if a == "{d}/bad" else a for a in argv]
    before = _listing(d)
    capsys.readouterr()
    code = main([a.replace("{d}", str(d)) for a in argv])
    out, err = capsys.readouterr()
    assert code == 2
    assert err == f"eidecomp: error: {expected.replace('{d}', str(d))}\n"
    assert "Traceback" not in out + err
    assert _listing(d) == before  # nothing written, nothing left behind
    assert not (d / "PWNED").exists()  # nothing was unpickled


# --- unreadable files that a file table cannot make --------------------------
# Tests run as root, where chmod 000 does not stop a read: EACCES and EIO are
# made by replacing ``open`` (builtins.open and io.open, which numpy, zipfile
# and scipy.io call) for the one path, as the kernel would fail it (POSIX
# open(2) EACCES, read(2) EIO).

class _FailingRead:
    """A file whose every read fails with EIO."""

    def __init__(self, fh):
        self._fh = fh

    def __getattr__(self, name):
        return getattr(self._fh, name)

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self._fh.close()

    def read(self, *args):
        raise OSError(errno.EIO, os.strerror(errno.EIO))

    readinto = readline = read


def _failing_open(monkeypatch, target, how):
    real = builtins.open

    def fake(file, mode="r", *args, **kwargs):
        if isinstance(file, (str, os.PathLike)) and os.fspath(file) == str(target):
            if how == "EACCES":
                raise PermissionError(errno.EACCES, os.strerror(errno.EACCES),
                                      str(file))
            return _FailingRead(real(file, mode, *args, **kwargs))
        return real(file, mode, *args, **kwargs)

    monkeypatch.setattr(builtins, "open", fake)
    monkeypatch.setattr(io, "open", fake)


W3 = np.array([[0.0, -0.2, 0.1], [0.3, 0.0, -0.1], [-0.2, 0.1, 0.0]])


def _write_inputs(d):
    np.save(d / "w.npy", W3)
    np.savez(d / "w.npz", w=W3)
    scipy.io.savemat(d / "w.mat", {"w": W3})
    (d / "w.csv").write_text(GOOD)
    np.save(d / "m.npy", np.zeros((3, 3)))
    (d / "u.csv").write_text(FEATURES)
    np.save(d / "k.npy", np.zeros((2, 2, 3, 3)))


UNREADABLE = [  # (target file, argv)
    ("w.npy", ["decompose", "{d}/w.npy", "-o", "{d}/out"]),
    ("w.npz", ["decompose", "{d}/w.npz", "-o", "{d}/out"]),
    ("w.mat", ["decompose", "{d}/w.mat", "-o", "{d}/out"]),
    ("w.csv", ["decompose", "{d}/w.csv", "-o", "{d}/out"]),
    ("m.npy", ["decompose", "{d}/w.npy", "--unobserved", "{d}/m.npy", "-o", "{d}/out"]),
    ("u.csv", ["run", "{d}/w.npy", "--units", "{d}/u.csv", "--ei-ratio", "1",
               "-o", "{d}/out"]),
    ("k.npy", ["decompose", "--kernel", "{d}/k.npy", "--grid", "8x8", "-o",
               "{d}/out"]),
]


@pytest.mark.parametrize("how", ["EACCES", "EIO"])
@pytest.mark.parametrize(("target", "argv"), UNREADABLE,
                         ids=[t for t, _ in UNREADABLE])
def test_unreadable_input_is_one_line(tmp_path, capsys, monkeypatch, target,
                                      argv, how):
    d = tmp_path
    _write_inputs(d)
    before = _listing(d)
    _failing_open(monkeypatch, d / target, how)
    capsys.readouterr()
    code = main([a.replace("{d}", str(d)) for a in argv])
    out, err = capsys.readouterr()
    reason = "Permission denied" if how == "EACCES" else "Input/output error"
    assert code == 2
    assert err == f"eidecomp: error: {d / target}: cannot read ({reason})\n"
    assert "Traceback" not in out + err
    monkeypatch.undo()
    assert _listing(d) == before


# --- read_npy: the lead's reader of eidecomp's own bundle arrays --------------

def _one_line(exc_info):
    msg = str(exc_info.value)
    assert "\n" not in msg and "Traceback" not in msg
    return msg


READ_NPY = [  # (id, file bytes or "FIFO", keywords, expected after "{p}: ")
    ("corrupt-features", b"\x93NUMPY\x01\x00\x76\x00{'descr': '<f8', garbage",
     {"what": "features"},
     "corrupt .npy header (EOF: reading array header, expected 118 bytes got "
     "24)"),
    ("not-npy", b"0.5\n1.5\n", {"what": "features"},
     "not a .npy file (no NumPy header)"),
    ("empty", b"", {"what": "features"}, "not a .npy file (no NumPy header)"),
    ("truncated", npy(np.arange(8.0))[:-16], {"what": "positions"},
     "truncated .npy file: its header promises 64 bytes for shape (8,), 48 "
     "follow"),
    ("pickled", "OBJECT", {"what": "block"},
     "holds Python objects; refused (eidecomp never unpickles)"),
    ("complex", npy(np.ones(3, complex)), {"what": "features"},
     "features holds complex values; real numbers are needed"),
    ("text", npy(np.array(["a", "b"])), {"what": "features"},
     "features holds text values; real numbers are needed"),
    ("datetime", npy(np.array(["2020-01-01"], "M8[D]")), {"what": "features"},
     "features holds date values; real numbers are needed"),
    ("wrong-ndim", npy(np.zeros((2, 2))), {"what": "positions", "ndim": 1},
     "positions must be 1-D, got 2-D shape (2, 2)"),
    ("beyond-max-bytes", npy(np.zeros((64, 64))), {"what": "block",
                                                   "max_bytes": 1000},
     "block of shape (64, 64) (float64) needs about 0.0 GiB, more than the "
     "0.0 GiB this process may use"),
    ("fifo", "FIFO", {"what": "features"},
     "cannot read (a named pipe, not a regular file)"),
]


@pytest.mark.parametrize(("content", "kw", "expected"), [r[1:] for r in READ_NPY],
                         ids=[r[0] for r in READ_NPY])
def test_read_npy_refuses_in_one_line(tmp_path, content, kw, expected):
    """Broken by the NPY format (NEP 1, numpy's np.save writes the good ones)."""
    from eidecomp.io import read_npy

    p = tmp_path / "features.npy"
    _make(tmp_path, {"features.npy": content}, None)
    with pytest.raises(InputError) as exc:
        read_npy(p, **kw)
    assert _one_line(exc) == f"{p}: {expected}"
    assert not (tmp_path / "PWNED").exists()


def test_read_npy_missing_and_unreadable(tmp_path, monkeypatch):
    from eidecomp.io import read_npy

    with pytest.raises(InputError) as exc:
        read_npy(tmp_path / "none.npy")
    assert _one_line(exc) == f"{tmp_path / 'none.npy'}: no such file"
    np.save(tmp_path / "f.npy", np.arange(3.0))
    _failing_open(monkeypatch, tmp_path / "f.npy", "EACCES")  # as root: see above
    with pytest.raises(InputError) as exc:
        read_npy(tmp_path / "f.npy")
    assert _one_line(exc) == f"{tmp_path / 'f.npy'}: cannot read (Permission denied)"


# --- load_json and require: circuit.json and summary.json --------------------

JSON_ROWS = [  # (id, file bytes, keywords, expected after "{p}: ")
    ("corrupt", b'{"rank": 3,\n "lam": }', {},
     "corrupt JSON (Expecting value: line 2 column 9 (char 20))"),
    ("empty", b"", {}, "corrupt JSON (Expecting value: line 1 column 1 (char 0))"),
    ("not-utf8", b'{"id": "\xff"}', {}, "not UTF-8 text (byte 8)"),
    ("utf16", '{"a": 1}'.encode("utf-16"), {}, "not UTF-8 text (byte 0)"),
    ("too-large", b"[" + b"0," * 600 + b"0]", {"max_bytes": 1000},
     "JSON file is 1203 bytes, more than the limit of 1000"),
    ("deep-100000", b"[" * 100000 + b"]" * 100000, {},
     "JSON nested deeper than 64 levels"),
    ("deep-unclosed", b'{"a": ' * 65, {"what": "summary"},
     "JSON nested deeper than 64 levels"),
    ("deep-just-over", b"[" * 9 + b"]" * 9, {"max_depth": 8},
     "JSON nested deeper than 8 levels"),
    ("long-string", json.dumps({"unit_ids": ["a", "b" * 2000]}).encode(),
     {"max_str": 1000},
     "unit_ids[1] is a string of 2000 characters (limit 1000)"),
    ("long-key", json.dumps({"parameters": {"k" * 2000: 1}}).encode(),
     {"max_str": 1000},
     "a key in parameters is a string of 2000 characters (limit 1000)"),
    ("huge-integer", b'{"rank": ' + b"9" * 5000 + b"}", {},
     "corrupt JSON (an integer of more than 4300 digits)"),
    ("fifo", "FIFO", {}, "cannot read (a named pipe, not a regular file)"),
]


@pytest.mark.parametrize(("content", "kw", "expected"), [r[1:] for r in JSON_ROWS],
                         ids=[r[0] for r in JSON_ROWS])
def test_load_json_refuses_in_one_line(tmp_path, content, kw, expected):
    """Broken by RFC 8259 as Python's json module reads it (its messages,
    with line and column, are quoted); depth found without recursion."""
    from eidecomp.io.jsondoc import load_json

    p = tmp_path / "circuit.json"
    _make(tmp_path, {"circuit.json": content}, None)
    with pytest.raises(InputError) as exc:
        load_json(p, **kw)
    assert _one_line(exc) == f"{p}: {expected}"


def test_load_json_missing_folder_and_unreadable(tmp_path, monkeypatch):
    from eidecomp.io.jsondoc import load_json

    with pytest.raises(InputError) as exc:
        load_json(tmp_path / "none.json")
    assert _one_line(exc) == f"{tmp_path / 'none.json'}: no such file"
    with pytest.raises(InputError) as exc:
        load_json(tmp_path, what="circuit file")
    assert _one_line(exc) == f"{tmp_path}: is a folder, expected a circuit file file"
    (tmp_path / "s.json").write_text("{}")
    _failing_open(monkeypatch, tmp_path / "s.json", "EIO")  # a failing disk
    with pytest.raises(InputError) as exc:
        load_json(tmp_path / "s.json")
    assert _one_line(exc) == f"{tmp_path / 's.json'}: cannot read (Input/output error)"


@pytest.mark.parametrize(("doc", "key", "kinds", "expected"), [
    ({}, "rank", int, "summary.json: missing key 'rank'"),
    ({"rank": 2.5}, "rank", int, "summary.json: key 'rank' must be an integer "
     "(got a number)"),
    ({"rank": True}, "rank", int, "summary.json: key 'rank' must be an integer "
     "(got true or false)"),
    ({"lam": "0.1"}, "lam", float, "summary.json: key 'lam' must be a number "
     "(got a string)"),
    ({"ids": {}}, "ids", (list, type(None)), "summary.json: key 'ids' must be "
     "an array or null (got an object)"),
    ([1, 2], "rank", int, "summary.json: must be a JSON object (got an array)"),
])
def test_require_refuses_in_one_line(doc, key, kinds, expected):
    """JSON's types (RFC 8259, section 3) as Python's json module maps them."""
    from eidecomp.io.jsondoc import require

    with pytest.raises(InputError) as exc:
        require(doc, key, kinds, "summary.json")
    assert _one_line(exc) == expected
