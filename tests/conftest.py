import os

import numpy as np
import pytest
from hypothesis import settings

# The bounded hypothesis profile: the example counts are set per test
# (tests/test_properties.py, 2,420 in all); derandomized, so CI runs the
# same cases every time, and no example database is written.
settings.register_profile("ci", derandomize=True, database=None, deadline=None,
                          print_blob=True)
settings.register_profile("explore", deadline=None)  # random, with a database
settings.load_profile(os.environ.get("EIDECOMP_HYPOTHESIS_PROFILE", "ci"))


@pytest.fixture
def rng():
    return np.random.default_rng(20261201)


def require(module):
    """Import a simulator, or skip; under .ci/run (which installs the sim
    extra) a missing simulator fails instead of skipping."""
    import importlib
    import os

    if os.environ.get("EIDECOMP_REQUIRE_SIMULATORS"):
        return importlib.import_module(module)
    return pytest.importorskip(module)


def require_browser():
    """Path of a headless Chromium, or skip; under .ci/run (which installs
    Debian's chromium) a missing browser fails instead of skipping."""
    import os
    import shutil

    for name in ("chromium", "chromium-browser", "google-chrome"):
        path = shutil.which(name)
        if path:
            return path
    if os.environ.get("EIDECOMP_REQUIRE_BROWSER"):
        pytest.fail("no Chromium on PATH (CI installs Debian's chromium)")
    pytest.skip("no Chromium on PATH")
