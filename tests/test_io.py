"""Readers: every format gives the same W[post, pre]; bad files, one clear error.

Reference: numpy's own writers (np.save, np.savez, np.savetxt) and scipy.io.savemat
make the files read back here.
"""

import numpy as np
import pytest
import scipy.io

from eidecomp.errors import InputError
from eidecomp.io import read_mask, read_matrix, write_folder

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
    ("1,2\n3,nan\n", r"non-finite value\(s\) \(NaN, Inf or beyond float64.s range\), first at row 2, "
                     "column 2"),
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


def test_mask(tmp_path):
    M = np.eye(3)
    np.save(tmp_path / "m.npy", M)
    assert np.array_equal(read_mask(tmp_path / "m.npy", (3, 3)), M == 0)
    with pytest.raises(InputError, match=r"mask has shape \(3, 3\)"):
        read_mask(tmp_path / "m.npy", (4, 4))
    np.save(tmp_path / "m2.npy", 2 * M)
    with pytest.raises(InputError, match="only 0"):
        read_mask(tmp_path / "m2.npy", (3, 3))


def test_write_folder_is_atomic_and_refuses_overwrite(tmp_path):
    out = tmp_path / "out"
    write_folder(out, {"a.npy": W, "s.json": {"x": 1}})
    assert sorted(p.name for p in out.iterdir()) == ["a.npy", "s.json"]
    with pytest.raises(InputError, match="already exists"):
        write_folder(out, {"a.npy": W})

    class Boom:
        def __bytes__(self):
            raise OSError("disk full")

    with pytest.raises(OSError, match="disk full"):
        write_folder(out, {"a.npy": 2 * W, "b": Boom()}, force=True)
    assert np.array_equal(np.load(out / "a.npy"), W)  # left as it was
    assert [p.name for p in tmp_path.iterdir()] == ["out"]  # no temporary left
