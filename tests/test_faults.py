"""Faults: interrupts, write errors, hostile unit names, determinism.

References:
- interrupts: POSIX SIGINT delivered by the operating system to a running
  ``eidecomp run`` process (Python turns it into KeyboardInterrupt);
- write errors: the operating system's own refusal, a file size limit
  (setrlimit RLIMIT_FSIZE, POSIX), and ENOSPC ("No space left on device")
  raised where files are written;
- escaping: each export is read back with its format's own parser
  (networkx's GraphML reader, Python's json and csv modules, the XML parser
  of the standard library for NeuroML2, numpy's npz reader for the
  simulator scripts' data, Python's compile for their source);
- determinism: byte comparison of two bundles.
"""

import csv
import errno
import json
import os
import signal
import subprocess
import sys
import time

import numpy as np
import pytest
from conftest import require

from eidecomp.cli import main
from eidecomp.datasets import make_planted_circuit


def _listing(folder):
    return sorted((str(p.relative_to(folder)), p.read_bytes() if p.is_file() else b"")
                  for p in folder.rglob("*"))


def _start(args, **kw):
    return subprocess.Popen([sys.executable, "-m", "eidecomp.cli", *args],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True, **kw)


@pytest.fixture(scope="module")
def big(tmp_path_factory):
    """A matrix whose run takes several seconds (600 units)."""
    d = tmp_path_factory.mktemp("big")
    W, _, _ = make_planted_circuit(600, seed=0)
    np.save(d / "w.npy", W)
    return d / "w.npy"


@pytest.mark.parametrize("existing", [False, True])
def test_sigint_leaves_no_output(tmp_path, big, existing):
    out = tmp_path / "circuit"
    if existing:
        out.mkdir()
        (out / "circuit.json").write_text('{"kept": true}\n')
    before = _listing(tmp_path)
    proc = _start(["run", str(big), "-o", str(out), "--force", "--report"])
    time.sleep(3.0)  # python started, numpy imported, the solve under way
    assert proc.poll() is None, "the run ended before the interrupt"
    proc.send_signal(signal.SIGINT)
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == 130
    assert err.strip().splitlines() == ["eidecomp: interrupted; nothing written"]
    assert _listing(tmp_path) == before  # absent, or unchanged; no .partial


def test_interrupt_while_writing_leaves_the_old_output(tmp_path, monkeypatch,
                                                        capsys):
    """An interrupt between two files of the bundle (the rename not yet done)."""
    from eidecomp.io import staging as eio

    W, _, _ = make_planted_circuit(40, n_untuned=2, n_tuned=6, pool=3, seed=1)
    np.save(tmp_path / "w.npy", W)
    out = tmp_path / "c"
    assert main(["run", str(tmp_path / "w.npy"), "-o", str(out), "-q"]) == 0
    before = _listing(tmp_path)
    real = eio._write_bytes
    calls = []

    def interrupted(path, data):
        calls.append(path)
        if len(calls) == 3:
            raise KeyboardInterrupt
        real(path, data)

    monkeypatch.setattr(eio, "_write_bytes", interrupted)
    capsys.readouterr()
    assert main(["run", str(tmp_path / "w.npy"), "-o", str(out), "-q",
                 "--force", "--seed", "3"]) == 130
    assert capsys.readouterr().err == "eidecomp: interrupted; nothing written\n"
    assert _listing(tmp_path) == before


def test_disk_full_leaves_nothing(tmp_path, monkeypatch, capsys):
    from eidecomp.io import staging as eio

    W, _, _ = make_planted_circuit(40, n_untuned=2, n_tuned=6, pool=3, seed=1)
    np.save(tmp_path / "w.npy", W)
    real = eio._write_bytes
    calls = []

    def full(path, data):
        calls.append(path)
        if len(calls) == 2:
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(path))
        real(path, data)

    monkeypatch.setattr(eio, "_write_bytes", full)
    before = _listing(tmp_path)
    out = tmp_path / "c"
    assert main(["run", str(tmp_path / "w.npy"), "-o", str(out), "-q"]) == 1
    assert capsys.readouterr().err == (
        f"eidecomp: error: {out}: cannot write (No space left on device); "
        "nothing written\n")
    assert _listing(tmp_path) == before


def test_file_size_limit_from_the_os(tmp_path):
    """A real write failure: the process may not write files over 40 kB
    (RLIMIT_FSIZE; SIGXFSZ ignored so the write fails with EFBIG)."""
    import resource

    W, _, _ = make_planted_circuit(100, n_untuned=2, n_tuned=18, pool=4, seed=2)
    np.save(tmp_path / "w.npy", W)  # 80 kB, written before the limit
    out = tmp_path / "c"
    out.mkdir()
    (out / "circuit.json").write_text('{"kept": true}\n')
    before = _listing(tmp_path)

    def limit():
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
        resource.setrlimit(resource.RLIMIT_FSIZE, (40_000, 40_000))

    proc = _start(["run", str(tmp_path / "w.npy"), "-o", str(out), "--force",
                   "-q"], preexec_fn=limit, env={**os.environ,
                                                 "PYTHONDONTWRITEBYTECODE": "1"})
    _, err = proc.communicate(timeout=300)
    assert proc.returncode == 1, err
    assert err == (f"eidecomp: error: {out}: cannot write (File too large); "
                   "nothing written, the existing one is unchanged\n")
    assert _listing(tmp_path) == before


