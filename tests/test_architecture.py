"""The dependency direction of docs/architecture.md, read from the imports.

cli -> pipeline -> {io, decompose, datasets} -> {types, errors}; numerics never
import the command line or the pipeline, and cvxpy is imported only inside the
convex solver's functions (importing eidecomp stays light).
"""

import ast
import subprocess
import sys
from pathlib import Path

import eidecomp

ROOT = Path(eidecomp.__file__).parent
LOWER = {"types", "errors"}
FORBIDDEN_FROM_NUMERICS = {"cli", "pipeline"}


def _internal_imports(path):
    tree = ast.parse(path.read_text())
    names = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.level > 0:
            mod = (node.module or "").split(".")[0]
            names.add(mod if mod else node.names[0].name)
    return names


def test_numerics_do_not_import_cli_or_pipeline():
    for path in ROOT.rglob("*.py"):
        rel = path.relative_to(ROOT)
        if rel.parts[0] in ("cli.py", "pipeline.py", "__init__.py"):
            continue
        assert not (_internal_imports(path) & FORBIDDEN_FROM_NUMERICS), rel


def test_types_and_errors_import_no_sibling():
    for name in LOWER:
        assert not (_internal_imports(ROOT / f"{name}.py") - {""}), name


def test_import_is_light():
    code = ("import sys, eidecomp; "
            "print(any(m.split('.')[0] in ('cvxpy', 'matplotlib') "
            "for m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True,
                         text=True, check=True).stdout.strip()
    assert out == "False"
