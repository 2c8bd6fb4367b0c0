"""Property-based tests (hypothesis) over the readers and the pipeline.

References:
- the readers: the contract of the README (exit 0, or exit 2 with one line
  naming the file; never a traceback) on files made by numpy's own writer
  (``np.save``) and by random bytes;
- Dale's law and the counts: the definition (every column of the signed
  matrix of the circuit has one sign, the presynaptic population's) and
  n_I = round(N / ratio) (common practice for an E:I ratio);
- scaling: principal component pursuit, min ||L||_* + lam ||S||_1 subject to
  L + S = W (Candes et al. 2011, eq. 1.1), is positively homogeneous: with
  lam fixed (the default 1/sqrt(n) does not depend on W), the solution for
  c W is c times the solution for W. The circuit's J_EE scales by c, and
  its inhibitory paths J_EI J_IE by c (a product of two blocks: each block
  takes sqrt(c)).

The bounded profile in conftest.py (``ci``, derandomized, no deadline) runs
the example counts given below: 2,420 cases in all.
"""

import contextlib
import io
import tempfile
import warnings
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from eidecomp import robust_pca
from eidecomp.assemble import assemble
from eidecomp.cli import main
from eidecomp.errors import ConvergenceWarning, InputError

SUFFIXES = [".npy", ".npz", ".csv", ".tsv", ".txt", ".mat"]
QUIET = settings(deadline=None, suppress_health_check=[HealthCheck.too_slow])
COUNTS = {}  # test name -> max_examples, summed by test_case_budget


def budget(n):
    def mark(f):
        COUNTS[f.__name__] = n
        return settings(QUIET, max_examples=n)(f)
    return mark


@pytest.fixture(scope="module")
def bundle_dir(tmp_path_factory):
    """A valid circuit bundle with named units, to tamper with."""
    d = tmp_path_factory.mktemp("bundle")
    W = np.array([[0.0, -0.2, 0.1], [0.3, 0.0, -0.1], [-0.2, 0.1, 0.0]])
    np.save(d / "w.npy", W)
    (d / "u.csv").write_text("id,feature\na,0\nb,60\nc,120\n")
    assert _run(["run", str(d / "w.npy"), "--units", str(d / "u.csv"),
                 "--ei-ratio", "1", "-o", str(d / "c"), "-q"])[0] == 0
    return d / "c"


def _run(argv):
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err), \
            warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)  # reported, not raised
        code = main(argv)
    return code, out.getvalue(), err.getvalue()


def _check_contract(path, argv):
    code, out, err = _run(argv)
    assert "Traceback" not in out + err
    assert code in (0, 2), err
    if code == 2:
        lines = err.splitlines()
        assert len(lines) == 1 and lines[0].startswith("eidecomp: error: "), err
        assert str(path) in lines[0], f"the message does not name the file: {err}"
    return code


@budget(600)
@given(data=st.binary(max_size=300), suffix=st.sampled_from(SUFFIXES))
def test_random_bytes_never_give_a_traceback(data, suffix):
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / f"w{suffix}"
        path.write_bytes(data)
        _check_contract(path, ["decompose", str(path), "-o", f"{d}/o", "-q"])


@budget(400)
@given(data=st.binary(max_size=200))
def test_random_bytes_after_an_npy_magic(data):
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "w.npy"
        path.write_bytes(b"\x93NUMPY" + data)
        _check_contract(path, ["decompose", str(path), "-o", f"{d}/o", "-q"])


TEXT = st.text(alphabet="0123456789.,;-+eE \t\nnaifx\"'\ufeff", max_size=120)


@budget(400)
@given(text=TEXT, suffix=st.sampled_from([".csv", ".tsv", ".txt"]))
def test_random_text_tables(text, suffix):
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / f"w{suffix}"
        path.write_text(text, encoding="utf-8")
        _check_contract(path, ["decompose", str(path), "-o", f"{d}/o", "-q"])


DTYPES = st.sampled_from(["<f8", ">f8", "<f4", "<f2", "<i8", "<u1", "|b1",
                          "<c16", "<U2", "<M8[s]", "<m8[s]"])


@budget(300)
@given(arr=DTYPES.flatmap(lambda dt: arrays(
    dt, st.lists(st.integers(0, 4), min_size=0, max_size=4).map(tuple))))