HOSTILE = "q\"uo'te\n$(touch {d}/PWNED); `touch {d}/PWNED` </x>&amp; \\n"


@pytest.fixture(scope="module")
def hostile_bundle(tmp_path_factory):
    d = tmp_path_factory.mktemp("hostile")
    W, _, features = make_planted_circuit(30, n_untuned=1, n_tuned=5, pool=3,
                                          seed=4)
    np.save(d / "w.npy", W)
    names = [HOSTILE.format(d=d) + f"#{i}" for i in range(30)]
    with open(d / "units.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["id", "feature"])
        w.writerows([n, f] for n, f in zip(names, features, strict=True))
    assert main(["run", str(d / "w.npy"), "--units", str(d / "units.csv"),
                 "-o", str(d / "c"), "-q"]) == 0
    return d, names


def _no_side_effects(d):
    assert not (d / "PWNED").exists()


def test_hostile_names_in_the_bundle(hostile_bundle):
    d, names = hostile_bundle
    doc = json.loads((d / "c" / "circuit.json").read_text(encoding="utf-8"))
    assert doc["unit_ids"] == names
    _no_side_effects(d)


def test_hostile_names_in_graph_exports(hostile_bundle, tmp_path):
    import networkx as nx

    d, names = hostile_bundle
    for fmt in ("graphml", "json", "csv"):
        assert main(["export", str(d / "c"), "--format", fmt, "-o",
                     str(tmp_path / f"g.{fmt}")]) == 0
    G = nx.read_graphml(tmp_path / "g.graphml")
    assert [G.nodes[f"E{i}"]["unit_id"] for i in range(30)] == names
    data = json.loads((tmp_path / "g.json").read_text(encoding="utf-8"))
    by_id = {n["id"]: n for n in data["nodes"]}
    assert [by_id[f"E{i}"]["unit_id"] for i in range(30)] == names
    with open(tmp_path / "g.csv", newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    seen = {r["pre_unit_id"] for r in rows if r["pre_population"] == "E"}
    assert seen and seen <= set(names)
    for r in rows:
        if r["pre_population"] == "E":
            assert r["pre_unit_id"] == names[int(r["pre"][1:])]
    _no_side_effects(d)


def test_hostile_names_in_neuroml(hostile_bundle, tmp_path):
    require("neuroml")
    import xml.etree.ElementTree as ET

    d, names = hostile_bundle
    assert main(["export", str(d / "c"), "--format", "neuroml", "-o",
                 str(tmp_path / "c.net.nml")]) == 0  # schema-validated
    root = ET.parse(tmp_path / "c.net.nml").getroot()
    ns = {"n": root.tag.split("}")[0].strip("{")}
    pop = root.find(".//n:population[@id='E']", ns)
    notes = pop.find("n:notes", ns).text
    assert json.loads(notes)["unit_ids"] == names
    _no_side_effects(d)


@pytest.mark.parametrize("fmt", ["pynn", "nest", "brian2"])
def test_hostile_names_in_simulator_scripts(hostile_bundle, tmp_path, fmt):
    d, names = hostile_bundle
    out = tmp_path / fmt
    assert main(["export", str(d / "c"), "--format", fmt, "-o", str(out)]) == 0
    script = next(out.glob("*.py"))
    source = script.read_text(encoding="utf-8")
    compile(source, str(script), "exec")  # valid Python
    assert "touch" not in source and "PWNED" not in source  # names are data
    data = next(out.glob("*.npz"))
    with np.load(data, allow_pickle=False) as z:
        assert z["unit_ids"].tolist() == names
    if fmt in ("nest", "brian2"):  # run it: the names must run nothing
        require({"nest": "nest", "brian2": "brian2"}[fmt])
        run = subprocess.run([sys.executable, str(script), "--t-stop", "5"],
                             cwd=out, capture_output=True, text=True, timeout=600)
        assert run.returncode == 0, run.stderr[-2000:]
    _no_side_effects(d)


def test_same_seed_gives_byte_identical_bundles(tmp_path):
    W, _, features = make_planted_circuit(80, n_untuned=2, n_tuned=14, pool=4,
                                          seed=5)
    np.save(tmp_path / "w.npy", W)
    rows = "".join(f"u{i},{float(f)!r},{10.0 * i!r},0.0\n"
                   for i, f in enumerate(features))
    (tmp_path / "u.csv").write_text("id,feature,x,y\n" + rows)
    outs = []
    for name in ("a", "b"):
        assert main(["run", str(tmp_path / "w.npy"), "--units",
                     str(tmp_path / "u.csv"), "-o", str(tmp_path / name), "-q",
                     "--report", "--seed", "7"]) == 0
        outs.append(_listing(tmp_path / name))
    assert outs[0] == outs[1]
    assert len(outs[0]) >= 10  # every block, the json, the report
