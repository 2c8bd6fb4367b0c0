"""Readers: every format gives the same W[post, pre]; bad files, one clear error.

Reference: numpy's own writers (np.save, np.savez, np.savetxt) and scipy.io.savemat
make the files read back here.
"""

import numpy as np
import pytest
import scipy.io

from eidecomp.errors import InputError
from eidecomp.io import read_matrix, read_unobserved, write_folder

W = np.array([[0.0, 1.5, -2.0], [0.25, 0.0, 3.0], [-1.0, 1e-12, 0.0]])


def test_npy_npz_mat_text_agree(tmp_path):
    np.save(tmp_path / "w.npy", W)
    np.savez(tmp_path / "one.npz", W)
    np.savez(tmp_path / "many.npz", lateral=W, other=np.ones(2))
    scipy.io.savemat(tmp_path / "w.mat", {"lateral": W})
    np.savetxt(tmp_path / "w.csv", W, delimiter=",", fmt="%.17g")
    np.savetxt(tmp_path / "w.tsv", W, delimiter="\t", fmt="%.17g")
    np.savetxt(tmp_path / "w.txt", W, fmt="%.17g")
    for name, key in [("w.npy", None), ("one.npz", None), ("many.npz", "lateral"),
                      ("w.mat", None), ("w.csv", None), ("w.tsv", None),
                      ("w.txt", None)]:
        assert np.array_equal(read_matrix(tmp_path / name, key=key), W), name


def test_csv_header_and_index_column(tmp_path):
    p = tmp_path / "w.csv"
    names = ["a", "b", "c"]
    rows = ["post\\pre," + ",".join(names)]
    rows += [f"{n}," + ",".join(repr(float(v)) for v in row)
             for n, row in zip(names, W, strict=True)]
    p.write_text("\ufeff" + "\n".join(rows) + "\n")  # with a byte-order mark
    assert np.array_equal(read_matrix(p), W)


def test_transpose(tmp_path):
    np.save(tmp_path / "w.npy", W.T)
    assert np.array_equal(read_matrix(tmp_path / "w.npy", transpose=True), W)


@pytest.mark.parametrize(("content", "message"), [
    ("", "file is empty"),
    ("1,2\n3,x\n", r"non-numeric cell 'x' at row 2, column 2"),
    ("1,2\n3\n", "row 2 has 1 cells, expected 2"),
    ("1,2\n3,nan\n", r"non-finite value\(s\) \(NaN, Inf or beyond float64.s "
                     r"range\), first at row 2, column 2"),
    ("1,2,3\n4,5,6\n", r"must be square .* shape \(2, 3\)"),
    ("1,2\n,4\n", "empty cell at row 2, column 1"),
    ("a,b\n", "a header row but no numbers"),
    ("1,2\n3,inf\n", "non-finite"),
])
def test_text_errors(tmp_path, content, message):
    p = tmp_path / "w.csv"
    p.write_text(content)
    with pytest.raises(InputError, match=message):
        read_matrix(p)


def test_binary_errors(tmp_path):
    with pytest.raises(InputError, match="no such file"):
        read_matrix(tmp_path / "missing.npy")
    np.save(tmp_path / "obj.npy", np.array([{"a": 1}], dtype=object),
            allow_pickle=True)
    with pytest.raises(InputError, match="refused"):
        read_matrix(tmp_path / "obj.npy")
    np.savez(tmp_path / "two.npz", a=W, b=W)
    with pytest.raises(InputError, match="holds 2 arrays"):
        read_matrix(tmp_path / "two.npz")
    with pytest.raises(InputError, match="no array named 'c'"):
        read_matrix(tmp_path / "two.npz", key="c")
    np.save(tmp_path / "v.npy", np.ones(3))
    with pytest.raises(InputError, match="must be 2-D, got 1-D"):
        read_matrix(tmp_path / "v.npy")
    np.save(tmp_path / "c.npy", np.ones((2, 2), complex))
    with pytest.raises(InputError, match="complex"):
        read_matrix(tmp_path / "c.npy")
    (tmp_path / "w.xlsx").write_bytes(b"x")
    with pytest.raises(InputError, match="unknown file type"):
        read_matrix(tmp_path / "w.xlsx")
    (tmp_path / "bad.npy").write_bytes(b"not numpy at all")
    with pytest.raises(InputError, match="not a .npy file"):
        read_matrix(tmp_path / "bad.npy")


def test_unobserved_entries_file(tmp_path):
    M = np.eye(3)
    np.save(tmp_path / "m.npy", M)
    assert np.array_equal(read_unobserved(tmp_path / "m.npy", (3, 3)), M == 0)
    with pytest.raises(InputError, match=r"unobserved entries has shape \(3, 3\)"):
        read_unobserved(tmp_path / "m.npy", (4, 4))
    np.save(tmp_path / "m2.npy", 2 * M)
    with pytest.raises(InputError, match="only 0"):
        read_unobserved(tmp_path / "m2.npy", (3, 3))


def test_write_folder_is_atomic_and_refuses_overwrite(tmp_path):
    out = tmp_path / "out"
    write_folder(out, {"a.npy": W, "s.json": {"x": 1}})
    assert sorted(p.name for p in out.iterdir()) == ["a.npy", "s.json"]
    with pytest.raises(InputError, match="already exists"):
        write_folder(out, {"a.npy": W})

    class Boom:
        def __bytes__(self):
            raise OSError("disk full")

    # --force alone never replaces a folder it cannot tell is replaceable
    with pytest.raises(InputError, match="not known to be an eidecomp output"):
        write_folder(out, {"a.npy": 2 * W}, force=True)
    with pytest.raises(OSError, match="disk full"):
        write_folder(out, {"a.npy": 2 * W, "b": Boom()}, force=True,
                     replaceable=lambda folder: None)
    assert np.array_equal(np.load(out / "a.npy"), W)  # left as it was
    assert [p.name for p in tmp_path.iterdir()] == ["out"]  # no temporary left


