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
