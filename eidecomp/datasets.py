"""Synthetic matrices: planted low-rank + sparse problems and the example.

``make_planted`` is the setting of the numerical experiments of Candes, Li, Ma,
Wright (2011), section 4.1: L0 = X Y^T with X, Y of i.i.d. N(0, 1/n) entries,
and S0 with a uniformly random support of the given fraction and independent
random signs.

``make_planted_circuit`` builds a ground-truth Dale's-law circuit on a ring of
feature-tuned units whose truth is identifiable from W_eff alone: like-to-like
excitation and tuned inhibition (pooling like units, suppressing units of the
opposite feature) have disjoint supports (docs/assembly.md). It is synthetic
ground truth for tests and benchmarks, not a model of any real circuit.

``example_lateral`` is invented data for the demo only, a scenario of our own:
a ring of orientation-tuned model units whose lateral weights mix broad
inhibition (rank 3), sparse like-to-like excitation stronger than it, and
feature-specific suppression from 27 small pools of like units onto units
of the orthogonal orientation, with optional dense measurement noise (PCP
spreads dense noise over many tiny singular values; stable PCP, with
``delta``, is the program for noisy data).

``gabor_covariance``, ``patch_partial_correlations`` and
``sparse_coding_lateral`` build the lateral matrices users bring, from
natural-stimulus statistics: scikit-learn's two sample photographs (an open
dataset the registry package ships, ``sklearn.datasets.load_sample_images``)
through a Gabor bank, as pixel-patch partial correlations, and as the
lateral weights -(Phi^T Phi - I) of a sparse-coding dictionary learned on
them (scikit-learn's ``MiniBatchDictionaryLearning``; the lateral form is the
locally competitive algorithm's, Rozell et al. 2008, Neural Comput 20(10),
from memory). They need scikit-learn and scipy, imported inside.

``signed_connectome`` reads a C. elegans chemical connectome from the
registry package ``cect`` (open data it ships: the readers' cached
datasets) and signs each synapse by its presynaptic neuron's transmitter,
a matrix that already obeys Dale's law. It needs ``cect`` (``pip install
cect``), imported inside.
"""

import numpy as np

__all__ = ["demo_inputs", "example_lateral", "gabor_covariance", "make_planted",
           "make_planted_circuit", "patch_partial_correlations",
           "signed_connectome", "sparse_coding_lateral"]

CONNECTOMES = ("Cook2019HermReader", "VarshneyDataReader", "White_whole",
               "WitvlietDataReader8")  # cect readers whose cached chemical
                                       # synapses signed_connectome reads
TRANSMITTER_SOURCE = "Wang2024HermReader"  # the cect reader whose "GABA"
                                           # synapses mark inhibitory neurons


def make_planted(n, *, rank=None, corruption=0.05, magnitude=1.0, seed=0,
                 m=None):
    """A planted PCP problem: W = L0 + S0.

    Parameters
    ----------
    n : int
        Columns (and rows, unless ``m`` is given).
    rank : int or None
        Rank of L0; None means round(0.05 n), as in Candes et al. 2011.
    corruption : float
        Fraction of entries in the support of S0.
    magnitude : float
        |S0| on its support; signs are random (+-1 times ``magnitude``).
    seed : int
    m : int or None

    Returns
    -------
    W, L0, S0 : ndarray of shape (m, n)
    """
    m = n if m is None else m
    rank = max(1, round(0.05 * n)) if rank is None else rank
    rng = np.random.default_rng(seed)
    X = rng.standard_normal((m, rank)) / np.sqrt(n)
    Y = rng.standard_normal((n, rank)) / np.sqrt(n)
    L0 = X @ Y.T
    support = rng.random((m, n)) < corruption
    S0 = np.zeros((m, n))
    S0[support] = magnitude * rng.choice([-1.0, 1.0], size=int(support.sum()))
    return L0 + S0, L0, S0


