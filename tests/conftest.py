import numpy as np
import pytest


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
