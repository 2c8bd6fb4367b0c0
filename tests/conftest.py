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


def write_planted_bundle(folder, c, W):
    """A circuit bundle of a planted circuit ``c`` whose original network is
    ``W`` (stored as its split: low_rank = -J_EU J_UE, sparse the rest),
    written by eidecomp's own bundle writer."""
    from eidecomp.analysis import interneuron_pools
    from eidecomp.dynamics import stability_summary
    from eidecomp.io import bundles
    from eidecomp.types import AssemblyReport

    c = type(c)(J_EE=c.J_EE, J_EU=c.J_EU, J_UE=c.J_UE, J_ET=c.J_ET, J_TE=c.J_TE,
                report=AssemblyReport(relative_error=0.0, ee_density=0.1,
                                      share_rule="planted"))
    low_rank = -c.J_EU @ c.J_UE
    doc = bundles.circuit_doc(c, source={"path": "planted"}, decomposition={},
                              stability=stability_summary(c, W),
                              pools=interneuron_pools(c), parameters={})
    bundles.write_circuit(folder, c, doc,
                          arrays={"low_rank": low_rank, "sparse": W - low_rank})
    return folder


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