def test_random_shapes_and_dtypes(arr):
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "w.npy"
        np.save(path, arr)
        code = _check_contract(path, ["decompose", str(path), "-o", f"{d}/o", "-q"])
        # decompose takes any m x n matrix (README, "Decomposing a matrix")
        assert (code == 0) == _acceptable(arr, square=False)


def _acceptable(arr, square=True):
    """The README's rules for a weight matrix, restated independently (a
    circuit needs a square one; robust PCA takes any m x n)."""
    if not (arr.ndim == 2 and arr.size and arr.dtype.kind in "biuf"
            and (arr.shape[0] == arr.shape[1] or not square)):
        return False
    if arr.dtype.kind in "iu" and np.abs(arr.astype(float)).max() > 2**53:
        return False
    x = arr.astype(float)
    if not np.isfinite(x).all():
        return False
    top = np.abs(x).max()
    tiny = (x != 0) & (np.abs(x) < np.finfo(float).tiny)
    return bool(top <= 1e100 and (top == 0 or top >= 1e-100) and not tiny.any())


UNIT_TEXT = st.text(alphabet="idfeatur,xy0123456789.-\n\"a ", max_size=80)


@budget(200)
@given(text=UNIT_TEXT)
def test_random_unit_tables(text):
    with tempfile.TemporaryDirectory() as d:
        W = np.array([[0.0, -0.2, 0.1], [0.3, 0.0, -0.1], [-0.2, 0.1, 0.0]])
        np.save(f"{d}/w.npy", W)
        path = Path(d) / "u.csv"
        path.write_text(text, encoding="utf-8")
        _check_contract(path, ["run", f"{d}/w.npy", "--units", str(path),
                               "--ei-ratio", "1", "-o", f"{d}/c", "-q"])


def _matrices(min_n=2, max_n=10, smallest=0.0):
    """Square float64 matrices with entries in [-1, 1] (zeros likely);
    entries below ``smallest`` in magnitude are set to zero."""
    entry = st.floats(-1, 1, allow_nan=False, width=64).map(
        lambda x: x if abs(x) >= smallest else 0.0)
    return st.integers(min_n, max_n).flatmap(lambda n: arrays(
        np.float64, (n, n), elements=st.one_of(st.just(0.0), entry)))


@budget(120)
@given(W=_matrices(), ratio=st.sampled_from([1.0, 2.0, 3.0, 4.0]),
       share=st.sampled_from(["auto", 0.0, 0.5, 1.0]))
def test_circuits_obey_dale_and_the_counts(W, ratio, share):
    n = W.shape[0]
    n_i = int(round(n / ratio))
    assume(n_i >= 1)
    if not _acceptable(W):  # magnitudes the solvers cannot square
        with pytest.raises(InputError):
            assemble(W, ei_ratio=ratio, untuned_share=share, baselines=False)
        return
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        c = assemble(W, ei_ratio=ratio, untuned_share=share, baselines=False)
    for block in (c.J_EE, c.J_EU, c.J_UE, c.J_ET, c.J_TE, c.J_II):
        assert np.isfinite(block).all() and (block >= 0).all()
    if c.own_neurons:
        # W already obeys Dale's law (docs/assembly.md): its inhibitory
        # neurons are the interneurons, divided to meet the ratio, and the
        # circuit's full matrix is W itself
        inhibitory = (W < 0).any(axis=0)
        assert not ((W > 0).any(axis=0) & inhibitory).any()
        n_e = int((~inhibitory).sum())
        assert (c.n_excitatory, c.n_inhibitory) == (n_e, round(n_e / ratio))
        np.testing.assert_array_equal(c.reconstruction(), W)
        signed = c.signed_weights()
        assert (signed[:, :n_e] >= 0).all() and (signed[:, n_e:] <= 0).all()
        return
    assert (c.n_excitatory, c.n_inhibitory) == (n, n_i)
    signed = c.signed_weights()
    assert (signed[:, :n] >= 0).all() and (signed[:, n:] <= 0).all()
    # the reported error is the definition's, ||W - (J_EE - J_EI J_IE)|| / ||W||
    W_eff = c.J_EE - c.J_EI @ c.J_IE
    err = np.linalg.norm(W - W_eff) / max(np.linalg.norm(W), 1e-300)
    assert np.isclose(c.report.relative_error, err, rtol=1e-9, atol=1e-12)


