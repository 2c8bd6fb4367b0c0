"""Every folder eidecomp writes: one writer and one reader a kind."""

import hashlib
import json
from pathlib import Path

import numpy as np

from ..errors import InputError
from .matrices import file_checksum
from .staging import npy_bytes

CIRCUIT_FORMAT = "eidecomp-circuit"
CIRCUIT_VERSION = 1
CIRCUIT_BLOCKS = ("J_EE", "J_EU", "J_UE", "J_ET", "J_TE")


def circuit_files(circuit, meta):
    """The files of a circuit bundle: the blocks as .npy, and circuit.json.

    ``meta`` (a dict: parameters, metrics, provenance) is stored in
    circuit.json with the format name and version, the populations and the
    SHA-256 of every block file, which :func:`read_circuit` verifies.
    """
    files = {f"{b}.npy": np.asarray(getattr(circuit, b)) for b in CIRCUIT_BLOCKS}
    sums = {name: hashlib.sha256(npy_bytes(a)).hexdigest()
            for name, a in files.items()}
    doc = {"format": CIRCUIT_FORMAT, "format_version": CIRCUIT_VERSION,
           "convention": "blocks are nonnegative magnitudes, [post, pre]; "
                         "the sign is the presynaptic population's",
           "populations": [{"name": p.name, "kind": p.kind, "size": p.size,
                            "sign": p.sign} for p in circuit.populations],
           "sha256": sums, **meta}
    files["circuit.json"] = doc
    return files


def read_circuit(folder):
    """Load a circuit bundle written by ``eidecomp assemble`` or ``run``.

    Checks the format name and version, every block's checksum, and the
    shapes and signs of the blocks. Returns ``(Circuit, meta)`` where meta is
    the parsed circuit.json.
    """
    from ..types import Circuit

    folder = Path(folder)
    doc_path = folder / "circuit.json"
    if not folder.is_dir():
        raise InputError(f"{folder}: not a folder (expected a circuit bundle)")
    if not doc_path.is_file():
        raise InputError(f"{folder}: no circuit.json; not a circuit bundle")
    try:
        doc = json.loads(doc_path.read_text(encoding="utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise InputError(f"{doc_path}: corrupt JSON ({exc})") from None
    if not isinstance(doc, dict) or doc.get("format") != CIRCUIT_FORMAT:
        raise InputError(f"{doc_path}: not an eidecomp circuit bundle")
    version = doc.get("format_version")
    if not isinstance(version, int) or isinstance(version, bool) or version < 1:
        raise InputError(f"{doc_path}: format version {version!r} is not a "
                         "version eidecomp writes")
    if version > CIRCUIT_VERSION:
        raise InputError(f"{doc_path}: format version {version!r} is newer than "
                         f"this eidecomp reads ({CIRCUIT_VERSION}); upgrade")
    sums = doc.get("sha256")
    if not isinstance(sums, dict):
        raise InputError(f"{doc_path}: no 'sha256' table of the block files")
    params = doc.get("parameters", {})
    if not isinstance(params, dict):
        raise InputError(f"{doc_path}: 'parameters' must be an object")
    blocks = {}
    for b in CIRCUIT_BLOCKS:
        p = folder / f"{b}.npy"
        if not p.is_file():
            raise InputError(f"{p}: missing from the bundle")
        if sums.get(p.name) != file_checksum(p):
            raise InputError(f"{p}: checksum does not match circuit.json "
                             "(the file was changed or truncated)")
        try:
            blocks[b] = np.load(p, allow_pickle=False)
        except ValueError as exc:
            raise InputError(f"{p}: unreadable block ({exc})") from None
    try:
        circuit = Circuit(**blocks, params=params)
    except ValueError as exc:
        raise InputError(f"{folder}: {exc}") from None
    ids = doc.get("unit_ids")
    if ids is not None and not (isinstance(ids, list) and len(ids) ==
                                circuit.n_excitatory
                                and all(isinstance(u, str) for u in ids)):
        raise InputError(f"{doc_path}: 'unit_ids' must be a list of "
                         f"{circuit.n_excitatory} names (one per excitatory "
                         "unit) or null")
    return circuit, doc
