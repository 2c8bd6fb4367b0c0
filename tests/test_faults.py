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
import hashlib
import json
import os
import re
import shutil
import signal
import stat
import subprocess
import sys
import threading
import time
from pathlib import Path

import numpy as np
import pytest
from conftest import require

from eidecomp.cli import main
from eidecomp.datasets import make_planted_circuit
from eidecomp.errors import InputError, WriteError
from eidecomp.io import write_file, write_folder


def _listing(folder):
    return sorted((str(p.relative_to(folder)), p.read_bytes() if p.is_file() else b"")
                  for p in folder.rglob("*"))


def _default_signals():
    """In a child before exec: SIGINT, SIGTERM, SIGHUP at their defaults,
    whatever the test runner inherited (POSIX: an ignored signal stays
    ignored across exec)."""
    for sig in (signal.SIGINT, signal.SIGTERM, signal.SIGHUP):
        signal.signal(sig, signal.SIG_DFL)


@pytest.fixture(autouse=True)
def _terminal_signals():
    """Each test runs with SIGTERM and SIGHUP at their default action, as in
    a terminal session, whatever the runner inherited (a CI job started
    under nohup ignores SIGHUP); the runner's own are put back after."""
    inherited = {sig: signal.signal(sig, signal.SIG_DFL)
                 for sig in (signal.SIGTERM, signal.SIGHUP)}
    yield
    for sig, handler in inherited.items():
        signal.signal(sig, handler)


def _errors(err):
    """stderr without its progress lines ("  [3 s] ...": stderr is a pipe, so
    eidecomp.progress writes a plain line every few seconds), which must all
    come before the one line of the ending."""
    lines = err.rstrip("\n").splitlines()
    rest = [line for line in lines if not line.startswith("  [")]
    assert lines[-len(rest):] == rest, lines   # no progress after the end
    return rest


