"""The assemble and run commands and the circuit bundle.

Reference: the library call eidecomp.assemble on the same matrix (itself
checked in test_assemble.py against scipy's nnls and planted truth), and
hashlib's SHA-256 for the bundle checksums.
"""

import hashlib
import json

import numpy as np
import pytest

from eidecomp import assemble, robust_pca
from eidecomp.cli import main
from eidecomp.datasets import make_planted_circuit
from eidecomp.io import read_circuit


@pytest.fixture(scope="module")
def planted(tmp_path_factory):
    d = tmp_path_factory.mktemp("planted")
    W, truth, features = make_planted_circuit(80, n_untuned=3, n_tuned=17,
                                              pool=4, seed=6)
    np.save(d / "w.npy", W)
    with open(d / "units.csv", "w") as fh:
        fh.write("id,feature,x,y\n")
        for i, f in enumerate(features):
            fh.write(f"u{i},{f},{10.0 * i},0\n")
    return d, W


def test_run_writes_a_bundle_equal_to_the_library(planted, tmp_path, capsys):
    d, W = planted
    out = tmp_path / "c"
    assert main(["run", str(d / "w.npy"), "-o", str(out),
                 "--units", str(d / "units.csv")]) == 0
    table = capsys.readouterr().out
    assert "this circuit" in table and "global@error" in table
    circuit, meta = read_circuit(out)
    ref = assemble(robust_pca(W), ei_ratio=4)
    for b in ("J_EE", "J_EU", "J_UE", "J_ET", "J_TE"):
        np.testing.assert_array_equal(getattr(circuit, b), getattr(ref, b))
    assert meta["counts"] == {"excitatory": 80, "untuned": 3, "tuned": 17}
    assert meta["sha256"]["J_EE.npy"] == hashlib.sha256(
        (out / "J_EE.npy").read_bytes()).hexdigest()
    cvs = [p["circular_variance"] for p in meta["interneurons"]]
    assert all(cv is not None and 0 <= cv <= 1 for cv in cvs)
    assert "not a measurement" in meta["hypothesis"]


def test_assemble_from_a_decomposition_folder(planted, tmp_path):
    d, W = planted
    assert main(["decompose", str(d / "w.npy"), "-o", str(tmp_path / "dec"),
                 "-q"]) == 0
    assert main(["assemble", str(tmp_path / "dec"), "-o", str(tmp_path / "c"),
                 "-q", "--ei-ratio", "5:1"]) == 0
    circuit, _ = read_circuit(tmp_path / "c")
    assert circuit.n_inhibitory == 16


@pytest.mark.parametrize("args,message", [
    (["--ei-ratio", "0"], "must be positive"),
    (["--ei-ratio", "-1"], "must be positive"),
    (["--ei-ratio", "abc"], "not a ratio"),
    (["--ei-ratio", "500:1"], "leaves no interneuron"),
    (["--untuned-share", "1.5"], "outside [0, 1]"),
    (["--alpha", "-2"], "must be 0 or more"),
    (["--bogus"], "unrecognized arguments"),
])
def test_bad_options_exit_2_and_write_nothing(planted, tmp_path, capsys, args,
                                              message):
    d, _ = planted
    out = tmp_path / "c"
    assert main(["run", str(d / "w.npy"), "-o", str(out), "-q", *args]) == 2
    err = capsys.readouterr().err.strip()
    assert message in err and "\n" not in err and "Traceback" not in err
    assert not out.exists()


def test_bad_unit_table(planted, tmp_path, capsys):
    d, _ = planted
    bad = tmp_path / "u.csv"
    bad.write_text("id,feature\na,10\na,20\n")
    assert main(["run", str(d / "w.npy"), "-o", str(tmp_path / "c"), "-q",
                 "--units", str(bad)]) == 2
    assert "2 rows, W has 80 units" in capsys.readouterr().err


def test_bundle_checks(planted, tmp_path, capsys):
    d, _ = planted
    out = tmp_path / "c"
    assert main(["run", str(d / "w.npy"), "-o", str(out), "-q"]) == 0
    # a changed block fails its checksum
    J = np.load(out / "J_EE.npy")
    J[0, 0] += 1.0
    np.save(out / "J_EE.npy", J)
    with pytest.raises(ValueError, match="checksum"):
        read_circuit(out)
    # a newer format version is refused with a clear message
    doc = json.loads((out / "circuit.json").read_text())
    doc["format_version"] = 99
    (out / "circuit.json").write_text(json.dumps(doc))
    with pytest.raises(ValueError, match="newer"):
        read_circuit(out)
    # and nothing overwrites a bundle without --force
    assert main(["run", str(d / "w.npy"), "-o", str(out), "-q"]) == 2
    assert "already exists" in capsys.readouterr().err


def test_run_takes_the_split_options_of_decompose(tmp_path):
    # one option table: --target-rank, --method and --solver mean in run
    # what they mean in decompose (the planted rank-2 low-rank part is found)
    W, _, _ = make_planted_circuit(60, n_untuned=2, n_tuned=10, pool=4, seed=1)
    np.save(tmp_path / "w.npy", W)
    assert main(["run", str(tmp_path / "w.npy"), "-o", str(tmp_path / "c"),
                 "-q", "--target-rank", "2"]) == 0
    doc = json.loads((tmp_path / "c" / "circuit.json").read_text())
    assert doc["decomposition"]["rank"] == 2
    assert main(["run", str(tmp_path / "w.npy"), "-o", str(tmp_path / "d"),
                 "-q", "--solver", "SCS"]) == 2          # needs --method convex
    assert not (tmp_path / "d").exists()