@budget(100)
@given(W=_matrices(3, 10, smallest=1e-6), exponent=st.floats(-12, 12))
def test_scaling_w_scales_the_decomposition_and_circuit(W, exponent):
    assume(np.abs(W).max() > 1e-3)
    c = 10.0 ** exponent
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        base = robust_pca(W)
        scaled = robust_pca(c * W)
    assume(base.converged and scaled.converged)

    def close(a, b, rtol):
        return np.linalg.norm(a - b) <= rtol * max(np.linalg.norm(b), 1e-300)

    assert close(scaled.low_rank, c * base.low_rank, 1e-6)
    assert close(scaled.sparse, c * base.sparse, 1e-6)
    # the circuit from the same decomposition, scaled: every step of the
    # assembly is homogeneous (it works in units of max |W|), except the
    # stability guard, since stability itself depends on W's scale (switched
    # off here; tests/test_stability_guard.py checks it)
    from dataclasses import replace

    dec_c = replace(base, low_rank=c * base.low_rank, sparse=c * base.sparse)
    with warnings.catch_warnings():
        # a refinement stopped at max_iter is homogeneous in W all the same
        # (test_assemble.py::test_a_stopped_refinement_says_so checks the
        # warning itself)
        warnings.simplefilter("ignore", ConvergenceWarning)
        a = assemble(base, baselines=False, ei_ratio=2, stability_guard=False)
        b = assemble(dec_c, baselines=False, ei_ratio=2, stability_guard=False)
    assert a.own_neurons == b.own_neurons
    assert close(b.J_EE, c * a.J_EE, 1e-9)
    if a.own_neurons:   # W's own neurons: the full matrix is W, every block
        for name in ("J_EI", "J_IE", "J_II"):           # scales with it
            assert close(getattr(b, name), c * getattr(a, name), 1e-9)
        return
    assert close(b.J_EI @ b.J_IE, c * (a.J_EI @ a.J_IE), 1e-9)
    assert close(b.J_EI, np.sqrt(c) * a.J_EI, 1e-9)


def test_case_budget():
    """The bounded profile runs at least 2,000 generated cases."""
    assert sum(COUNTS.values()) >= 2000


JSON = st.recursive(
    st.none() | st.booleans() | st.integers(-3, 3) | st.floats(allow_nan=False)
    | st.text(max_size=5),
    lambda inner: st.lists(inner, max_size=3)
    | st.dictionaries(st.sampled_from(["sha256", "populations", "parameters",
                                       "unit_ids", "J_EE.npy", "x"]), inner,
                      max_size=3),
    max_leaves=8)


@budget(150)
@given(fields=st.dictionaries(st.sampled_from(
    ["sha256", "populations", "parameters", "unit_ids", "format_version"]),
    JSON, max_size=4))
def test_tampered_circuit_json_never_gives_a_traceback(bundle_dir, fields):
    """A circuit.json edited by hand: any value in the fields eidecomp reads."""
    import json
    import shutil

    with tempfile.TemporaryDirectory() as d:
        c = Path(d) / "c"
        shutil.copytree(bundle_dir, c)
        doc = json.loads((c / "circuit.json").read_text())
        doc.update(fields)
        (c / "circuit.json").write_text(json.dumps(doc))
        path = c / "circuit.json"
        code, out, err = _run(["export", str(c), "--format", "csv", "-o",
                               f"{d}/e.csv"])
        assert "Traceback" not in out + err
        assert code in (0, 2), err
        if code == 2:
            lines = err.splitlines()
            assert len(lines) == 1 and lines[0].startswith("eidecomp: error: ")
            assert str(c) in lines[0] or str(path) in lines[0], err


@budget(150)
@given(arr=st.sampled_from(["<f8", "<f4", "<i4", "|b1", "<c8"]).flatmap(
    lambda dt: arrays(dt, st.lists(st.integers(0, 5), min_size=0, max_size=5)
                      .map(tuple))),
    grid=st.sampled_from(["8x8", "5x6", "0x4", "8", "axb"]))
def test_random_kernels_never_give_a_traceback(arr, grid):
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "k.npy"
        np.save(path, arr)
        code, out, err = _run(["decompose", "--kernel", str(path), "--grid", grid,
                               "-o", f"{d}/o", "-q"])
        assert "Traceback" not in out + err
        assert code in (0, 2), err
        if code == 2:
            lines = err.splitlines()
            assert len(lines) == 1 and lines[0].startswith("eidecomp: error: ")