# --- sparse matrices, unit names, JSON and read_npy -------------------------
# References: scipy.sparse (save_npz, and toarray() for the dense matrix),
# scipy.io.savemat (MATLAB sparse), Python's csv writer, Python's json module.

def _sparse(fmt):
    import scipy.sparse

    dense = np.array([[0.0, 1.5, 0.0, -2.0], [0.25, 0.0, 0.0, 3.0],
                      [0.0, 0.0, 0.0, 0.0], [-1.0, 1e-12, 0.0, 0.5]])
    return scipy.sparse.csr_matrix(dense).asformat(fmt)


@pytest.mark.parametrize("fmt", ["csr", "csc", "coo", "bsr", "dia"])
def test_sparse_npz_reads_as_scipy_densifies_it(tmp_path, fmt):
    import scipy.sparse

    M = _sparse(fmt)
    scipy.sparse.save_npz(tmp_path / "w.npz", M)
    got = read_matrix(tmp_path / "w.npz")
    assert got.dtype == np.float64
    assert np.array_equal(got, M.toarray())


def test_sparse_array_npz_with_duplicates_is_summed_as_scipy_does(tmp_path):
    import scipy.sparse

    M = scipy.sparse.coo_array((np.array([1.0, 2.0, -0.5]),
                                (np.array([0, 0, 2]), np.array([1, 1, 0]))),
                               shape=(3, 3))
    scipy.sparse.save_npz(tmp_path / "w.npz", M, compressed=False)
    assert np.array_equal(read_matrix(tmp_path / "w.npz"), M.toarray())


def test_sparse_mat_reads_as_scipy_densifies_it(tmp_path):
    M = _sparse("csr")
    scipy.io.savemat(tmp_path / "w.mat", {"lateral": M, "other": np.ones((2, 2))})
    back = scipy.io.loadmat(tmp_path / "w.mat")["lateral"]  # MATLAB's csc
    got = read_matrix(tmp_path / "w.mat", key="lateral")
    assert np.array_equal(got, back.toarray())
    assert np.array_equal(got, M.toarray())


def test_rectangular_matrix_with_square_false(tmp_path):
    np.save(tmp_path / "r.npy", W[:2])
    assert read_matrix(tmp_path / "r.npy", square=False).shape == (2, 3)


def test_unit_ids_with_carriage_returns_come_back_exactly(tmp_path):
    """Written by Python's csv writer (newline='' as its docs require)."""
    import csv

    from eidecomp.io import read_units

    ids = ["a\rb", "c\r\nd", "e\tf \U0001f9e0\ue000"]
    with open(tmp_path / "u.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["id", "feature"])
        for k, name in enumerate(ids):
            w.writerow([name, 30 * k])
    got = read_units(tmp_path / "u.csv", 3)
    assert list(got["id"]) == ids
    assert np.array_equal(got["feature"], [0.0, 30.0, 60.0])


def test_deep_json_is_refused_without_recursion_error(tmp_path):
    from eidecomp.io import load_json

    p = tmp_path / "circuit.json"
    p.write_text("[" * 100000 + "]" * 100000)
    with pytest.raises(InputError, match="nested deeper than 64 levels") as exc:
        load_json(p)
    assert not isinstance(exc.value, RecursionError)
    # brackets inside strings are text, not nesting
    p.write_text('{"name": "' + "[" * 1000 + '\\"]"}')
    assert load_json(p) == {"name": "[" * 1000 + '"]'}


def test_json_with_nan_and_infinity_as_pythons_json_writes_it(tmp_path):
    import json
    import math

    from eidecomp.io import load_json

    p = tmp_path / "summary.json"
    p.write_text(json.dumps({"lam": float("nan"), "bound": float("inf"),
                             "low": -float("inf"), "rank": 3}))
    doc = load_json(p)
    assert math.isnan(doc["lam"]) and doc["bound"] == math.inf
    assert doc["low"] == -math.inf and doc["rank"] == 3


def test_read_npy_gives_float64(tmp_path):
    """np.save's files in several real dtypes read back as float64."""
    from eidecomp.io import read_npy

    for dt in ("<i4", "|u1", "|b1", ">f8", "<f4"):
        a = np.arange(6).reshape(2, 3).astype(dt)
        np.save(tmp_path / "a.npy", a)
        got = read_npy(tmp_path / "a.npy", ndim=2)
        assert got.dtype == np.float64 and np.array_equal(got, a.astype(float))


def test_unit_ids_are_kept_exactly_as_written(tmp_path):
    """Ids are data: leading and trailing white space, a tab or a CR inside
    a quoted cell come back as Python's csv writer wrote them (reference:
    the csv module's round trip), never stripped."""
    import csv

    from eidecomp.io import read_units

    ids = ["\tx", "t ", " l", "\rcr", "\xa0n", "plain"]
    with open(tmp_path / "u.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["id", "feature"])
        w.writerows([name, 10 * k] for k, name in enumerate(ids))
    assert list(read_units(tmp_path / "u.csv", len(ids))["id"]) == ids
