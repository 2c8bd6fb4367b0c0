"""The decompose command, called as main([...]) on a temporary folder.

Reference for the numbers it writes: the library call robust_pca on the same
matrix, itself checked against cvxpy and tensorly in the other suites.
"""

import json

import numpy as np
import pytest

from eidecomp import __version__, robust_pca
from eidecomp.cli import main
from eidecomp.datasets import make_planted
from eidecomp.io import file_checksum


@pytest.fixture
def planted(tmp_path):
    W, L0, S0 = make_planted(60, seed=11)
    path = tmp_path / "w.npy"
    np.save(path, W)
    return path, W, L0


def test_decompose_writes_outputs(planted, tmp_path, capsys):
    path, W, L0 = planted
    out = tmp_path / "out"
    assert main(["decompose", str(path), "-o", str(out)]) == 0
    L, S = np.load(out / "low_rank.npy"), np.load(out / "sparse.npy")
    ref = robust_pca(W)
    assert np.array_equal(L, ref.low_rank) and np.array_equal(S, ref.sparse)
    summary = json.loads((out / "summary.json").read_text())
    assert summary["converged"] is True
    assert summary["rank"] == 3
    assert summary["input"]["sha256"] == file_checksum(path)
    assert summary["eidecomp_version"] == __version__
    opt = summary["optimality"]
    assert opt["primal_residual"] < 1e-8
    assert opt["multiplier_spectral_norm"] < 1 + 1e-6
    assert "rank of L" in capsys.readouterr().out


def test_transpose_and_diagonal(planted, tmp_path):
    path, W, _ = planted
    np.save(tmp_path / "wt.npy", W.T)
    a, b = tmp_path / "a", tmp_path / "b"
    assert main(["decompose", str(path), "-o", str(a), "-q",
                 "--ignore-diagonal"]) == 0
    assert main(["decompose", str(tmp_path / "wt.npy"), "-o", str(b), "-q",
                 "--transpose", "--ignore-diagonal"]) == 0
    assert np.array_equal(np.load(a / "low_rank.npy"), np.load(b / "low_rank.npy"))
    doc = json.loads((a / "summary.json").read_text())
    assert doc["unobserved"]["n_unobserved"] == 60


def test_force_needed_to_overwrite(planted, tmp_path, capsys):
    path, _, _ = planted
    out = tmp_path / "out"
    assert main(["decompose", str(path), "-o", str(out), "-q"]) == 0
    before = (out / "summary.json").read_bytes()
    assert main(["decompose", str(path), "-o", str(out), "-q", "--lam", "0.3"]) == 2
    assert "already exists; use --force" in capsys.readouterr().err
    assert (out / "summary.json").read_bytes() == before
    assert main(["decompose", str(path), "-o", str(out), "-q", "--lam", "0.3",
                 "--force"]) == 0
    assert json.loads((out / "summary.json").read_text())["lam"] == 0.3


def _write(tmp_path, name, content):
    p = tmp_path / name
    if isinstance(content, np.ndarray):
        np.save(p, content)
    else:
        p.write_text(content)
    return p


