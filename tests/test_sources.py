"""Every outside reference in the tests and the docs carries its source.

The project's rule: a paper's equation, table, theorem, section or figure,
a citation by author, a quoted fact of the trade (a range of a biophysical
quantity such as "85-114 um", a ratio such as "about twice") and a fact a
test takes as its reference name where they come from, within a few lines:
a citation with a year (``Candes et al. 2011``, ``Walker and Ni (2011)``),
a reference library (numpy, scipy, cvxpy, ...), the script that measured
it (``measured by benchmarks/...``), or the words "common practice" (a fact
of the trade, no source named) or "from memory" (recalled, not checked).

The check is textual, so it can only catch a missing label, not a wrong
one: the labels themselves were checked by hand (the commit log says how).
Reference: Python's ``re`` module for the patterns; the self-tests below
run the same scanner on synthetic text, so the check is seen to fail.
"""

import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
WINDOW = 3  # lines either side of a reference where its label may stand

# What makes a line an outside reference.
_NAME = r"[A-Z][A-Za-z'\-]+"
TRIGGERS = [
    ("equation", r"\b(?:[Ee]q\.|[Ee]qs\.|[Ee]quation)\s*\(?\d"),
    ("table", r"\bTable\s+\d"),
    ("theorem", r"\b(?:Theorem|Lemma|Proposition|Corollary)\s+\d"),
    ("section", r"\b[Ss]ection\s+\d"),
    ("figure", r"\b(?:Fig\.|Figs\.|Figure)\s*\d"),
    ("author", rf"\b{_NAME} et al\b|\b{_NAME} (?:&|and) {_NAME} \(?(?:1[89]|20)\d\d"),
    ("reference", r"\bReferences?:"),
    # a quoted fact of the trade: a range of a biophysical quantity, or a
    # ratio ("about twice", "about 2x")
    ("quantity", r"\b\d+(?:\.\d+)?\s*(?:-|to)\s*\d+(?:\.\d+)?\s*"
                 r"(?:um|mV|nA|nF|Hz)\b|\babout (?:\d+(?:\.\d+)?\s*(?:x|times)\b"
                 r"|twice\b)"),
]

# What labels it.
LABELS = [
    ("citation", rf"{_NAME}(?:(?:,| and| &| et al\.?)\s?(?:{_NAME})?){{0,6}},?\s\(?"
                 r"(?:1[89]|20)\d\d[a-z]?\b"),
    ("common practice", r"common practice"),
    ("from memory", r"from memory"),
    ("library", r"\b(?:numpy|NumPy|scipy|SciPy|cvxpy|CVXPY|Clarabel|SCS|"
                r"scikit-learn|sklearn|tensorly|TensorLy|NEST|nest\.|Brian2|"
                r"brian2|PyNN|pyNN|libNeuroML|neuroml|NeuroML|networkx|"
                r"NetworkX|matplotlib|dask|threadpoolctl|hypothesis|pandas|"
                r"Python's|argparse|zarr|LAPACK|OpenBLAS|Unicode)\b"),
    ("standard", r"\b(?:POSIX|RFC \d+|W3C|XML 1\.0|NEP \d+)"),
    # a consistency check whose reference is the project's own text says so
    ("own text", r"the project's own"),
    # a figure the project measured itself names the script that measures it
    ("own measurement", r"measured (?:by|with|in) `?benchmarks/\w+\.py"),
]

_TRIGGERS = [(name, re.compile(p)) for name, p in TRIGGERS]
_LABELS = [(name, re.compile(p)) for name, p in LABELS]

# Files scanned: this file holds unlabelled references on purpose (the
# self-tests), so it is left out.
SELF = Path(__file__).resolve()


def unlabelled(text, window=WINDOW):
    """[(line number, trigger, line)] of references with no label within
    ``window`` lines either side."""
    lines = [_bare(x) for x in text.splitlines()]
    found = []
    for i, line in enumerate(lines):
        # a reference broken over two lines ("section\n2.1") starts here
        ahead = line + " " + (lines[i + 1] if i + 1 < len(lines) else "")
        for name, pattern in _TRIGGERS:
            if any(m.start() < len(line) for m in pattern.finditer(ahead)):
                lo, hi = max(0, i - window), min(len(lines), i + window + 1)
                # joined, so that a citation broken over two lines counts
                if not any(p.search(" ".join(lines[lo:hi]))
                           for _, p in _LABELS):
                    found.append((i + 1, name, line))
                break
    return found


