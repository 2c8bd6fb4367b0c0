"""The layering of docs/architecture.md, read from the imports (an allow-list).

Each top-level module or package of eidecomp may import only the siblings
listed for it; the numerics never import the command line, the jobs or the
files on disk (decompose may not import io); no private module or private
name is imported across packages; cvxpy and matplotlib are imported only
inside the functions that need them (importing eidecomp stays light). The
reference is Python's own parser (the ast module) over the source files.
"""

import ast
import re
import subprocess
import sys
from pathlib import Path

import pytest

import eidecomp

ROOT = Path(eidecomp.__file__).parent
DOC = Path(__file__).resolve().parents[1] / "docs" / "architecture.md"
BASE = {"errors", "_version"}


def _blocks():
    """The two code blocks of docs/architecture.md: the map, the allow-list."""
    parts = DOC.read_text().split("```")
    return parts[1], parts[3]


def _allow_list(text):
    """{unit: the siblings it may import} from lines ``unit -> a, b, c``."""
    allowed = {}
    for line in text.strip().splitlines():
        unit, _, targets = line.partition("->")
        allowed[unit.strip()] = BASE | {t.strip() for t in targets.split(",")
                                        if t.strip()}
    return allowed


ALLOWED = _allow_list(_blocks()[1])


def _unit(rel):
    return rel.with_suffix("").parts[0]


def _imports(path):
    """(target parts, imported names) of every relative import in a file."""
    rel = path.relative_to(ROOT)
    package = list(rel.parent.parts)
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.ImportFrom) and node.level > 0:
            base = package[:len(package) - (node.level - 1)]
            names = [a.name for a in node.names]
            if node.module:
                yield base + node.module.split("."), names
            elif base:  # from . import x, inside a package: its modules
                for name in names:
                    yield base + [name], []
            else:  # from . import x at the top: x is a module or a name
                for name in names:
                    yield [name if (ROOT / name).exists()
                           or (ROOT / f"{name}.py").exists() else "__init__"], []


SOURCES = sorted(ROOT.rglob("*.py"))


def test_every_unit_is_listed():
    assert {_unit(p.relative_to(ROOT)) for p in SOURCES} <= set(ALLOWED)


def test_the_allow_list_reads_as_written():
    """The parser of the documented list, on a text written here."""
    assert _allow_list("a ->\nb -> a, c\n") == {"a": BASE, "b": BASE | {"a", "c"}}
    assert ALLOWED["dynamics"] == BASE | {"params", "types"}


def test_the_map_names_every_module():
    """Every module of the package is named in the map of
    docs/architecture.md (the file system, read with pathlib)."""
    names = set(re.findall(r"[\w.]+\.py|\w+/", _blocks()[0]))
    missing = [str(p.relative_to(ROOT)) for p in SOURCES
               if p.name not in names and p.name != "__init__.py"]
    packages = {p.relative_to(ROOT).parts[0] + "/" for p in SOURCES
                if len(p.relative_to(ROOT).parts) > 1}
    assert missing == [] and packages <= names


@pytest.mark.parametrize("path", SOURCES, ids=lambda p: str(p.relative_to(ROOT)))
def test_imports_follow_the_allow_list(path):
    rel = path.relative_to(ROOT)
    unit = _unit(rel)
    for target, _ in _imports(path):
        other = target[0]
        if other == unit:
            continue
        assert other in ALLOWED[unit], f"{rel} imports {'.'.join(target)}"


@pytest.mark.parametrize("path", SOURCES, ids=lambda p: str(p.relative_to(ROOT)))
def test_no_private_import_across_packages(path):
    rel = path.relative_to(ROOT)
    unit = _unit(rel)
    for target, names in _imports(path):
        if target[0] == unit:
            continue
        private = [t for t in target[1:] if t.startswith("_")]
        private += [n for n in names if n.startswith("_") and n != "__version__"]
        assert not private, f"{rel} imports private {private} of {target[0]}"


def test_import_is_light():
    code = ("import sys, eidecomp; "
            "print(any(m.split('.')[0] in ('cvxpy', 'matplotlib') "
            "for m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True,
                         text=True, check=True).stdout.strip()
    assert out == "False"


def test_the_numerics_of_dynamics_name_no_command_line_flag():
    """dynamics.py keeps the numerics: its errors carry data and its words
    name quantities (tau_I, the gain), never an option of the command
    (eidecomp.simulation.advice turns them into commands). Reference: the
    string constants of its syntax tree (Python's ast module)."""
    import re

    tree = ast.parse((ROOT / "dynamics.py").read_text())
    flags = [node.value for node in ast.walk(tree)
             if isinstance(node, ast.Constant) and isinstance(node.value, str)
             and re.search(r"(^|[\s(`'])--[a-z]", node.value)]
    assert flags == []
