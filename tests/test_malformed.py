"""One table of malformed inputs, each with the exact line eidecomp must print.

Every row runs the command line (``main``) in a fresh folder and checks the
contract of the README: exit status 2, exactly one line on stderr that names
the problem and the file, no traceback, and nothing written (the folder's
listing is unchanged, no partial file left behind).

References: the broken files are made with the writers whose formats they
break (numpy's ``np.save``/``np.savez`` and the NPY format specification,
NEP 1, for headers; Python's ``pickle`` for the object array; Python's
``codecs`` for the UTF-16 byte-order mark): each file is broken by the
rules of its format, not by eidecomp's.
"""

import io
import json
import shutil

import numpy as np
import pytest

from eidecomp.cli import main


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


GOOD = "0,-0.2,0.1\n0.3,0,-0.1\n-0.2,0.1,0\n"
FEATURES = "feature\n0\n60\n120\n"

# (id, {file name: content}, argv, expected line); "{d}" is the folder.
# The W of the unit-table and E:I rows is the 3 x 3 GOOD matrix.
DEC = ["decompose", "{d}/bad", "-o", "{d}/out"]
RUN = ["run", "{d}/w.csv", "-o", "{d}/out", "--ei-ratio", "1"]
UNITS = RUN + ["--units", "{d}/u.csv"]
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
    ("non-square", {"bad.csv": b"0,1,2\n3,4,5\n"}, DEC,
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
    ("mask-wrong-shape", {"w.csv": GOOD, "m.csv": b"0,1\n1,0\n"},
     ["decompose", "{d}/w.csv", "--mask", "{d}/m.csv", "-o", "{d}/out"],
     "{d}/m.csv: mask has shape (2, 2) but the matrix has shape (3, 3)"),
    ("mask-not-binary", {"w.csv": GOOD, "m.csv": b"0,1,0\n1,0,2\n0,0,0\n"},
     ["decompose", "{d}/w.csv", "--mask", "{d}/m.csv", "-o", "{d}/out"],
     "{d}/m.csv: mask must hold only 0 (observed) and 1 (unobserved)"),
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
     "{d}/u.csv: unit table has no 'feature' column (columns: id, x)"),
    ("units-text-position", {"w.csv": GOOD, "u.csv": b"feature,x\n0,1\n60,far\n120,3\n"},
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
     "{d}/c/J_EE.npy: checksum does not match circuit.json (the file was "
     "changed or truncated)"),
    ("bundle-missing-block", {"BUNDLE": "missing"},
     ["export", "{d}/c", "--format", "graphml", "-o", "{d}/out"],
     "{d}/c/J_TE.npy: missing from the bundle"),
    ("bundle-newer-version", {"BUNDLE": "version"},
     ["export", "{d}/c", "--format", "graphml", "-o", "{d}/out"],
     "{d}/c/circuit.json: format version 99 is newer than this eidecomp "
     "reads (1); upgrade"),
    ("bundle-not-a-bundle", {"c/readme.txt": b"hello"},
     ["export", "{d}/c", "--format", "graphml", "-o", "{d}/out"],
     "{d}/c: no circuit.json; not a circuit bundle"),
    ("unknown-option", {"w.csv": GOOD},
     ["decompose", "{d}/w.csv", "-o", "{d}/out", "--bogus"],
     "unrecognized arguments: --bogus (see 'eidecomp --help')"),
    ("negative-tol", {"w.csv": GOOD},
     ["decompose", "{d}/w.csv", "-o", "{d}/out", "--tol", "-1"],
     "argument --tol: must be a positive number: '-1' "
     "(see 'eidecomp decompose --help')"),
    ("text-seed", {"w.csv": GOOD},
     ["decompose", "{d}/w.csv", "-o", "{d}/out", "--seed", "abc"],
     "argument --seed: not a whole number: 'abc' "
     "(see 'eidecomp decompose --help')"),
]


@pytest.fixture(scope="module")
def bundle(tmp_path_factory):
    """A valid circuit bundle to break (10 units at 4:1)."""
    from eidecomp.datasets import make_planted_circuit

    d = tmp_path_factory.mktemp("bundle")
    W, _, _ = make_planted_circuit(20, n_untuned=1, n_tuned=4, pool=3, seed=0)
    np.save(d / "w.npy", W)
    assert main(["run", str(d / "w.npy"), "-o", str(d / "c"), "-q"]) == 0
    return d / "c"


def _make(d, files, bundle):
    for name, content in files.items():
        if name == "BUNDLE":
            shutil.copytree(bundle, d / "c")
            doc = d / "c" / "circuit.json"
            if content == "json":
                doc.write_text("")
            elif content == "truncate":
                data = (d / "c" / "J_EE.npy").read_bytes()
                (d / "c" / "J_EE.npy").write_bytes(data[:len(data) // 2])
            elif content == "missing":
                (d / "c" / "J_TE.npy").unlink()
            elif content == "version":
                meta = json.loads(doc.read_text())
                meta["format_version"] = 99
                doc.write_text(json.dumps(meta))
            continue
        path = d / name
        path.parent.mkdir(parents=True, exist_ok=True)
        if content == "OBJECT":
            content = object_npy(d / "PWNED")
        path.write_bytes(content.encode() if isinstance(content, str) else content)


def _listing(d):
    return sorted((str(p.relative_to(d)), p.stat().st_size, p.stat().st_mtime_ns)
                  for p in d.rglob("*"))


def test_the_table_has_at_least_thirty_rows():
    assert len(ROWS) >= 30 and len({r[0] for r in ROWS}) == len(ROWS)


@pytest.mark.parametrize(("files", "argv", "expected"),
                         [r[1:] for r in ROWS], ids=[r[0] for r in ROWS])
def test_malformed_input(tmp_path, capsys, bundle, files, argv, expected):
    d = tmp_path
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