def _bare(line):
    """The line without its indent and comment or docstring marks."""
    return re.sub(r"^\s*(?:#+|//|\*|\"\"\"|>)?\s*", "", line).rstrip()


def scanned_files():
    files = sorted(p for p in (ROOT / "tests").glob("*.py")
                   if p.resolve() != SELF)
    files += sorted((ROOT / "docs").glob("*.md"))
    files += sorted((ROOT / "benchmarks").glob("*.py"))
    files.append(ROOT / "README.md")
    return files


# --- the scanner on synthetic text ----------------------------------------


@pytest.mark.parametrize(("text", "caught"), [
    # unlabelled: each must be caught
    ("# the bound of eq. 4 holds here", "equation"),
    ("the weight of their Theorem 1.2 is larger", "theorem"),
    ("as in Table 1, rank 0.05 n", "table"),
    ("the certificate of section 2.1", "section"),
    ("like-to-like about twice as often (Fig. 3)", "figure"),
    ("the stable program of Zhou et al., eq. 4", "equation"),
    ("the schedule of Lin et al. is used", "author"),
    ("# Reference: the value recorded in the notes", "reference"),
    ("sigma within the 85-114 um of the literature", "quantity"),
    ("same-feature pairs connect about twice as often", "quantity"),
    ("rates of 140-300 Hz at the operating point", "quantity"),
    # labelled: none may be caught
    ("the weight of Candes et al. 2011, Theorem 1.1", None),
    ("Walker and Ni (2011), section 3", None),
    ("Candes, Li, Ma and Wright (2011), Table 1", None),
    ("the dual certificate (section 2.1, from memory)", None),
    ("eq. 4: a bound, common practice", None),
    ("# Reference: scipy.linalg.svd of the same matrix", None),
    ("sigma of 85-114 um (Levy & Reyes 2012)", None),
    ("rates of 140-300 Hz (measured by benchmarks/spiking.py)", None),
    ("Girko's circular law, Tao & Vu 2010, section 1", None),
    ("# the dual residual (Boyd et\n# al. 2011, section 3.3)", None),
    ("# the certificate of their section\n# 2.1 holds", "section"),
])
def test_scanner_catches_an_unlabelled_reference(text, caught):
    found = unlabelled(text)
    if caught is None:
        assert found == []
    else:
        assert [name for _, name, _ in found] == [caught]


def test_scanner_label_counts_within_the_window_only():
    far = ["the bound of eq. 4 holds"] + ["x = 1"] * (WINDOW - 1) + [
        "(Zhou et al. 2010)"]
    assert unlabelled("\n".join(far)) == []  # WINDOW lines away: still near
    too_far = far[:1] + ["x = 1"] * WINDOW + far[-1:]
    assert [n for _, n, _ in unlabelled("\n".join(too_far))] == ["equation"]


def test_scanner_on_a_real_file_finds_a_removed_label(tmp_path):
    # the same scanner on a copy of tests/test_planted.py with its labels
    # taken out must catch its section and theorem references
    text = (ROOT / "tests" / "test_planted.py").read_text(encoding="utf-8")
    stripped = re.sub(r"\b(?:1[89]|20)\d\d\b|from memory|common practice",
                      "", text)
    assert unlabelled(text) == []
    assert {name for _, name, _ in unlabelled(stripped)} >= {"section",
                                                             "theorem"}


# --- the tree --------------------------------------------------------------


@pytest.mark.parametrize("path", scanned_files(),
                         ids=lambda p: str(p.relative_to(ROOT)))
def test_every_outside_reference_is_labelled(path):
    found = unlabelled(path.read_text(encoding="utf-8"))
    assert not found, "\n".join(f"{path.relative_to(ROOT)}:{n}: [{name}] {line}"
                                for n, name, line in found)