@pytest.mark.parametrize(("name", "content", "extra", "message"), [
    ("missing.npy", None, [], "missing.npy: no such file"),
    ("w.csv", "1,2\n3,abc\n", [], "non-numeric cell 'abc' at row 2, column 2"),
    ("w.csv", "1,2\n3,nan\n", [], "non-finite value"),
    ("w.csv", "1,inf\n3,4\n", [], "non-finite value"),
    ("w.csv", "", [], "file is empty"),
    ("w.npy", np.ones(3), [], "must be 2-D"),
    ("w.npz", None, ["--key", "nope"], "no array named 'nope'"),
    ("w.npy", np.eye(3), ["--lam", "abc"], "argument --lam: not a number"),
    ("w.npy", np.eye(3), ["--lam", "-1"], "must be a positive number"),
    ("w.npy", np.eye(3), ["--method", "magic"], "invalid choice: 'magic'"),
    ("w.npy", np.eye(3), ["--frobnicate"], "unrecognized arguments: --frobnicate"),
    ("w.npy", np.eye(3), ["--unobserved", "MASK"],
     "the file of unobserved entries has shape (2, 2)"),
])
def test_bad_input_one_line_exit_2_nothing_written(tmp_path, capsys, name,
                                                   content, extra, message):
    if name == "w.npz":
        np.savez(tmp_path / name, W=np.eye(3))
        path = tmp_path / name
    elif content is None:
        path = tmp_path / name
    else:
        path = _write(tmp_path, name, content)
    np.save(tmp_path / "MASK.npy", np.zeros((2, 2)))
    extra = [str(tmp_path / "MASK.npy") if e == "MASK" else e for e in extra]
    before = sorted(p.name for p in tmp_path.iterdir())
    code = main(["decompose", str(path), "-o", str(tmp_path / "out")] + extra)
    err = capsys.readouterr().err
    assert code == 2
    assert message in err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err
    assert sorted(p.name for p in tmp_path.iterdir()) == before


def test_decompose_takes_a_rectangular_matrix_run_does_not(tmp_path, capsys):
    """PCP is defined for any m x n matrix (Candes, Li, Ma, Wright 2011,
    eq. 1.1, default lam 1/sqrt(max(m, n))); a circuit needs one set of
    neurons, so ``run`` refuses the same file in one line."""
    from eidecomp import robust_pca

    rng = np.random.default_rng(3)
    W = rng.standard_normal((30, 2)) @ rng.standard_normal((2, 45))
    np.save(tmp_path / "w.npy", W)
    assert main(["decompose", str(tmp_path / "w.npy"), "-o",
                 str(tmp_path / "d"), "-q"]) == 0
    ref = robust_pca(W)
    got = np.load(tmp_path / "d" / "low_rank.npy")
    assert got.shape == (30, 45)
    assert np.array_equal(got, ref.low_rank)
    summary = json.loads((tmp_path / "d" / "summary.json").read_text())
    assert summary["lam"] == 1 / np.sqrt(45)
    capsys.readouterr()
    assert main(["run", str(tmp_path / "w.npy"), "-o", str(tmp_path / "c"),
                 "-q"]) == 2
    err = capsys.readouterr().err
    assert err == (f"eidecomp: error: {tmp_path / 'w.npy'}: weight matrix must "
                   "be square (W[post, pre] among one set of neurons), got shape "
                   "(30, 45)\n")


def test_iteration_limit_warns_and_records(planted, tmp_path, capsys):
    path, _, _ = planted
    out = tmp_path / "out"
    assert main(["decompose", str(path), "-o", str(out), "-q",
                 "--max-iter", "3"]) == 0
    assert "stopped after 3 iterations" in capsys.readouterr().err
    summary = json.loads((out / "summary.json").read_text())
    assert summary["converged"] is False
    assert summary["optimality"]["converged"] is False


def test_target_rank_and_convex(planted, tmp_path):
    path, _, _ = planted
    assert main(["decompose", str(path), "-o", str(tmp_path / "r"), "-q",
                 "--target-rank", "2"]) == 0
    assert json.loads((tmp_path / "r" / "summary.json").read_text())["rank"] == 2
    small = tmp_path / "small.npy"
    np.save(small, make_planted(20, rank=2, seed=1)[0])
    assert main(["decompose", str(small), "-o", str(tmp_path / "c"), "-q",
                 "--method", "convex"]) == 0
    assert main(["decompose", str(small), "-o", str(tmp_path / "f"), "-q"]) == 0
    fast = json.loads((tmp_path / "f" / "summary.json").read_text())
    exact = json.loads((tmp_path / "c" / "summary.json").read_text())
    assert exact["optimality"]["solver"] == "CLARABEL"
    assert exact["objective"] == pytest.approx(fast["objective"], rel=1e-6)
    ranked = json.loads((tmp_path / "r" / "summary.json").read_text())
    assert ranked["parameters"]["target_rank"] == 2