def example_lateral(n=120, *, noise=0.0, seed=7):
    """Invented lateral weight matrix W[post, pre] of ``n`` orientation-tuned units.

    Parameters
    ----------
    n : int
    noise : float
        Standard deviation of dense Gaussian noise added to every entry.
    seed : int

    Returns
    -------
    W : ndarray of shape (n, n)
        Zero diagonal (no self-connections). Its linear dynamics
        dr/dt = -r + W r are stable (largest real eigenvalue of W below 1).
    preferred : ndarray of shape (n,)
        Preferred orientation of each unit, degrees in [0, 180).
    """
    rng = np.random.default_rng(seed)
    theta = np.sort(rng.uniform(0.0, 180.0, n))
    d = np.deg2rad(theta[:, None] - theta[None, :]) * 2.0   # period 180 deg
    broad = -0.04 * (1.0 + 0.5 * np.cos(d))                 # rank 3
    like = (np.cos(d) > 0.85) & (rng.random((n, n)) < 0.3)
    excite = np.where(like, rng.uniform(0.08, 0.15, (n, n)), 0.0)
    suppress = np.zeros((n, n))
    for centre in np.linspace(0.0, 180.0, _SUPPRESSORS, endpoint=False):
        near = _nearest(theta, centre + rng.uniform(-2.0, 2.0), _POOL)
        far = _nearest(theta, centre + 75.0, _POOL)
        suppress[np.ix_(far, near)] -= np.outer(
            rng.uniform(0.3, 0.5, _POOL), rng.uniform(0.3, 0.5, _POOL))
    W = broad + excite + suppress + noise * rng.standard_normal((n, n))
    np.fill_diagonal(W, 0.0)
    return W, theta


_SUPPRESSORS = 27  # feature-specific suppression: pools of the example ...
_POOL = 5          # ... units each, silencing as many orthogonal ones


def _nearest(theta, centre, k):
    """The k units whose orientation is nearest ``centre`` (period 180)."""
    gap = np.abs((theta - centre + 90.0) % 180.0 - 90.0)
    return np.argsort(gap, kind="stable")[:k]


def _ring_distance(i, j, n):
    d = np.abs(np.subtract.outer(i, j)) % n
    return np.minimum(d, n - d)


