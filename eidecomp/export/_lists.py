"""Sparse connection lists of a circuit, shared by every simulator export.

All exports take their synapses from here, so that zeros never become
connections and every simulator sees the same list.
"""

import numpy as np

__all__ = ["connection_list", "drive_vector", "npz_bytes", "population_slices"]


def population_slices(circuit):
    """{population name: slice into the E, untuned, tuned ordering}."""
    n_e, n_u, n_t = circuit.n_excitatory, circuit.n_untuned, circuit.n_tuned
    return {"E": slice(0, n_e), "I_untuned": slice(n_e, n_e + n_u),
            "I_tuned": slice(n_e + n_u, n_e + n_u + n_t)}


def connection_list(circuit):
    """(pre, post, signed weight) arrays of every nonzero synapse.

    Indices are into the full ordering (E, then untuned, then tuned); the
    weight carries the presynaptic population's sign (Dale's law).
    """
    W_full = circuit.signed_weights()
    post, pre = np.nonzero(W_full)
    return pre, post, W_full[post, pre]


def drive_vector(circuit, h):
    """External drive of every unit: h on the E units, 0 on interneurons."""
    h = np.asarray(h, dtype=float)
    if h.shape != (circuit.n_excitatory,):
        raise ValueError(f"drive h must have shape ({circuit.n_excitatory},), "
                         f"got {h.shape}")
    return np.r_[h, np.zeros(circuit.n_inhibitory)]


def npz_bytes(arrays):
    """An uncompressed .npz of ``arrays`` (no object arrays), as bytes."""
    import io

    buf = io.BytesIO()
    np.savez(buf, **arrays)
    return buf.getvalue()
