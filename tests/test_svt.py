"""Partial singular value thresholding against numpy's full SVD (the reference)."""

import numpy as np
import pytest

from eidecomp.decompose._svt import spectral_norm, svt


def _reference(A, tau):
    U, s, Vt = np.linalg.svd(A, full_matrices=False)
    return (U * np.maximum(s - tau, 0.0)) @ Vt


@pytest.mark.parametrize("shape", [(300, 300), (400, 250), (250, 400)])
def test_partial_svt_equals_full(shape, rng):
    m, n = shape
    A = (rng.standard_normal((m, 12)) * np.geomspace(50, 5, 12)) @ \
        rng.standard_normal((12, n)) + 0.1 * rng.standard_normal((m, n))
    tau = 10.0
    ref = _reference(A, tau)
    # k too small on purpose: it must grow until the k-th value is below tau
    U, s, Vt, _, _ = svt(A, tau, k=3, rng=rng)
    got = (U * s) @ Vt
    assert np.linalg.norm(got - ref) / np.linalg.norm(ref) < 1e-8
    assert len(s) == int(np.sum(np.linalg.svd(A, compute_uv=False) > tau))


def test_warm_start_is_used_and_exact(rng):
    A = rng.standard_normal((300, 8)) @ rng.standard_normal((8, 300)) * 10
    _, _, _, V, _ = svt(A, 1.0, k=10, rng=rng)
    B = A + 1e-3 * rng.standard_normal(A.shape)
    U, s, Vt, _, _ = svt(B, 1.0, k=10, V0=V, rng=rng)
    ref = _reference(B, 1.0)
    assert np.linalg.norm((U * s) @ Vt - ref) / np.linalg.norm(ref) < 1e-8


def test_spectral_norm(rng):
    A = rng.standard_normal((400, 300))
    assert spectral_norm(A) == pytest.approx(np.linalg.norm(A, 2), rel=1e-5)