def _start(args, **kw):
    kw.setdefault("preexec_fn", _default_signals)
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
def test_sigint_leaves_no_output(tmp_path, big, small_bundle, existing):
    out = tmp_path / "circuit"
    if existing:  # a real bundle: --force replaces only eidecomp's own output
        shutil.copytree(small_bundle, out)
    before = _listing(tmp_path)
    proc = _start(["run", str(big), "-o", str(out), "--force", "--report"])
    time.sleep(3.0)  # python started, numpy imported, the solve under way
    assert proc.poll() is None, "the run ended before the interrupt"
    proc.send_signal(signal.SIGINT)
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == 130
    assert _errors(err) == ["eidecomp: interrupted; nothing written"]
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
    out = tmp_path / "c"  # a real bundle: --force replaces only eidecomp's own
    assert main(["run", str(tmp_path / "w.npy"), "-o", str(out), "-q",
                 "--seed", "1"]) == 0
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
    np.save(d / "w.npy", _stable(W))
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
        run = subprocess.run([sys.executable, str(script), "--segment-ms", "5"],
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


# --- writes and signals ---
# References: POSIX signals delivered by the operating system to a real
# ``python -m eidecomp.cli run`` process (SIGTERM 15, SIGHUP 1, SIGKILL 9; an
# exit status of 128 + the signal number is the shell's convention, POSIX
# sh "Exit Status"); kill(pid, 0) failing with ESRCH once a process is gone
# (POSIX kill(2)); the operating system's own refusals (ENOENT under /proc,
# EPERM under /sys, /dev/null a character device); EROFS, EACCES and ENOSPC
# raised where the OS raises them (monkeypatched: the tests run as root, where
# chmod does not stop a write and no read-only mount can be made); the umask
# semantics of POSIX open(2) and mkdir(2): the mode is 0666 / 0777 & ~umask.

_LEFTOVER = r"\.{name}\.eidecomp-{pid}-[a-z0-9_]{{8}}\.{kind}"


def _small_matrix(folder, name="w.npy", seed=1):
    W, _, _ = make_planted_circuit(40, n_untuned=2, n_tuned=6, pool=3, seed=seed)
    np.save(folder / name, W)
    return folder / name


def _stable(W):
    """W scaled to max Re eig 0.5 (numpy): a network, and a circuit, whose
    linear dynamics are stable, so that its script exports are written."""
    return 0.5 * W / max(float(np.linalg.eigvals(W).real.max()), 1e-12)


@pytest.fixture(scope="module")
def small_bundle(tmp_path_factory):
    """A real circuit bundle (40 units), copied by the tests that need one;
    stable, as the script exports require."""
    d = tmp_path_factory.mktemp("small")
    np.save(d / "w.npy", _stable(np.load(_small_matrix(d))))
    assert main(["run", str(d / "w.npy"), "-o", str(d / "c"), "-q"]) == 0
    return d / "c"


def _dead_pid():
    """The id of a process that has ended (and been reaped)."""
    proc = subprocess.Popen([sys.executable, "-c", "pass"])
    proc.wait(timeout=60)
    return proc.pid


def _killed(code, *args):
    """Run ``code`` in a child that kills itself with SIGKILL; its pid."""
    proc = subprocess.Popen([sys.executable, "-c", code, *map(str, args)],
                            stderr=subprocess.PIPE, text=True)
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == -signal.SIGKILL, err
    return proc.pid


def _err_lines(capsys):
    return capsys.readouterr().err.splitlines()


# signals ----------------------------------------------------------------------


@pytest.mark.parametrize("sig", [signal.SIGTERM, signal.SIGHUP],
                         ids=["SIGTERM", "SIGHUP"])
@pytest.mark.parametrize("existing", [False, True], ids=["new", "existing"])
def test_termination_signal_leaves_no_output(tmp_path, big, small_bundle, sig,
                                             existing):
    """A real SIGTERM / SIGHUP from the OS during the solve: exit 128 + n,
    one line, no temporary left, an existing bundle unchanged."""
    out = tmp_path / "circuit"
    if existing:
        shutil.copytree(small_bundle, out)
    before = _listing(tmp_path)
    # the default disposition a terminal session gives (a runner started
    # under nohup passes SIGHUP on ignored, which the nohup test covers)
    proc = _start(["run", str(big), "-o", str(out), "--force", "--report"])
    time.sleep(3.0)  # python started, numpy imported, the solve under way
    assert proc.poll() is None, "the run ended before the signal"
    proc.send_signal(sig)
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == 128 + sig
    assert _errors(err) == [
        f"eidecomp: terminated ({signal.Signals(sig).name}); nothing written"]
    assert _listing(tmp_path) == before


def test_sighup_ignored_under_nohup_is_still_ignored(tmp_path, big):
    """nohup(1) starts a command with SIGHUP ignored (POSIX: SIG_IGN is
    inherited across exec); eidecomp must keep ignoring it and finish."""
    out = tmp_path / "circuit"

    def nohup():
        signal.signal(signal.SIGHUP, signal.SIG_IGN)

    proc = _start(["run", str(big), "-o", str(out), "-q"], preexec_fn=nohup)
    time.sleep(3.0)
    assert proc.poll() is None, "the run ended before the signal"
    proc.send_signal(signal.SIGHUP)
    _, err = proc.communicate(timeout=300)
    assert proc.returncode == 0, err
    assert (out / "circuit.json").is_file()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["circuit"]


def test_sigterm_while_writing_leaves_nothing(tmp_path, monkeypatch, capsys):
    """A real SIGTERM (os.kill to this process) between two files of the
    bundle: exit 143 and no temporary folder."""
    from eidecomp.io import staging as eio

    w = _small_matrix(tmp_path)
    before = _listing(tmp_path)
    real = eio._write_bytes
    calls = []

    def killed(path, data):
        calls.append(path)
        if len(calls) == 3:
            os.kill(os.getpid(), signal.SIGTERM)
        real(path, data)

    monkeypatch.setattr(eio, "_write_bytes", killed)
    capsys.readouterr()
    assert main(["run", str(w), "-o", str(tmp_path / "c"), "-q"]) == 143
    assert _err_lines(capsys) == ["eidecomp: terminated (SIGTERM); nothing written"]
    assert len(calls) == 3
    assert _listing(tmp_path) == before


def test_handle_termination_restores_the_handlers():
    """Python's signal module: getsignal gives back what was installed."""
    from eidecomp.io.staging import Terminated, handle_termination

    # the autouse fixture gives SIGTERM and SIGHUP their default action
    before = {s: signal.getsignal(s) for s in (signal.SIGTERM, signal.SIGHUP)}
    with handle_termination():
        assert signal.getsignal(signal.SIGTERM) is not before[signal.SIGTERM]
        with pytest.raises(Terminated) as info:
            os.kill(os.getpid(), signal.SIGHUP)
            time.sleep(1.0)  # the handler runs in the main thread
    assert info.value.signum == signal.SIGHUP and info.value.name == "SIGHUP"
    assert isinstance(info.value, KeyboardInterrupt)  # Ctrl-C's clean-up runs
    assert {s: signal.getsignal(s) for s in before} == before


def test_handle_termination_keeps_an_ignored_signal_ignored():
    """SIG_IGN on entry (nohup) is left alone (Python signal module)."""
    from eidecomp.io.staging import handle_termination

    old = signal.signal(signal.SIGHUP, signal.SIG_IGN)
    try:
        with handle_termination():
            assert signal.getsignal(signal.SIGHUP) is signal.SIG_IGN
            os.kill(os.getpid(), signal.SIGHUP)  # ignored: nothing happens
            time.sleep(0.2)
    finally:
        signal.signal(signal.SIGHUP, old)


def test_handle_termination_outside_the_main_thread_changes_nothing():
    """Python's signal.signal works only in the main thread (ValueError
    elsewhere): in a worker the block runs and no handler is touched."""
    from eidecomp.io.staging import handle_termination

    before = signal.getsignal(signal.SIGTERM)
    seen = []

    def work():
        with handle_termination():
            seen.append(signal.getsignal(signal.SIGTERM))

    t = threading.Thread(target=work)
    t.start()
    t.join(timeout=60)
    assert seen == [before]


def test_out_of_memory_is_one_line(tmp_path, monkeypatch, capsys):
    """numpy's MemoryError ("Unable to allocate ...") while writing: one
    line, exit 1, nothing left."""
    from eidecomp.io import staging as eio

    w = _small_matrix(tmp_path)
    before = _listing(tmp_path)

    def no_memory(path, data):
        raise MemoryError("Unable to allocate 8.00 EiB for an array")

    monkeypatch.setattr(eio, "_write_bytes", no_memory)
    capsys.readouterr()
    assert main(["run", str(w), "-o", str(tmp_path / "c"), "-q"]) == 1
    assert _err_lines(capsys) == [
        "eidecomp: error: out of memory (Unable to allocate 8.00 EiB for an "
        "array); nothing written"]
    assert _listing(tmp_path) == before


# leftovers of a killed run ----------------------------------------------------

_KILL_IN_FOLDER = """
import os, signal, sys
from eidecomp.io import staged_folder
with staged_folder(sys.argv[1]) as tmp:
    (tmp / "half.npy").write_bytes(b"half")
    os.kill(os.getpid(), signal.SIGKILL)
"""

_KILL_IN_FILE = """
import os, signal, sys
from eidecomp.io import staging
def killed(path, data):
    open(path, "wb").write(data[:10])
    os.kill(os.getpid(), signal.SIGKILL)
staging._write_bytes = killed
staging.write_file(sys.argv[1], b"0123456789" * 100)
"""

_KILL_BETWEEN_RENAMES = """
import os, signal, sys
from eidecomp.io import staged_folder
real, n = os.rename, []
def rename(a, b):
    n.append(a)
    if len(n) == 2:  # the old output moved aside, the new one not yet in place
        os.kill(os.getpid(), signal.SIGKILL)
    real(a, b)
os.rename = rename
with staged_folder(sys.argv[1], force=True, replaceable=lambda p: None) as tmp:
    (tmp / "circuit.json").write_text("new")
"""


def test_sigkill_leaves_a_partial_the_next_run_removes(tmp_path, capsys):
    """SIGKILL cannot be caught (POSIX): the temporary folder stays, named
    with the dead pid; the next run on the same output removes it."""
    w = _small_matrix(tmp_path)
    out = tmp_path / "c"
    pid = _killed(_KILL_IN_FOLDER, out)
    left = [p.name for p in tmp_path.iterdir() if p.name.startswith(".")]
    assert len(left) == 1
    assert re.fullmatch(_LEFTOVER.format(name="c", pid=pid, kind="partial"), left[0])
    assert main(["run", str(w), "-o", str(out), "-q"]) == 0
    assert sorted(p.name for p in tmp_path.iterdir()) == ["c", "w.npy"]


def test_sigkill_leaves_a_partial_file_the_next_export_removes(tmp_path,
                                                                small_bundle):
    """The same for a single file (write_file): the next export removes it."""
    out = tmp_path / "g.json"
    pid = _killed(_KILL_IN_FILE, out)
    left = [p.name for p in tmp_path.iterdir()]
    assert len(left) == 1
    assert re.fullmatch(_LEFTOVER.format(name=r"g\.json", pid=pid, kind="partial"),
                        left[0])
    assert main(["export", str(small_bundle), "--format", "json", "-o",
                 str(out)]) == 0
    assert [p.name for p in tmp_path.iterdir()] == ["g.json"]
    json.loads(out.read_text(encoding="utf-8"))


def test_sigkill_between_the_renames_gives_the_old_output_back(tmp_path,
                                                               small_bundle,
                                                               capsys):
    """Killed after the old bundle was moved aside and before the new one
    was renamed into place: the next write to that output puts the old one
    back (and then refuses to replace it without --force)."""
    w = _small_matrix(tmp_path)
    out = tmp_path / "c"
    shutil.copytree(small_bundle, out)
    before = _listing(tmp_path)
    pid = _killed(_KILL_BETWEEN_RENAMES, out)
    assert not out.exists()
    # by kind (.old before .partial), not by the random part of the names
    left = sorted((p.name for p in tmp_path.iterdir() if p.name.startswith(".")),
                  key=lambda n: n.rsplit(".", 1)[-1])
    assert [re.fullmatch(_LEFTOVER.format(name="c", pid=pid, kind=k), n) is not None
            for n, k in zip(left, ["old", "partial"], strict=True)] == [True, True]
    capsys.readouterr()
    assert main(["run", str(w), "-o", str(out), "-q"]) == 2
    assert _err_lines(capsys) == [
        f"eidecomp: error: {out}: already exists; use --force to replace it"]
    assert _listing(tmp_path) == before


@pytest.mark.parametrize("name", [
    ".c.eidecomp-{dead}-abcdefg.partial",     # 7 random characters
    ".c.eidecomp-{dead}-abcdefghi.partial",   # 9
    ".c.eidecomp-{dead}-ABCDEFGH.partial",    # not tempfile's alphabet
    ".c.eidecomp-{dead}-abcdefgh.partial.d",  # something after the suffix
    ".c.eidecomp-{dead}-abcdefgh.tmp",
    ".cc.eidecomp-{dead}-abcdefgh.partial",   # another output's
    "c.eidecomp-{dead}-abcdefgh.partial",     # not a dot-file
    ".c.eidecomp-0{dead}-abcdefgh.partial",   # not a pid as written
    ".c.old-{dead}",                          # an old-style name
    ".c.eidecomp-{live}-abcdefgh.partial",    # a live process's
    ".c.eidecomp-{me}-abcdefgh.partial",      # this process's own
    ".c.eidecomp-1-abcdefgh.old",             # init's: always alive
])
def test_folders_that_are_not_dead_leftovers_are_kept(tmp_path, name):
    """Only an exact match of a process that is gone (kill(pid, 0) ->
    ESRCH) is removed; the control, a real dead leftover, is."""
    sleeper = subprocess.Popen([sys.executable, "-c", "import time; "
                                "time.sleep(60)"])
    try:
        dead = _dead_pid()
        kept = tmp_path / name.format(dead=dead, live=sleeper.pid, me=os.getpid())
        kept.mkdir()
        (kept / "notes.txt").write_text("mine")
        control = tmp_path / f".c.eidecomp-{dead}-abcdefgh.partial"
        control.mkdir()
        (control / "J_EE.npy").write_bytes(b"half")
        write_folder(tmp_path / "c", {"a.txt": "x"})
    finally:
        sleeper.kill()
        sleeper.wait(timeout=60)
    assert (kept / "notes.txt").read_text() == "mine"
    assert not control.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(["c", kept.name])


def test_a_symlink_named_like_a_leftover_is_kept(tmp_path):
    """A symbolic link is never followed or removed by the sweep."""
    dead = _dead_pid()
    (tmp_path / "data").mkdir()
    (tmp_path / "data" / "keep.txt").write_text("mine")
    link = tmp_path / f".c.eidecomp-{dead}-abcdefgh.partial"
    link.symlink_to(tmp_path / "data")
    write_folder(tmp_path / "c", {"a.txt": "x"})
    assert link.is_symlink() and (tmp_path / "data" / "keep.txt").exists()


def test_temporary_names_carry_the_pid(tmp_path, monkeypatch):
    """The names staged_folder renames through (os.rename recorded)."""
    out = tmp_path / "c"
    write_folder(out, {"a.txt": "1"})
    real, seen = os.rename, []

    def rename(a, b):
        seen.append((Path(a).name, Path(b).name))
        real(a, b)

    monkeypatch.setattr(os, "rename", rename)
    write_folder(out, {"a.txt": "2"}, force=True, replaceable=lambda p: None)
    (old_from, old), (partial, to) = seen
    assert old_from == "c" and to == "c"
    assert re.fullmatch(_LEFTOVER.format(name="c", pid=os.getpid(), kind="old"), old)
    assert re.fullmatch(_LEFTOVER.format(name="c", pid=os.getpid(),
                                         kind="partial"), partial)
    assert (out / "a.txt").read_text() == "2"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["c"]


def test_a_name_at_the_length_limit_can_be_written(tmp_path):
    """NAME_MAX is 255 bytes (Linux, POSIX pathconf): the temporary name
    keeps only part of a long output name, and the write still succeeds."""
    name = "a" + "é" * 127  # 255 bytes in UTF-8: the cut splits a character
    write_folder(tmp_path / name, {"a.txt": "x"})
    assert write_file(tmp_path / (name[:-1] + "a"), b"y").read_bytes() == b"y"
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(
        [name, name[:-1] + "a"])


# what --force may replace -----------------------------------------------------


def _notes(folder):
    folder.mkdir()
    (folder / "notes.txt").write_text("my notes\n")
    return folder


def test_force_never_replaces_an_unknown_folder(tmp_path):
    """Common practice (rm -i, cp -i): a folder we cannot tell is ours is
    not deleted, even with force."""
    from eidecomp.io.staging import staged_folder

    out = _notes(tmp_path / "c")
    before = _listing(tmp_path)
    with pytest.raises(InputError) as info:
        with staged_folder(out, force=True) as tmp:
            (tmp / "x").write_text("x")
    assert str(info.value) == (f"{out}: a folder not known to be an eidecomp "
                               "output; not replaced")
    assert _listing(tmp_path) == before


def test_force_asks_replaceable(tmp_path):
    from eidecomp.io.staging import staged_folder

    out = _notes(tmp_path / "c")
    before = _listing(tmp_path)
    asked = []

    def replaceable(p):
        asked.append(p)
        return "not an eidecomp circuit bundle"

    with pytest.raises(InputError) as info:
        with staged_folder(out, force=True, replaceable=replaceable) as tmp:
            (tmp / "x").write_text("x")
    assert str(info.value) == f"{out}: not an eidecomp circuit bundle; not replaced"
    assert asked == [out]
    assert _listing(tmp_path) == before


def test_force_replaces_what_replaceable_accepts(tmp_path):
    out = _notes(tmp_path / "c")
    write_folder(out, {"a.txt": "x"}, force=True, replaceable=lambda p: None)
    assert _listing(tmp_path) == [("c", b""), ("c/a.txt", b"x")]


def test_force_never_replaces_an_empty_folder(tmp_path, capsys):
    """The README's rule: --force replaces only what eidecomp wrote and
    nobody changed since, so never a folder of yours, even an empty one
    (it may be a mount point, or hold permissions you set)."""
    (tmp_path / "c").mkdir()
    with pytest.raises(InputError, match="; not replaced$"):
        write_folder(tmp_path / "c", {"a.txt": "x"}, force=True)
    w = _small_matrix(tmp_path)
    before = _listing(tmp_path)
    capsys.readouterr()
    assert main(["run", str(w), "-o", str(tmp_path / "c"), "--force",
                 "-q"]) == 2
    assert _err_lines(capsys) == [
        f"eidecomp: error: {tmp_path / 'c'}: an empty folder that eidecomp "
        "did not write; not replaced"]
    assert _listing(tmp_path) == before


def test_cli_force_refuses_a_folder_of_notes(tmp_path, capsys):
    w = _small_matrix(tmp_path)
    out = _notes(tmp_path / "c")
    before = _listing(tmp_path)
    capsys.readouterr()
    assert main(["run", str(w), "-o", str(out), "--force", "-q"]) == 2
    (line,) = _err_lines(capsys)
    assert line.startswith(f"eidecomp: error: {out}: ")
    assert line.endswith("; not replaced")
    assert _listing(tmp_path) == before


def test_cli_force_replaces_its_own_bundle(tmp_path):
    w = _small_matrix(tmp_path)
    out = tmp_path / "c"
    assert main(["run", str(w), "-o", str(out), "-q"]) == 0
    first = _listing(out)
    assert main(["run", str(w), "-o", str(out), "-q", "--force", "--seed", "3"]) == 0
    assert _listing(out) != first
    assert sorted(p.name for p in tmp_path.iterdir()) == ["c", "w.npy"]


@pytest.mark.parametrize("kind", ["folder", "symlink to a folder", "fifo",
                                  "dangling symlink"])
def test_a_file_output_replaces_only_a_regular_file(tmp_path, kind):
    """POSIX file types (S_ISREG): only a regular file is replaced."""
    out = tmp_path / "g.json"
    if kind == "folder":
        out.mkdir()
    elif kind == "symlink to a folder":
        (tmp_path / "d").mkdir()
        out.symlink_to(tmp_path / "d")
    elif kind == "fifo":
        os.mkfifo(out)
    else:
        out.symlink_to(tmp_path / "missing")
    before = _listing(tmp_path) if kind != "fifo" else None
    with pytest.raises(InputError, match="; not replaced$"):
        write_file(out, b"x", force=True)
    assert os.path.lexists(out)
    if before is not None:
        assert _listing(tmp_path) == before


def test_export_refuses_to_replace_a_device(small_bundle, capsys):
    """/dev/null is a character device (POSIX): never replaced."""
    assert stat.S_ISCHR(os.stat("/dev/null").st_mode)
    capsys.readouterr()
    assert main(["export", str(small_bundle), "--format", "json", "-o",
                 "/dev/null", "--force"]) == 2
    assert _err_lines(capsys) == [
        "eidecomp: error: /dev/null: not a regular file; not replaced"]
    assert stat.S_ISCHR(os.stat("/dev/null").st_mode)


# outputs that would destroy an input --------------------------------------------


def test_run_refuses_an_output_holding_its_input(tmp_path, capsys):
    """``run out/w.npy -o out --force``: replacing out would delete w.npy."""
    out = tmp_path / "out"
    out.mkdir()
    w = _small_matrix(out)
    before = _listing(tmp_path)
    capsys.readouterr()
    assert main(["run", str(w), "-o", str(out), "--force", "-q"]) == 2
    assert _err_lines(capsys) == [
        f"eidecomp: error: {out}: contains the input {w}; replacing it would "
        "delete the input"]
    assert _listing(tmp_path) == before


def test_export_refuses_to_write_into_the_bundle_it_reads(tmp_path, small_bundle,
                                                          capsys):
    c = tmp_path / "c"
    shutil.copytree(small_bundle, c)
    before = _listing(tmp_path)
    for out in (c / "circuit.json", c / "graph.json"):
        args = ["export", str(c), "--format", "json", "-o", str(out), "--force"]
        capsys.readouterr()
        assert main(args) == 2
        assert _err_lines(capsys) == [
            f"eidecomp: error: {out}: inside the input folder {c}; write the "
            "output elsewhere"]
    assert _listing(tmp_path) == before


def test_check_output_refuses_the_input_itself(tmp_path):
    from eidecomp.io.staging import check_output

    w = _small_matrix(tmp_path)
    with pytest.raises(InputError) as info:
        check_output(w, force=True, folder=False, inputs=[w])
    assert str(info.value) == f"{w}: is the input {w}; write the output elsewhere"


def test_check_output_sees_an_input_through_a_symlink(tmp_path):
    """POSIX realpath: the input named through a link is the same file."""
    from eidecomp.io.staging import check_output

    out = tmp_path / "out"
    out.mkdir()
    w = _small_matrix(out)
    link = tmp_path / "w-link.npy"
    link.symlink_to(w)
    with pytest.raises(InputError, match="contains the input"):
        check_output(out, force=True, replaceable=lambda p: None, inputs=[link])
    assert w.is_file()


def test_check_output_accepts_a_clean_output(tmp_path):
    from eidecomp.io.staging import check_output

    w = _small_matrix(tmp_path)
    out = tmp_path / "c"
    assert check_output(out, inputs=[w, None, "example"]) == out
    assert sorted(p.name for p in tmp_path.iterdir()) == ["w.npy"]


@pytest.mark.parametrize("out, cwd", [(".", "work"), ("..", "work/sub")])
def test_output_holding_the_current_folder_is_refused(tmp_path, monkeypatch,
                                                      capsys, out, cwd):
    """Replacing the folder a process runs in (or one above it) would pull
    the floor from under it: refused even with --force."""
    w = _small_matrix(tmp_path)
    (tmp_path / cwd).mkdir(parents=True)
    (tmp_path / "work" / "notes.txt").write_text("mine")
    monkeypatch.chdir(tmp_path / cwd)
    before = _listing(tmp_path)
    capsys.readouterr()
    assert main(["run", str(w), "-o", out, "--force", "-q"]) == 2
    assert _err_lines(capsys) == [
        f"eidecomp: error: {out}: holds the current folder "
        f"{os.path.realpath(tmp_path / cwd)}; not replaced"]
    assert _listing(tmp_path) == before


def test_missing_parent_folder(tmp_path, capsys):
    w = _small_matrix(tmp_path)
    out = tmp_path / "no" / "such" / "c"
    assert main(["run", str(w), "-o", str(out), "-q"]) == 2
    assert _err_lines(capsys) == [
        f"eidecomp: error: {out}: parent folder {os.path.realpath(out.parent)} "
        "does not exist"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["w.npy"]


@pytest.mark.parametrize("below", ["c", "x/c"])
def test_parent_that_is_a_file(tmp_path, capsys, below):
    """POSIX ENOTDIR: a path component that is a file, named as such."""
    w = _small_matrix(tmp_path)
    out = w / below
    assert main(["run", str(w), "-o", str(out), "-q"]) == 2
    assert _err_lines(capsys) == [
        f"eidecomp: error: {out}: {w} is a file, not a folder"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["w.npy"]


# write errors ------------------------------------------------------------------


@pytest.mark.parametrize("out, reason", [
    ("/proc/eidecomp-test-x", "No such file or directory"),  # procfs: ENOENT
    ("/sys/eidecomp-test-x", "Operation not permitted"),     # sysfs: EPERM
])
def test_os_refuses_the_folder(tmp_path, out, reason):
    """The kernel's own refusal to create anything in /proc or /sys, even
    for root: exit 1, one line, nothing created."""
    w = _small_matrix(tmp_path)
    proc = _start(["run", str(w), "-o", out, "-q"])
    _, err = proc.communicate(timeout=300)
    assert proc.returncode == 1, err
    assert err == (f"eidecomp: error: {out}: cannot write ({reason}); "
                   "nothing written\n")
    assert not os.path.lexists(out)


def _raising(code):
    def fail(*args, **kwargs):
        raise OSError(code, os.strerror(code))
    return fail


@pytest.mark.parametrize("code", [errno.EROFS, errno.EACCES, errno.ENOSPC])
def test_temporary_folder_refused(tmp_path, monkeypatch, small_bundle, code):
    """mkdtemp failing as on a read-only mount (EROFS), a folder without
    write permission (EACCES) or a full disk (ENOSPC): a WriteError, and the
    existing bundle unchanged."""
    import tempfile

    out = tmp_path / "c"
    shutil.copytree(small_bundle, out)
    before = _listing(tmp_path)
    monkeypatch.setattr(tempfile, "mkdtemp", _raising(code))
    with pytest.raises(WriteError) as info:
        write_folder(out, {"a.txt": "x"}, force=True, replaceable=lambda p: None)
    assert str(info.value) == (f"{out}: cannot write ({os.strerror(code)}); "
                               "nothing written, the existing one is unchanged")
    assert _listing(tmp_path) == before


@pytest.mark.parametrize("code", [errno.EROFS, errno.EACCES])
def test_temporary_file_refused(tmp_path, monkeypatch, code):
    """mkstemp failing (EROFS, EACCES): a WriteError naming the output."""
    import tempfile

    monkeypatch.setattr(tempfile, "mkstemp", _raising(code))
    with pytest.raises(WriteError) as info:
        write_file(tmp_path / "g.json", b"x")
    assert str(info.value) == (f"{tmp_path / 'g.json'}: cannot write "
                               f"({os.strerror(code)}); nothing written")
    assert list(tmp_path.iterdir()) == []


def test_export_disk_full_keeps_the_existing_file(tmp_path, monkeypatch,
                                                  small_bundle, capsys):
    from eidecomp.io import staging as eio

    out = tmp_path / "g.json"  # an earlier export: what --force may replace
    assert main(["export", str(small_bundle), "--format", "json", "-o",
                 str(out)]) == 0
    old = out.read_bytes()
    monkeypatch.setattr(eio, "_write_bytes", _raising(errno.ENOSPC))
    capsys.readouterr()
    assert main(["export", str(small_bundle), "--format", "json", "-o", str(out),
                 "--force"]) == 1
    assert _err_lines(capsys) == [
        f"eidecomp: error: {out}: cannot write (No space left on device); "
        "nothing written, the existing one is unchanged"]
    assert _listing(tmp_path) == [("g.json", old)]


def test_a_write_error_from_the_block_is_not_wrapped_twice(tmp_path):
    from eidecomp.io.staging import staged_folder

    with pytest.raises(WriteError) as info:
        with staged_folder(tmp_path / "c"):
            raise WriteError("inner: cannot write (x); nothing written")
    assert str(info.value) == "inner: cannot write (x); nothing written"
    assert list(tmp_path.iterdir()) == []


# modes ------------------------------------------------------------------------


@pytest.mark.parametrize("mask", [0o022, 0o077, 0o027], ids=["022", "077", "027"])
def test_modes_follow_the_umask(tmp_path, small_bundle, mask):
    """POSIX open(2)/mkdir(2): a new file gets 0666 & ~umask and a folder
    0777 & ~umask; eidecomp's bundles and exports get the same (mkdtemp's
    0700 and mkstemp's 0600 are not kept)."""
    w = _small_matrix(tmp_path)
    out = tmp_path / "c"
    graph = tmp_path / "g.json"
    for args in (["run", str(w), "-o", str(out), "-q", "--report"],
                 ["export", str(small_bundle), "--format", "json", "-o",
                  str(graph)]):
        proc = _start(args, preexec_fn=lambda: os.umask(mask))
        _, err = proc.communicate(timeout=300)
        assert proc.returncode == 0, err
    assert stat.S_IMODE(out.stat().st_mode) == 0o777 & ~mask
    files = [p for p in out.rglob("*") if p.is_file()]
    assert len(files) >= 6
    for p in files:
        assert stat.S_IMODE(p.stat().st_mode) == 0o666 & ~mask, p.name
    assert stat.S_IMODE(graph.stat().st_mode) == 0o666 & ~mask


def test_umask_is_read_without_changing_it():
    """The umask read (Linux /proc/self/status 'Umask:') is the one the
    process has (os.umask round trip)."""
    from eidecomp.io import staging as eio

    old = os.umask(0o027)
    try:
        assert eio._umask() == 0o027
        assert os.umask(0o027) == 0o027  # still in force
    finally:
        os.umask(old)


# --- names are data ---
# Unit ids from a unit table, as strings, through every export format and back
# by that format's own reader: networkx's GraphML reader (and Python's
# xml.dom.minidom for well-formedness), Python's json module with networkx's
# node-link reader, Python's csv module (with the OWASP "CSV Injection"
# quote undone, or written raw), libNeuroML's loader and Python's
# xml.etree.ElementTree / xml.dom.minidom for NeuroML2, numpy's npz reader
# for the simulator scripts' data.

NAMES = [
    'q"uo\'te',
    "<x>&amp;</x>",
    "a & b",
    "]]>",
    "<![CDATA[x]]>",
    "tab\there",
    "\tleading tab",
    "cr\rinside",
    "lf\ninside",
    "crlf\r\ninside",
    "trailing cr\r",
    "ünïcødé ☃ 中文 😀",
    "  leading and trailing  ",
    " ",
    '=HYPERLINK("http://x","y")',
    "+1",
    "-2",
    "@SUM(A1)",
    "'already quoted",
    "$(touch PWNED); `touch PWNED`",
    "nel\x85 ls\u2028 ps\u2029",
]
EXPORTS = ["graphml", "json", "csv", "csv-raw", "neuroml", "pynn", "nest",
           "brian2"]


@pytest.fixture(scope="module")
def small_circuit():
    from eidecomp import assemble

    W, _, _ = make_planted_circuit(20, n_untuned=1, n_tuned=4, pool=3, seed=0)
    return assemble(W, baselines=False)


def _ids_with(name, n=20):
    return [name if i % 2 == 0 else f"u{i}" for i in range(n)]


def _e_ids_back(fmt, data, n):
    """The E units' names read back from ``data`` by the format's reader."""
    import io
    import xml.dom.minidom

    import networkx as nx

    if fmt == "graphml":
        xml.dom.minidom.parseString(data)  # well-formed XML 1.0
        G = nx.read_graphml(io.BytesIO(data))
        return [G.nodes[f"E{i}"]["unit_id"] for i in range(n)]
    if fmt == "json":
        G = nx.node_link_graph(json.loads(data.decode("utf-8")), edges="edges")
        return [G.nodes[f"E{i}"]["unit_id"] for i in range(n)]
    if fmt in ("csv", "csv-raw"):
        from eidecomp.export.edges_csv import restore_cell

        undo = str if fmt == "csv-raw" else restore_cell
        rows = csv.DictReader(io.StringIO(data.decode("utf-8"), newline=""))
        seen = {}
        for r in rows:
            for side in ("pre", "post"):
                if r[f"{side}_population"] == "E":
                    seen[int(r[side][1:])] = undo(r[f"{side}_unit_id"])
        assert sorted(seen) == list(range(n))  # every E unit has a synapse
        return [seen[i] for i in range(n)]
    if fmt == "neuroml":
        import xml.etree.ElementTree as ET

        from neuroml.nml.nml import parseString

        xml.dom.minidom.parseString(data)
        root = ET.fromstring(data)
        ns = {"n": root.tag.split("}")[0].strip("{")}
        by_etree = json.loads(root.find(".//n:population[@id='E']/n:notes",
                                        ns).text)["unit_ids"]
        doc = parseString(data.decode("utf-8"), silence=True)
        (pop,) = [p for p in doc.networks[0].populations if p.id == "E"]
        assert json.loads(pop.notes)["unit_ids"] == by_etree
        return by_etree
    (npz,) = [k for k in data if k.endswith(".npz")]
    with np.load(io.BytesIO(data[npz]), allow_pickle=False) as z:
        return z["unit_ids"].tolist()


@pytest.mark.parametrize("fmt", EXPORTS)
@pytest.mark.parametrize("name", NAMES, ids=[repr(n) for n in NAMES])
def test_names_round_trip_exactly(small_circuit, name, fmt):
    from eidecomp.export import render

    if fmt == "neuroml":
        require("neuroml")
    ids = _ids_with(name)
    data = render(fmt.split("-")[0], small_circuit, unit_ids=ids,
                  raw_csv=fmt == "csv-raw")
    assert _e_ids_back(fmt, data, 20) == ids
    if isinstance(data, dict):  # names never enter the script's source
        plain = render(fmt, small_circuit)
        for k in data:
            if k.endswith(".py"):
                assert data[k] == plain[k]
                compile(data[k], k, "exec")


BAD_NAMES = ["a\x01b", "nul\x00", "esc\x1b[31m", "\ud800", "\ufffe", "\x7f ok\x0b"]


@pytest.mark.parametrize("fmt", ["graphml", "json", "csv", "neuroml", "pynn",
                                 "nest", "brian2"])
@pytest.mark.parametrize("bad", BAD_NAMES, ids=[repr(n) for n in BAD_NAMES])
def test_names_xml_cannot_hold_are_refused(small_circuit, bad, fmt):
    """A character outside XML 1.0's Char production (W3C XML 1.0, 2.2)
    reaching a writer through the library API is refused, naming the unit
    (U+007F is a legal XML char: the vertical tab after it is not)."""
    from eidecomp.errors import InputError
    from eidecomp.export import render

    if fmt == "neuroml":
        require("neuroml")
    ids = [f"u{i}" for i in range(20)]
    ids[3] = bad
    with pytest.raises(InputError) as exc:
        render(fmt, small_circuit, unit_ids=ids)
    msg = str(exc.value)
    assert msg.startswith(f"unit 3 ({bad!r}): U+") and "\n" not in msg


def test_graphml_refuses_any_text_xml_cannot_hold():
    """A graph built by hand with a control character in an attribute: the
    GraphML writer refuses it rather than write a file Python's XML parser
    rejects."""
    import xml.dom.minidom

    import networkx as nx

    from eidecomp.errors import InputError
    from eidecomp.export.graph_files import to_graphml_bytes

    G = nx.DiGraph()
    G.add_node("a", label="ok\r\n")
    xml.dom.minidom.parseString(to_graphml_bytes(G))
    G.add_node("b", label="bell\x07")
    with pytest.raises(InputError, match=r"^node b label \('bell\\x07'\): U\+0007"):
        to_graphml_bytes(G)


def test_export_command_csv_injection_and_raw(tmp_path):
    """Through the bundle and run_export: the neutralised and the raw CSV
    (OWASP "CSV Injection"), read by Python's csv module."""
    from eidecomp.pipeline import run_export

    W, _, features = make_planted_circuit(20, n_untuned=1, n_tuned=4, pool=3,
                                          seed=0)
    np.save(tmp_path / "w.npy", W)
    names = [f"=cmd{i}" if i % 2 else f"@u{i}" for i in range(20)]
    with open(tmp_path / "u.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["id", "feature"])
        w.writerows(zip(names, features, strict=True))
    assert main(["run", str(tmp_path / "w.npy"), "--units",
                 str(tmp_path / "u.csv"), "-o", str(tmp_path / "c"), "-q"]) == 0
    for raw in (False, True):
        out = tmp_path / f"e{raw}.csv"
        run_export(tmp_path / "c", "csv", out, raw_csv=raw)
        with open(out, newline="", encoding="utf-8") as fh:
            got = {int(r["pre"][1:]): r["pre_unit_id"] for r in csv.DictReader(fh)
                   if r["pre_population"] == "E"}
        assert got and all(v == ("" if raw else "'") + names[k]
                           for k, v in got.items())


# --- provenance: what --force does replace (issue 28) -------------------------
# Reference: the README's "Provenance" table; each digest recomputed here with
# Python's hashlib.sha256 over the bytes the README names.

def _hash_trailer_digest(data, head):
    """(recorded digest, SHA-256 by hashlib of the bytes before the stamp)."""
    at = data.rindex(head)
    return data[at + len(head):].strip()[:64].decode(), \
        hashlib.sha256(data[:at]).hexdigest()


@pytest.mark.parametrize("fmt", ["graphml", "json", "csv", "populations",
                                 "neuroml", "nest", "brian2", "pynn"])
def test_every_export_is_stamped_and_replaced_by_force(small_bundle, tmp_path,
                                                       fmt):
    from eidecomp.export import get_format
    from eidecomp.io.provenance import canonical_json

    spec = get_format(fmt)
    if spec.requires:
        pytest.importorskip(spec.requires)
    out = tmp_path / f"x{spec.suffix}"
    argv = ["export", str(small_bundle), "--format", fmt, "-o", str(out), "-q"]
    assert main(argv) == 0
    if spec.folder:
        manifest = json.loads((out / "eidecomp-manifest.json").read_text())
        listed = manifest.pop("sha256")
        stamp_ = manifest.pop("eidecomp_provenance")["sha256"]
        assert sorted(listed) == sorted(p.name for p in out.iterdir()
                                        if p.name != "eidecomp-manifest.json")
        for name, digest in listed.items():
            assert hashlib.sha256((out / name).read_bytes()).hexdigest() == digest
        assert stamp_ == hashlib.sha256(canonical_json(
            {**manifest, "sha256": listed})).hexdigest()
    else:
        data = out.read_bytes()
        if fmt == "json":
            doc = json.loads(data)
            recorded = doc.pop("eidecomp_provenance")["sha256"]
            assert recorded == hashlib.sha256(json.dumps(
                doc, sort_keys=True, separators=(",", ":")).encode()).hexdigest()
        else:
            head = (b"<!-- eidecomp provenance sha256:" if fmt in ("graphml",
                                                                   "neuroml")
                    else b"# eidecomp provenance sha256:")
            recorded, computed = _hash_trailer_digest(data, head)
            assert recorded == computed
    first = _listing(tmp_path)
    assert main(argv + ["--force"]) == 0                    # unedited: replaced
    assert [p for p, _ in _listing(tmp_path)] == [p for p, _ in first]


def test_force_replaces_an_unedited_export_of_another_format(small_bundle,
                                                             tmp_path):
    """The rule is provenance, not format: an unedited eidecomp CSV may be
    replaced by the JSON export written to the same name."""
    out = tmp_path / "graph.out"
    assert main(["export", str(small_bundle), "--format", "csv", "-o",
                 str(out), "-q"]) == 0
    assert main(["export", str(small_bundle), "--format", "json", "-o",
                 str(out), "-q", "--force"]) == 0
    assert out.read_bytes().startswith(b"{")


def test_a_reindented_manifest_is_still_read(small_bundle, tmp_path):
    """The manifest's stamp is over its canonical form (README), so a
    pretty-printer that changes only whitespace leaves it valid."""
    c = tmp_path / "c"
    shutil.copytree(small_bundle, c)
    doc = json.loads((c / "circuit.json").read_text())
    (c / "circuit.json").write_text(json.dumps(doc, indent=7))
    assert main(["export", str(c), "--format", "csv", "-o",
                 str(tmp_path / "e.csv"), "-q"]) == 0


def test_the_report_and_its_figures_are_stamped(small_bundle, tmp_path):
    from eidecomp.io.provenance import unedited_file, unedited_folder

    page = tmp_path / "r.html"
    assert main(["report", str(small_bundle), "-o", str(page), "-q"]) == 0
    recorded, computed = _hash_trailer_digest(
        page.read_bytes(), b"<!-- eidecomp provenance sha256:")
    assert recorded == computed
    assert unedited_file(page) is None
    assert unedited_folder(tmp_path / "r-figures") is None
    assert main(["report", str(small_bundle), "-o", str(page), "-q",
                 "--force"]) == 0


def test_library_writers_stamp_what_they_write(small_circuit, tmp_path):
    """Files written through the Python API carry the same stamp, so the
    command may later replace them."""
    from eidecomp.export import write_edge_csv, write_graphml, write_json
    from eidecomp.graph import neuron_graph
    from eidecomp.io.provenance import unedited_file

    G = neuron_graph(small_circuit)
    for write, name in ((write_graphml, "g.graphml"), (write_json, "g.json"),
                        (write_edge_csv, "e.csv")):
        write(G, tmp_path / name)
        assert unedited_file(tmp_path / name) is None, name


# --- the last tracebacks: standard output, encodings, a deleted folder ---------
# (issue 28). References: POSIX (EPIPE on a closed pipe, ENOSPC from
# /dev/full, getcwd(3) failing with ENOENT once the folder is removed) and
# Python's codecs (an ASCII stream cannot encode U+00F1; a name that is not
# UTF-8 decodes to lone surrogates, PEP 383).

def _child(args, cwd, stdout=subprocess.PIPE, env=None):
    run = subprocess.run([sys.executable, "-m", "eidecomp.cli", *args], cwd=cwd,
                         stdout=stdout, stderr=subprocess.PIPE, timeout=600,
                         env=None if env is None else {**os.environ, **env},
                         preexec_fn=_default_signals)
    return run.returncode, run.stderr.decode("utf-8", "replace")


def test_a_full_stdout_says_what_was_written(small_bundle, tmp_path):
    with open("/dev/full", "wb") as full:
        code, err = _child(["export", str(small_bundle), "--format", "csv",
                            "-o", "e.csv"], tmp_path, stdout=full)
    assert code == 3                       # written, its summary lost
    assert err == ("eidecomp: standard output could not take the summary "
                   "(No space left on device); the output was written to "
                   "e.csv\n")
    assert (tmp_path / "e.csv").is_file()


def test_a_closed_pipe_says_what_was_written(small_bundle, tmp_path):
    proc = subprocess.Popen([sys.executable, "-m", "eidecomp.cli", "export",
                             str(small_bundle), "--format", "json", "-o",
                             "g.json"], cwd=tmp_path, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE,
                            preexec_fn=_default_signals)
    proc.stdout.close()              # the reader has gone (like `| head -0`)
    with proc.stderr:
        err = proc.stderr.read().decode()
    assert proc.wait(timeout=600) == 3
    assert err == ("eidecomp: standard output could not take the summary "
                   "(Broken pipe); the output was written to g.json\n")
    assert (tmp_path / "g.json").is_file()


def test_an_ascii_locale_shows_a_non_ascii_name_escaped(small_bundle, tmp_path):
    code, err = _child(["export", str(small_bundle), "--format", "csv", "-o",
                        "ma\u00f1ana.csv"], tmp_path,
                       env={"PYTHONIOENCODING": "ascii:strict"})
    assert (code, err) == (0, "")
    assert (tmp_path / "ma\u00f1ana.csv").is_file()


def test_a_name_that_is_not_utf8_reaches_the_report(tmp_path, capsys):
    name = os.fsdecode(b"w\xff.npy")               # a lone surrogate, PEP 383
    W = np.random.default_rng(0).normal(size=(12, 12))
    np.fill_diagonal(W, 0)
    with open(tmp_path / name, "wb") as fh:
        np.save(fh, W)
    capsys.readouterr()
    assert main(["run", str(tmp_path / name), "-o", str(tmp_path / "c"),
                 "-q", "--report"]) == 0
    page = (tmp_path / "c" / "report.html").read_bytes()
    assert b"w\\udcff.npy" in page                 # shown escaped, not lost


def test_a_deleted_working_folder_is_one_line(small_bundle, tmp_path):
    here = tmp_path / "gone"
    here.mkdir()
    proc = subprocess.Popen(
        [sys.executable, "-c", "import os, sys\nos.rmdir(os.getcwd())\n"
         "from eidecomp.cli import main\nsys.exit(main(sys.argv[1:]))",
         "export", str(small_bundle), "--format", "csv", "-o", "e.csv"],
        cwd=here, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
        preexec_fn=_default_signals)
    out, err = proc.communicate(timeout=600)
    assert proc.returncode == 2
    assert err.decode() == ("eidecomp: error: e.csv: the current folder was "
                            "deleted, so a relative path names no place; give "
                            "an absolute one\n")


# --- starting: an interrupt or a failed import before eidecomp is loaded -----
# References: POSIX setrlimit(RLIMIT_AS) (an mmap beyond it fails, so a
# shared library cannot be mapped) and signal delivery (SIGINT raises
# KeyboardInterrupt in Python's main thread).

_LAUNCH = "import sys, eidecomp_launch\nsys.exit(eidecomp_launch.main())"


def test_too_little_memory_to_start_is_one_line(tmp_path):
    import resource

    def limited():
        _default_signals()
        resource.setrlimit(resource.RLIMIT_AS, (50_000 * 1024,) * 2)

    run = subprocess.run([sys.executable, "-c", _LAUNCH, "run", "w.csv", "-o",
                          "c"], cwd=tmp_path, capture_output=True, text=True,
                         preexec_fn=limited, timeout=120,
                         env={**os.environ, "OPENBLAS_NUM_THREADS": "1"})
    assert run.returncode == 1
    (line,) = run.stderr.splitlines()
    assert line.startswith("eidecomp: error: cannot start (")
    assert line.endswith("or a broken installation (install eidecomp again)")
    assert not any(tmp_path.iterdir())


def test_an_interrupt_while_starting_is_one_line(tmp_path):
    """The import of eidecomp.cli is held (a meta-path finder that waits) so
    that SIGINT lands inside it, as Ctrl-C during a slow start does."""
    hold = ("import sys, time\n"
            "class Hold:\n"
            "    def find_spec(self, name, path=None, target=None):\n"
            "        if name == 'eidecomp.cli':\n"
            "            print('loading', file=sys.stderr, flush=True)\n"
            "            time.sleep(60)\n"
            "sys.meta_path.insert(0, Hold())\n")
    proc = subprocess.Popen([sys.executable, "-c", hold + _LAUNCH, "run",
                             "w.csv", "-o", "c"], cwd=tmp_path,
                            stderr=subprocess.PIPE, text=True,
                            preexec_fn=_default_signals)
    assert proc.stderr.readline() == "loading\n"
    proc.send_signal(signal.SIGINT)
    with proc.stderr:
        rest = proc.stderr.read()
    assert proc.wait(timeout=60) == 130
    assert rest == "eidecomp: interrupted while starting; nothing written\n"
    assert not any(tmp_path.iterdir())


# --- found by the adversarial pass over the provenance change (issue 28) ------

def test_a_closed_stdout_descriptor_is_one_line(small_bundle, tmp_path):
    """stdout closed before Python starts (`>&-`: sys.stdout is None)."""
    def closed():
        _default_signals()
        os.close(1)

    run = subprocess.run([sys.executable, "-m", "eidecomp.cli", "export",
                          str(small_bundle), "--format", "csv", "-o", "e.csv"],
                         cwd=tmp_path, stderr=subprocess.PIPE, text=True,
                         preexec_fn=closed, timeout=600)
    assert run.returncode == 3
    assert run.stderr == ("eidecomp: standard output could not take the "
                          "summary (it is closed); the output was written to "
                          "e.csv\n")


def test_a_report_page_name_that_is_not_utf8(small_bundle, tmp_path):
    """The figure links of a page named with bytes that are not UTF-8 are
    percent-encoded from those bytes (RFC 3986), so they open the files."""
    from urllib.parse import unquote_to_bytes

    page = tmp_path / os.fsdecode(b"p\xfd.html")
    assert main(["report", str(small_bundle), "-o", str(page), "-q"]) == 0
    links = re.findall(r"href='([^']+\.svg)'", page.read_text("utf-8", "replace"))
    assert links
    for link in links:
        assert (tmp_path / os.fsdecode(unquote_to_bytes(link))).is_file()


def test_a_refused_write_leaves_a_leftover_lookalike_alone(tmp_path, capsys):
    """The temporary copies of killed runs are swept only when the write goes
    ahead: a refusal changes nothing, even a folder named like one."""
    w = _small_matrix(tmp_path)
    assert main(["run", str(w), "-o", str(tmp_path / "B"), "-q"]) == 0
    look = tmp_path / f".B.eidecomp-{_dead_pid()}-abcdefgh.partial"
    look.mkdir()
    (look / "thesis.tex").write_text("mine")
    before = _listing(tmp_path)
    capsys.readouterr()
    assert main(["run", str(w), "-o", str(tmp_path / "B"), "-q"]) == 2
    assert _listing(tmp_path) == before


def test_an_unreadable_file_inside_our_folder_is_one_line(small_bundle,
                                                          tmp_path, capsys):
    """A file of an eidecomp folder that cannot be read is reported, not a
    traceback (the read fails as the kernel fails it: open(2) EACCES)."""
    import builtins

    c = tmp_path / "c"
    shutil.copytree(small_bundle, c)
    real_open = builtins.open
    target = str(c / "J_EE.npy")

    def failing(path, *a, **k):
        if str(path) == target:
            raise PermissionError(errno.EACCES, "Permission denied", target)
        return real_open(path, *a, **k)

    w = _small_matrix(tmp_path)
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(builtins, "open", failing)
        capsys.readouterr()
        assert main(["run", str(w), "-o", str(c), "-q", "--force"]) == 2
    assert _err_lines(capsys) == [
        f"eidecomp: error: {c}: 'J_EE.npy' cannot be read to check it "
        "(Permission denied); not replaced"]


def test_a_large_stamped_file_is_checked_in_a_stream(tmp_path):
    """A trailing stamp is verified by hashing blocks, not by reading the
    file whole (checked here against hashlib over a 64 MiB file)."""
    from eidecomp.io.provenance import stamp, unedited_file

    body = np.random.default_rng(0).bytes(64 << 20)
    path = tmp_path / "big.csv"
    path.write_bytes(stamp(body, "hash"))
    assert unedited_file(path) is None
    with open(path, "r+b") as fh:
        fh.seek(1 << 20)
        fh.write(b"x")
    assert unedited_file(path).startswith("edited after eidecomp wrote it")


# --- the Python API's inputs: labels and masks it must not drop (issue 28) ----
# References: numpy.ma (np.asarray of a MaskedArray returns the data under
# the mask), pandas (a DataFrame's index labels the rows, its columns the
# columns; NaN is a float label), against the W[post, pre] convention.

def _api_w():
    W = np.random.default_rng(0).normal(size=(5, 5))
    np.fill_diagonal(W, 0.0)
    return W


@pytest.mark.parametrize("call", ["robust_pca", "assemble"])
def test_a_masked_array_is_not_read_as_its_data(call):
    import eidecomp

    W = np.ma.masked_array(_api_w(), mask=np.eye(5, dtype=bool))
    with pytest.raises(InputError, match=r"^W is a masked array with 5 masked "
                                         r"entries"):
        getattr(eidecomp, call)(W)
    full = np.ma.masked_array(_api_w())          # nothing masked: its data
    assert eidecomp.robust_pca(full).rank == eidecomp.robust_pca(_api_w()).rank


@pytest.mark.parametrize("call", ["robust_pca", "assemble"])
def test_columns_in_another_order_than_the_index_are_refused(call):
    pd = pytest.importorskip("pandas")
    import eidecomp

    W = pd.DataFrame(_api_w(), index=list("abcde"), columns=list("edcba"))
    with pytest.raises(InputError, match="in another order"):
        getattr(eidecomp, call)(W)


def test_a_nan_label_is_refused():
    pd = pytest.importorskip("pandas")
    import eidecomp

    labels = ["a", "b", float("nan"), "d", "e"]
    W = pd.DataFrame(_api_w(), index=labels, columns=labels)
    with pytest.raises(InputError, match="^W: the label of row 2 is NaN"):
        eidecomp.robust_pca(W)


# --- which entries count: one check for the library and the command (issue 28)
# Reference: the project's own text (a consistency check, no outside
# source): the W[post, pre] convention and the names' own meaning:
# ``observed=`` is True where observed; the command's file is 1 where
# unobserved (README, "Decomposing a matrix").

@pytest.mark.parametrize(("observed", "kwargs", "message"), [
    (np.zeros((5, 5), bool), {}, "^observed leaves no entry of W observed$"),
    (np.eye(5, dtype=bool), {"ignore_diagonal": True},
     "^observed with the diagonal ignored leaves no entry of W observed$"),
    (np.ones((5, 4), bool), {}, r"^observed has shape \(5, 4\) but W has shape "
                                r"\(5, 5\)$"),
    (np.full((5, 5), 2), {}, "^observed must hold only True/False"),
    (np.full((5, 5), "yes"), {}, "^observed must hold only True/False"),
    (np.ones((5, 5, 1), bool), {}, r"^observed has shape \(5, 5, 1\)"),
])
@pytest.mark.parametrize("call", ["robust_pca", "lambda_path", "fit"])
def test_observed_entries_are_checked_in_every_call(call, observed, kwargs,
                                                    message):
    import eidecomp
    from eidecomp.decompose import RobustPCA

    W = _api_w()
    run = {"robust_pca": eidecomp.robust_pca,
           "lambda_path": lambda W, **k: eidecomp.lambda_path(W, n_lams=2, **k),
           "fit": lambda W, **k: RobustPCA().fit(W, **k)}[call]
    with pytest.raises(InputError, match=message):
        run(W, observed=observed, **kwargs)


def test_the_old_mask_keyword_is_not_taken_silently():
    """A script written for the old name fails at once instead of splitting
    with the entries it meant to leave out."""
    import eidecomp

    with pytest.raises(TypeError, match="mask"):
        eidecomp.robust_pca(_api_w(), mask=np.ones((5, 5), bool))


def test_a_folder_split_with_unobserved_entries_assembles_as_the_matrix(tmp_path):
    """``assemble DECOMPOSITION/`` builds the circuit ``assemble W
    --unobserved FILE`` builds: the folder keeps the pattern (observed.npy),
    so the entries left out stay out of the fit."""
    from eidecomp.cli import main

    W, _, _ = make_planted_circuit(40, n_untuned=2, n_tuned=6, pool=3, seed=3)
    hidden = np.zeros(W.shape, int)
    hidden[np.random.default_rng(3).random(W.shape) < 0.05] = 1
    np.save(tmp_path / "w.npy", W)
    np.save(tmp_path / "u.npy", hidden)
    args = ["--unobserved", str(tmp_path / "u.npy"), "-q"]
    assert main(["decompose", str(tmp_path / "w.npy"), "-o",
                 str(tmp_path / "d")] + args) == 0
    assert main(["assemble", str(tmp_path / "d"), "-o", str(tmp_path / "a"),
                 "-q"]) == 0
    assert main(["assemble", str(tmp_path / "w.npy"), "-o",
                 str(tmp_path / "b")] + args) == 0
    for block in ("J_EE", "J_EU", "J_UE", "J_ET", "J_TE"):
        a, b = tmp_path / "a" / f"{block}.npy", tmp_path / "b" / f"{block}.npy"
        assert a.exists() == b.exists(), block
        if a.exists():
            assert np.array_equal(np.load(a), np.load(b)), block
    doc = json.loads((tmp_path / "d" / "summary.json").read_text())
    assert doc["unobserved"]["n_unobserved"] == int(hidden.sum())
    # W's own stability: the same W (observed values, the completion where
    # left out), up to the split's primal residual, by numpy's eigenvalues
    sa, sb = (json.loads((tmp_path / x / "circuit.json").read_text())["stability"]
              for x in "ab")
    assert sa["original_spectral_abscissa"] == pytest.approx(
        sb["original_spectral_abscissa"], rel=1e-6)
    completed = np.where(hidden == 0, W, np.load(tmp_path / "d" / "low_rank.npy")
                         + np.load(tmp_path / "d" / "sparse.npy"))
    assert sb["original_spectral_abscissa"] == pytest.approx(
        np.linalg.eigvals(completed).real.max() - 1.0, rel=1e-9)


def test_observed_from_scipy_sparse_is_its_dense_array():
    """scipy.sparse holds the same booleans as its toarray(); the split is
    the same (reference: scipy.sparse's own toarray)."""
    from scipy import sparse

    import eidecomp

    W = _api_w()
    obs = ~np.eye(5, dtype=bool)
    obs[0, 1] = False
    a = eidecomp.robust_pca(W, observed=obs)
    b = eidecomp.robust_pca(W, observed=sparse.csr_matrix(obs))
    np.testing.assert_array_equal(a.low_rank, b.low_rank)
    np.testing.assert_array_equal(b.observed, obs)


@pytest.mark.parametrize(("observed", "message"), [
    (np.ma.masked_array(np.ones((5, 5), bool), mask=np.eye(5, dtype=bool)),
     "^observed is a masked array with masked entries"),
    ([[True] * 5] * 4 + [[True] * 3], r"^observed is not an array of W's shape"),
])
def test_observed_that_numpy_would_misread_is_refused(observed, message):
    import eidecomp

    with pytest.raises(InputError, match=message):
        eidecomp.robust_pca(_api_w(), observed=observed)


def test_suggest_lam_checks_observed_even_with_a_path_given():
    import eidecomp
    from eidecomp.decompose import suggest_lam

    W = _api_w()
    points, decs = eidecomp.lambda_path(W, n_lams=3)
    with pytest.raises(InputError, match="^observed has shape"):
        suggest_lam(W, decs[1], observed=np.ones((2, 2), bool), points=points)