def test_builtin_example(tmp_path):
    out = tmp_path / "ex"
    assert main(["decompose", "example", "-o", str(out), "-q",
                 "--ignore-diagonal"]) == 0
    summary = json.loads((out / "summary.json").read_text())
    assert summary["converged"] and summary["rank"] == 3


# --- every option's help states its default and its unit -------------------------
# Reference: argparse's own record of each option (its Action objects: the
# default it applies, whether it is required): the help must say what
# argparse will do when the option is left out.

def _subcommands():
    from eidecomp.cli import _get_parser

    return _get_parser().subcommands


def _shown(value):
    return f"{value:g}" if isinstance(value, float) else str(value)


@pytest.mark.parametrize("command", sorted(_subcommands()))
def test_help_states_every_default(command):
    import argparse

    for a in _subcommands()[command]._actions:
        if (not a.option_strings or a.required or a.default is False
                or isinstance(a, argparse._HelpAction)):
            continue
        h, name = " ".join((a.help or "").split()), a.option_strings[-1]
        assert "default" in h, (command, name, h)
        if a.default is not None:
            v = _shown(a.default)
            assert (f"default {v}" in h or f"{v} (default" in h
                    or f"'{v}' (default" in h
                    or f"(default: {v}" in h or f"default: {v}" in h), \
                (command, name, a.default, h)


UNITS = {"--tau-e": "ms", "--tau-i": "ms", "--duration": "ms",
         "--period": "degrees", "--magnification": "micrometres per degree"}


@pytest.mark.parametrize("command", sorted(_subcommands()))
def test_help_states_every_unit(command):
    for a in _subcommands()[command]._actions:
        for flag in a.option_strings:
            if flag in UNITS:
                assert UNITS[flag] in " ".join(a.help.split()), (command, flag)


# --- --force: one rule, in the same words in the README and every --help ------
# Reference: the project's own text (a consistency check, no outside
# source): the README's sentence (issue 28: one owner for the text).

def test_force_is_explained_in_the_same_words_everywhere():
    from pathlib import Path

    from eidecomp.io.staging import FORCE_RULE

    readme = (Path(__file__).parents[1] / "README.md").read_text("utf-8")
    assert f"`--force`: {FORCE_RULE}." in readme
    seen = 0
    for command, parser in _subcommands().items():
        for a in parser._actions:
            if "--force" in a.option_strings:
                assert a.help == FORCE_RULE, command
                seen += 1
    assert seen >= 6          # decompose, assemble, run, export, report, demo


# --- -q: one rule, in the same words in the README and every --help ----------
# Reference: the project's own text (a consistency check, no outside
# source): the README's sentence (issue 28: `-q` said "progress only" and
# still printed the summary).

def test_quiet_is_explained_in_the_same_words_everywhere():
    from pathlib import Path

    from eidecomp.cli import QUIET_RULE

    readme = (Path(__file__).parents[1] / "README.md").read_text("utf-8")
    assert f"`-q`: {QUIET_RULE}." in readme
    helps = {command: a.help for command, parser in _subcommands().items()
             for a in parser._actions if "-q" in a.option_strings}
    assert set(helps) == set(_subcommands())       # every command takes -q
    for command, text in helps.items():
        if command == "simulate":                 # its printed lines are its result
            assert "still printed" in text
        else:
            assert text == QUIET_RULE, command


