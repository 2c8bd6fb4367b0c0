"""Where the docs repeat a default, they say what its owner holds.

Each rule of eidecomp has one owner in the code (eidecomp.params, the
simulation and decompose packages) that the command's help and the report
import; the README and the docs are prose and cannot import, so this file
reads them and checks each sentence against its owner. Reference: the
project's own owners (a consistency check), read as text with Python's re.
"""

import re
from pathlib import Path

import pytest

from eidecomp.analysis.profiles import FIT_SUBDIVISIONS, LACK_OF_FIT_P
from eidecomp.decompose import LOCAL_WORKERS
from eidecomp.params import (
    ALPHA_DEFAULT,
    ALPHA_QUANTILE,
    ALPHA_RULE,
    SETTLE_TIME_CONSTANTS,
    STABILITY_SCAN,
)

ROOT = Path(__file__).resolve().parents[1]
WORDS = {1: "one", 2: "two", 3: "three", 4: "four"}


def _text(name):
    return " ".join((ROOT / name).read_text("utf-8").split())


@pytest.mark.parametrize("name", ["docs/assembly.md", "DEVELOPERS.md"])
def test_the_default_alpha_is_stated_as_its_owner_states_it(name):
    assert ALPHA_RULE == (f"{ALPHA_DEFAULT:g} times the {ALPHA_QUANTILE:g} "
                          "quantile of W's positive entries")
    assert f"default alpha is {ALPHA_RULE}" in _text(name)


def test_the_local_dask_cluster_has_the_size_its_owner_gives():
    said = re.findall(r"a local one of (\w+) workers", _text("README.md"))
    assert said == [WORDS[LOCAL_WORKERS]]


def test_a_run_lasts_the_time_constants_its_owner_gives():
    text = _text("docs/simulators.md")
    said = re.findall(r"(?:lasts |length \()(\d+) time constants", text)
    assert len(said) == 2 and {int(n) for n in said} == {SETTLE_TIME_CONSTANTS}


def test_the_tau_scan_is_stated_as_its_owner_holds_it():
    text = _text("docs/simulators.md")
    lo, hi, n_grid, _ = STABILITY_SCAN
    assert f"{n_grid} ratios over [{lo:g}, {hi:g}]" in text
    step = (hi / lo) ** (1 / (n_grid - 1))
    assert f"(a factor {step:.3g} apart)" in _text("DEVELOPERS.md")


def test_the_fit_subdivisions_are_stated_as_their_owner_holds_them():
    said = re.findall(r"(\d+) times finer bins", _text("docs/analysis.md"))
    assert [int(x) for x in said] == [FIT_SUBDIVISIONS]


def test_the_lack_of_fit_threshold_is_stated_as_its_owner_holds_it():
    said = re.findall(r"chi-square p-value below (\S+) "
                      r"\(`profiles.LACK_OF_FIT_P`\)", _text("docs/analysis.md"))
    assert [float(x) for x in said] == [LACK_OF_FIT_P]
