"""Sparse connection lists of a circuit, shared by every simulator export.

All exports take their synapses from here, so that zeros never become
connections and every simulator sees the same list; the time constants of
the units come from here too (:func:`tau_vector`), with the defaults of
:mod:`eidecomp.params`.
"""

import numpy as np

from ..params import TAU_E_MS, TAU_I_MS
from ..types import EXCITATORY

__all__ = ["connection_list", "drive_vector", "npz_bytes", "population_taus",
           "tau_vector", "write_into"]


def connection_list(circuit):
    """(pre, post, signed weight) arrays of every nonzero synapse.

    Indices are into the full ordering (E, then untuned, then tuned); the
    weight carries the presynaptic population's sign (Dale's law).
    """
    W_full = circuit.signed_weights()
    post, pre = np.nonzero(W_full)
    return pre, post, W_full[post, pre]


def drive_vector(circuit, h):
    """External drive of every unit from a drive ``h`` of W's units
    (Circuit.full_drive): h on the E units and 0 on added interneurons, or
    each unit's own for a circuit of W's neurons."""
    h = np.asarray(h, dtype=float)
    if h.shape != (circuit.n_w_units,):
        raise ValueError(f"drive h must have shape ({circuit.n_w_units},), "
                         f"got {h.shape}")
    return circuit.full_drive(h)


def population_taus(circuit, tau_e=TAU_E_MS, tau_i=TAU_I_MS):
    """The time constant of each population (ms), in the order of
    ``circuit.populations``: tau_e for the excitatory one, tau_i for the
    interneurons."""
    return np.array([float(tau_e) if p.kind == EXCITATORY else float(tau_i)
                     for p in circuit.populations])


def tau_vector(circuit, tau_e=TAU_E_MS, tau_i=TAU_I_MS):
    """The time constant of every unit (ms), E then untuned then tuned.

    >>> from eidecomp.types import Circuit
    >>> c = Circuit(J_EE=np.eye(2), J_EU=np.ones((2, 1)), J_UE=np.ones((1, 2)),
    ...             J_ET=np.zeros((2, 0)), J_TE=np.zeros((0, 2)))
    >>> tau_vector(c)
    array([10., 10.,  5.])
    """
    return circuit.unit_taus(tau_e, tau_i)


def npz_bytes(arrays):
    """An uncompressed .npz of ``arrays`` (no object arrays), as bytes."""
    import io

    buf = io.BytesIO()
    np.savez(buf, **arrays)
    return buf.getvalue()


def write_into(folder, files, fmt):
    """Write {name: bytes} into ``folder`` (created if missing), each file
    through a temporary name renamed into place, with the folder's stamped
    manifest for export format ``fmt`` (eidecomp.io.provenance); other
    files are kept."""
    from pathlib import Path

    from ..io.provenance import stamp_folder
    from ..io.staging import any_file, file_bytes, write_file

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    from .registry import folder_kind

    files = stamp_folder({n: file_bytes(v) for n, v in files.items()},
                         kind=folder_kind(fmt))
    for name, data in files.items():
        write_file(folder / name, data, force=True,
                      replaceable=any_file)
    return folder