def make_planted_circuit(n_e=400, *, n_untuned=5, n_tuned=95, ee_density=0.08,
                         pool=8, untuned_scale=0.3, seed=0):
    """A planted Dale's-law circuit on a ring of feature-tuned units.

    Unit i prefers feature 180 i / n_e degrees (an orientation). J_EE links
    units less than 45 degrees apart, at random with the given density and
    weights U(0.5, 1.5), no self-connections. Each untuned interneuron has
    dense U(0, untuned_scale) input and output pools. Tuned interneuron t
    pools ``pool`` neighbouring units around a centre c_t (evenly spaced, with
    a random offset) with weights U(0.5, 1.5), and inhibits ``pool`` units
    around c_t + n_e / 2 (the opposite feature) with weights U(0.5, 1.5).

    Returns
    -------
    W_eff : ndarray (n_e, n_e)
        The effective E-to-E matrix, all an assembler is given.
    truth : eidecomp.types.Circuit
    features : ndarray (n_e,)
        Preferred features in degrees, period 180.

    Examples
    --------
    >>> W, truth, theta = make_planted_circuit(40, n_untuned=2, n_tuned=8,
    ...                                        pool=4, seed=1)
    >>> W.shape, truth.n_inhibitory
    ((40, 40), 10)
    """
    from .types import Circuit

    rng = np.random.default_rng(seed)
    idx = np.arange(n_e)
    features = 180.0 * idx / n_e
    near = _ring_distance(idx, idx, n_e) < n_e / 4  # within 45 degrees
    np.fill_diagonal(near, False)
    p = ee_density * n_e * n_e / max(near.sum(), 1)
    if p > 1:
        raise ValueError("ee_density too high for like-to-like support")
    J_EE = np.where(near & (rng.random((n_e, n_e)) < p),
                    rng.uniform(0.5, 1.5, (n_e, n_e)), 0.0)
    J_EU = rng.uniform(0, untuned_scale, (n_e, n_untuned))
    J_UE = rng.uniform(0, untuned_scale, (n_untuned, n_e))
    J_ET = np.zeros((n_e, n_tuned))
    J_TE = np.zeros((n_tuned, n_e))
    offset = rng.uniform(0, n_e / max(n_tuned, 1))
    half = pool // 2
    for t in range(n_tuned):
        c = int(round(offset + t * n_e / n_tuned)) % n_e
        src = (c - half + np.arange(pool)) % n_e
        dst = (c + n_e // 2 - half + np.arange(pool)) % n_e
        J_TE[t, src] = rng.uniform(0.5, 1.5, pool)
        J_ET[dst, t] = rng.uniform(0.5, 1.5, pool)
    truth = Circuit(J_EE=J_EE, J_EU=J_EU, J_UE=J_UE, J_ET=J_ET, J_TE=J_TE,
                    params={"planted": True, "seed": seed})
    return truth.effective_weights(), truth, features


def demo_inputs(seed=7):
    """The invented demo: the example matrix and a unit table for it (CSV text).

    Units are laid out along a line of cortex by preferred orientation (4 um
    per degree, with 20 um of jitter across), a scenario of our own, so
    like-to-like connections are also local ones.

    >>> W, table = demo_inputs()
    >>> W.shape, table.splitlines()[0]
    ((120, 120), 'id,feature,x,y')
    """
    W, theta = example_lateral(seed=seed)
    rng = np.random.default_rng(seed)
    x = 4.0 * theta
    y = rng.normal(0.0, 20.0, len(theta))
    rows = zip(theta.tolist(), x.tolist(), y.tolist(), strict=True)
    lines = ["id,feature,x,y"] + [f"unit{i:03d},{t!r},{a!r},{b!r}"
                                  for i, (t, a, b) in enumerate(rows)]
    return W, "\n".join(lines) + "\n"


def _gray_photographs():
    """scikit-learn's sample photographs in grey, each standardised."""
    from sklearn.datasets import load_sample_images

    out = []
    for im in load_sample_images().images:
        g = im.astype(float).mean(axis=2)
        out.append((g - g.mean()) / g.std())
    return out


def _patches(size, n, rng):
    """``n`` random ``size`` x ``size`` patches of the photographs, as rows."""
    photos = _gray_photographs()
    which = rng.integers(len(photos), size=n)
    rows = np.empty((n, size * size))
    for i, k in enumerate(which):
        g = photos[k]
        y = rng.integers(g.shape[0] - size + 1)
        x = rng.integers(g.shape[1] - size + 1)
        rows[i] = g[y:y + size, x:x + size].ravel()
    return rows


def _gabor(size, theta, frequency, sigma):
    """A zero-mean, unit-norm even Gabor filter (cosine phase)."""
    h = size // 2
    y, x = np.mgrid[-h:h + 1, -h:h + 1].astype(float)
    along = x * np.cos(theta) + y * np.sin(theta)
    g = np.exp(-(x ** 2 + y ** 2) / (2 * sigma ** 2)) * np.cos(
        2 * np.pi * frequency * along)
    g -= g.mean()
    return g / np.linalg.norm(g)


def gabor_covariance(n_orientations=16, grid=6, *, spacing=4, size=11,
                     frequency=0.15, sigma=2.5, stride=7):
    """A signed lateral matrix from Gabor responses to photographs.

    Units are (orientation, position) pairs: ``n_orientations`` even Gabor
    filters on a ``grid`` x ``grid`` lattice ``spacing`` pixels apart. Their
    rectified responses are sampled over every window of the two sample
    photographs (``stride`` pixels apart); W is the covariance of those
    responses less its median, zero on the diagonal, scaled to max|W| = 1
    (a Hebbian-style estimate of lateral weights from stimulus statistics).

    Returns
    -------
    W : ndarray (n_orientations * grid**2, same)
        Unit k * grid**2 + p is orientation 180 k / n_orientations degrees at
        position p (row-major on the lattice).

    Examples
    --------
    >>> W = gabor_covariance(4, 3)
    >>> W.shape, float(np.abs(W).max()), float(np.abs(np.diag(W)).max())
    ((36, 36), 1.0, 0.0)
    """
    from scipy.signal import fftconvolve

    photos = _gray_photographs()
    span = (grid - 1) * spacing + 1
    filters = [_gabor(size, np.pi * k / n_orientations, frequency, sigma)
               for k in range(n_orientations)]
    rows = []
    for g in photos:
        maps = [np.maximum(fftconvolve(g, f, mode="valid"), 0.0) for f in filters]
        h, w = maps[0].shape
        for y in range(0, h - span + 1, stride):
            for x in range(0, w - span + 1, stride):
                rows.append(np.concatenate([
                    m[y:y + span:spacing, x:x + span:spacing].ravel()
                    for m in maps]))
    C = np.cov(np.asarray(rows), rowvar=False)
    W = C - np.median(C)
    np.fill_diagonal(W, 0.0)
    return W / np.abs(W).max()


def patch_partial_correlations(size=12, n_patches=40000, *, seed=0):
    """Partial correlations among the pixels of photograph patches.

    W_ij = -P_ij / sqrt(P_ii P_jj), P the inverse covariance of
    ``n_patches`` random ``size`` x ``size`` patches of the sample
    photographs; zero diagonal. A lateral matrix read off stimulus
    statistics (each unit a pixel of the patch).

    Examples
    --------
    >>> W = patch_partial_correlations(4, 2000)
    >>> W.shape, bool(np.allclose(W, W.T))
    ((16, 16), True)
    """
    if n_patches <= size * size:
        raise ValueError(f"{n_patches} patches cannot estimate the inverse "
                         f"covariance of {size * size} pixels; take more")
    X = _patches(size, n_patches, np.random.default_rng(seed))
    P = np.linalg.inv(np.cov(X, rowvar=False))
    d = np.sqrt(np.diag(P))
    W = -P / np.outer(d, d)
    np.fill_diagonal(W, 0.0)
    return W


def sparse_coding_lateral(n_atoms=256, size=8, n_patches=20000, *, alpha=1.0,
                          n_epochs=10, seed=0):
    """Lateral weights -(Phi^T Phi - I) of a sparse-coding dictionary.

    Phi (size^2 x n_atoms, unit-norm columns) is learned by scikit-learn's
    ``MiniBatchDictionaryLearning`` (``alpha``, batches of 256,
    ``n_epochs`` passes, ``random_state=seed``) on mean-removed patches of
    the sample photographs; the locally competitive algorithm's units
    inhibit each other by the overlap of their atoms (see the module
    docstring).

    Examples
    --------
    >>> W = sparse_coding_lateral(12, 4, 2000, n_epochs=2)
    >>> W.shape, float(np.abs(np.diag(W)).max()) < 1e-12
    ((12, 12), True)
    """
    from sklearn.decomposition import MiniBatchDictionaryLearning

    X = _patches(size, n_patches, np.random.default_rng(seed))
    X -= X.mean(axis=1, keepdims=True)
    learner = MiniBatchDictionaryLearning(n_components=n_atoms, alpha=alpha,
                                          batch_size=256, max_iter=n_epochs,
                                          random_state=seed)
    Phi = learner.fit(X).components_.T
    Phi = Phi / np.linalg.norm(Phi, axis=0)
    W = -(Phi.T @ Phi)
    np.fill_diagonal(W, 0.0)
    return W


def _cect_dataset(reader):
    try:
        from cect.ConnectomeDataset import (
            get_cache_filename,
            load_connectome_dataset_file,
        )
    except ImportError as exc:
        raise ImportError("signed_connectome needs the registry package cect "
                          "(pip install cect)") from exc
    return load_connectome_dataset_file(get_cache_filename(reader))


def signed_connectome(reader="Cook2019HermReader"):
    """A signed chemical connectome W[post, pre] of C. elegans neurons.

    The synapse counts of ``reader``'s chemical synapses (cect's
    "Generic_CS" class, as the reader's cached dataset holds them), among
    the neurons that make or receive one, each column signed by its
    presynaptic neuron: negative for a neuron that makes GABA synapses in
    cect's ``TRANSMITTER_SOURCE`` dataset, positive otherwise (a common
    simplification, from memory: glutamate, inhibitory at some C. elegans
    synapses, counts as excitatory here). Every column therefore has one
    sign: W obeys Dale's law.

    Parameters
    ----------
    reader : str
        One of ``CONNECTOMES`` (any cect reader with a cached
        "Generic_CS" class works).

    Returns
    -------
    W : ndarray (N, N), float64
    names : list of str
        The neurons, in W's order.

    Examples
    --------
    >>> W, names = signed_connectome()
    >>> W.shape, int((W.min(axis=0) < 0).sum())  # neurons, inhibitory ones
    ((302, 302), 33)
    """
    from cect.Cells import is_any_neuron

    data = _cect_dataset(reader)
    if "Generic_CS" not in data.connections:
        raise ValueError(f"cect's {reader} has no chemical synapses "
                         "('Generic_CS')")
    source = _cect_dataset(TRANSMITTER_SOURCE)
    gaba = source.connections["GABA"].sum(axis=1) > 0  # [pre, post] in cect
    inhibitory = {n for n, g in zip(source.nodes, gaba, strict=True) if g}
    keep = [i for i, n in enumerate(data.nodes) if is_any_neuron(n)]
    C = np.asarray(data.connections["Generic_CS"], dtype=float)[
        np.ix_(keep, keep)]
    used = (C.sum(axis=0) + C.sum(axis=1)) > 0
    C = C[np.ix_(used, used)]
    names = [data.nodes[i] for i, u in zip(keep, used, strict=True) if u]
    sign = np.array([-1.0 if n in inhibitory else 1.0 for n in names])
    return np.ascontiguousarray((C * sign[:, None]).T), names