def test_quiet_prints_nothing_but_writes_everything(tmp_path, capsys):
    """With -q the output is written as without it, nothing reaches
    standard output, and standard error holds warnings alone."""
    W, _, _ = make_planted(40, rank=2, corruption=0.05, seed=2)
    np.fill_diagonal(W, 0.0)
    np.save(tmp_path / "w.npy", W)
    d, c = str(tmp_path / "d"), str(tmp_path / "c")
    runs = [["decompose", str(tmp_path / "w.npy"), "-o", d],
            ["run", str(tmp_path / "w.npy"), "-o", c, "--ei-ratio", "4:1"],
            ["assemble", d, "-o", str(tmp_path / "c2")],
            ["export", c, "--format", "graphml", "-o", str(tmp_path / "g.graphml")],
            ["report", c, "-o", str(tmp_path / "r.html")]]
    for argv in runs:
        capsys.readouterr()
        assert main(argv + ["-q"]) == 0, argv
        out, err = capsys.readouterr()
        assert out == "", argv
        assert all(line.startswith("eidecomp: warning: ")
                   for line in err.splitlines()), argv   # warnings only
    for name in ("d", "c", "c2", "g.graphml", "r.html"):
        assert (tmp_path / name).exists(), name


# --- the exit statuses: one text, the README's and every --help's ------------
# Reference: the project's own text (a consistency check, no outside
# source): the README's sentence (issue 28: one owner for the text).

def test_exit_statuses_are_stated_in_the_same_words_everywhere():
    from pathlib import Path

    from eidecomp.cli import EXIT_RULE, _get_parser

    readme = (Path(__file__).parents[1] / "README.md").read_text("utf-8")
    assert f"\n{EXIT_RULE}." in readme
    parser = _get_parser()
    for command, sub in {"eidecomp": parser, **_subcommands()}.items():
        assert sub.epilog == EXIT_RULE, command
        assert " ".join(EXIT_RULE.split()) in " ".join(sub.format_help().split())
    for status in ("0", "1", "2", "3", "129", "130", "143"):
        assert f" {status}" in EXIT_RULE


def test_export_help_lists_every_format_with_its_registry_line():
    """The export registry is the one owner of each format's help (issue 30:
    --help listed 3 of the 8); reference: the registry's own entries."""
    from eidecomp.export import REGISTRY

    text = " ".join(_subcommands()["export"].format_help().split())
    for f in REGISTRY:
        assert f"{f.name}: {' '.join(f.help.split())}" in text, f.name


def test_a_report_written_with_its_bundle_names_the_version(tmp_path):
    """run --report renders the page before the bundle exists; the version
    shown is the one that writes it (reference: eidecomp.__version__)."""
    import html

    W, _, _ = make_planted(30, rank=2, corruption=0.05, seed=4)
    np.save(tmp_path / "w.npy", W)
    assert main(["run", str(tmp_path / "w.npy"), "-o", str(tmp_path / "c"),
                 "--report", "-q"]) == 0
    page = html.unescape((tmp_path / "c" / "report.html").read_text("utf-8"))
    assert f"<td>eidecomp</td><td>{__version__}</td>" in page.replace("\n", "")


def test_the_solver_is_recorded_only_where_one_ran(planted, tmp_path):
    """summary.json names a cvxpy solver for the convex method and none for
    the ALM (issue 30: CLARABEL was recorded for ialm runs); reference:
    cvxpy's installed solvers (cvxpy.installed_solvers)."""
    import cvxpy as cp

    path, _, _ = planted
    assert main(["decompose", str(path), "-o", str(tmp_path / "a"), "-q"]) == 0
    doc = json.loads((tmp_path / "a" / "summary.json").read_text())
    assert doc["parameters"]["method"] == "ialm"
    assert doc["parameters"]["solver"] is None
    small = tmp_path / "s.npy"
    np.save(small, make_planted(20, seed=2)[0])
    assert main(["decompose", str(small), "-o", str(tmp_path / "b"), "-q",
                 "--method", "convex"]) == 0
    doc = json.loads((tmp_path / "b" / "summary.json").read_text())
    assert doc["parameters"]["solver"] in cp.installed_solvers()
