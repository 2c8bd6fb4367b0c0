"""Signed C. elegans connectomes from the registry package cect.

Outside reference: the open connectome datasets cect ships (its readers'
cached files) and cect's own accessors (ConnectomeDataset.
get_connection_weight, the "GABA" synapse class of its transmitter-typed
dataset), against which eidecomp.datasets.signed_connectome is checked.
"""

import numpy as np
import pytest

pytest.importorskip("cect")

from eidecomp.datasets import (  # noqa: E402
    TRANSMITTER_SOURCE,
    _cect_dataset,
    signed_connectome,
)

READERS = ("Cook2019HermReader", "VarshneyDataReader")


@pytest.fixture(scope="module", params=READERS)
def connectome(request):
    W, names = signed_connectome(request.param)
    return request.param, W, names


def test_every_column_has_one_sign(connectome):
    # Dale's law holds by construction: a neuron's outgoing synapses share
    # its transmitter's sign
    _, W, _ = connectome
    assert W.shape[0] == W.shape[1] and np.isfinite(W).all()
    assert not ((W > 0).any(axis=0) & (W < 0).any(axis=0)).any()


def test_inhibitory_columns_are_cects_gaba_neurons(connectome):
    _, W, names = connectome
    source = _cect_dataset(TRANSMITTER_SOURCE)
    gaba = {n for n in source.nodes
            if source.connections["GABA"][source.nodes.index(n)].sum() > 0}
    negative = {names[j] for j in np.nonzero((W < 0).any(axis=0))[0]}
    assert negative and negative <= gaba
    # a GABA neuron with outgoing synapses here has a negative column
    out = {names[j] for j in np.nonzero((W != 0).any(axis=0))[0]}
    assert (gaba & out) == negative


def test_weights_are_cects_synapse_counts(connectome):
    reader, W, names = connectome
    data = _cect_dataset(reader)
    rng = np.random.default_rng(0)
    post, pre = np.nonzero(W)
    for k in rng.choice(post.size, 40, replace=False):
        i, j = post[k], pre[k]
        count = data.get_connection_weight(names[j], names[i], "Generic_CS")
        assert abs(W[i, j]) == count  # W[post, pre]
    assert np.count_nonzero(W) == sum(
        1 for a in names for b in names
        if data.connections["Generic_CS"][data.nodes.index(a),
                                          data.nodes.index(b)] > 0)
