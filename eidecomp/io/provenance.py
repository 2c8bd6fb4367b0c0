"""Provenance stamps: how an output proves it is eidecomp's and unedited.

Every file eidecomp writes carries a stamp with the SHA-256 of its content,
and every folder it writes holds a manifest, itself stamped, with the
SHA-256 of each of its other files. ``--force`` replaces an existing output
only when the stamp still matches: one that eidecomp wrote and nobody has
edited since (the rule itself: :func:`eidecomp.io.staging.check_output`).
A marker such as a header line is no proof: anyone's file can hold it.

The stamp of each syntax (``SYNTAXES``):

``xml``
    GraphML, NeuroML, HTML, SVG: a last line
    ``<!-- eidecomp provenance sha256:HEX -->`` (a comment, after the root
    element where XML allows one), HEX the digest of the bytes before it.
``hash``
    CSV and Python: a last line ``# eidecomp provenance sha256:HEX`` (a
    comment in Python; in CSV, read with ``pandas.read_csv(...,
    comment="#")`` or ``numpy.loadtxt``, which skip it).
``json``
    A member ``"eidecomp_provenance": {"sha256": HEX}`` of the top object,
    HEX the digest of the document's canonical form without it
    (:func:`canonical_json`: sorted keys, no spaces, ASCII), so the digest
    does not depend on indentation.

The manifests of folders (a bundle's circuit.json or summary.json, an
export folder's ``eidecomp-manifest.json``) are JSON stamps with a
``"sha256"`` object naming every other file of the folder.

>>> data = stamp(b"pre,post\\n0,1\\n", "hash")
>>> data.splitlines()[-1].startswith(b"# eidecomp provenance sha256:")
True
>>> unedited_bytes(data) is None
True
>>> unedited_bytes(data.replace(b"0,1", b"0,2"))
'edited after eidecomp wrote it (its provenance digest does not match)'
"""

import hashlib
import json
import os
import re
import stat
from pathlib import Path

from ..errors import InputError
from .jsondoc import no_duplicate_keys

__all__ = ["FOLDER_MANIFEST", "JSON_KEY", "SUFFIX_SYNTAX", "SYNTAXES",
           "canonical_json", "digest", "folder_manifest", "is_manifest", "stamp",
           "stamp_doc", "stamp_folder", "unedited_bytes", "unedited_file",
           "unedited_folder", "verify_doc"]

JSON_KEY = "eidecomp_provenance"
"""The member of a JSON document that holds its stamp."""

FOLDER_MANIFEST = "eidecomp-manifest.json"
"""The manifest of a folder that is not a bundle (an export folder, the
report's figures): the SHA-256 of each of its other files, stamped."""

_TRAILERS = {
    "xml": (b"<!-- eidecomp provenance sha256:", b" -->\n"),
    "hash": (b"# eidecomp provenance sha256:", b"\n"),
}
SYNTAXES = (*_TRAILERS, "json")
"""The stamp forms, by the syntax of the file (module docstring)."""

SUFFIX_SYNTAX = {".py": "hash", ".csv": "hash", ".svg": "xml", ".html": "xml"}
"""The stamp a file inside a folder gets by its name's ending; other files
(.npz, .npy) are vouched for by the folder's manifest alone."""

_HEX = re.compile(rb"[0-9a-f]{64}\Z")
_TAIL_BYTES = 128       # more than the longest trailer
EDITED = "edited after eidecomp wrote it (its provenance digest does not match)"
UNSTAMPED = "not written by eidecomp (it carries no provenance stamp)"


def digest(data):
    """The SHA-256 of ``data`` (bytes), in hex."""
    return hashlib.sha256(data).hexdigest()


def canonical_json(doc):
    """The canonical form of a JSON document: sorted keys, no spaces, ASCII
    (NaN and Infinity as Python's json module writes them).

    >>> canonical_json({"b": 1, "a": [1.5, "\u00e9"]})
    b'{"a":[1.5,"\\\\u00e9"],"b":1}'
    """
    return json.dumps(doc, sort_keys=True, separators=(",", ":"),
                      ensure_ascii=True).encode("ascii")


def stamp_doc(doc):
    """``doc`` (a dict) with its stamp added (any earlier one replaced)."""
    body = {k: v for k, v in doc.items() if k != JSON_KEY}
    return {**body, JSON_KEY: {"sha256": digest(canonical_json(body))}}


def stamp(data, syntax):
    """``data`` (bytes) with the stamp of ``syntax`` (``SYNTAXES``); a JSON
    document must be an object, and is rewritten only by adding the member
    before its closing brace."""
    if syntax == "json":
        doc = _loads(data)
        if not isinstance(doc, dict) or JSON_KEY in doc:
            raise ValueError("a JSON stamp needs an object without one")
        body = data.rstrip()
        member = json.dumps({JSON_KEY: {"sha256": digest(canonical_json(doc))}})
        sep = b"," if doc else b""
        return body[:-1].rstrip() + sep + b"\n " + member[1:-1].encode() + b"\n}\n"
    head, tail = _TRAILERS[syntax]
    if not data.endswith(b"\n"):
        data += b"\n"
    return data + head + digest(data).encode("ascii") + tail


def _loads(data):
    return json.loads(data.decode("utf-8"), object_pairs_hook=no_duplicate_keys)


def _trailer(tail):
    """(syntax, hex, trailer length) of the stamp ending ``tail``, or None."""
    for syntax, (head, end) in _TRAILERS.items():
        if tail.endswith(end):
            at = tail.rfind(head)
            if at >= 0 and (at == 0 or tail[at - 1:at] == b"\n"):
                hexd = tail[at + len(head):len(tail) - len(end)]
                if _HEX.match(hexd):
                    return syntax, hexd.decode(), len(tail) - at
    return None


def unedited_bytes(data):
    """None when ``data`` carries a stamp that matches its content, else the
    reason (``UNSTAMPED`` or ``EDITED``, or why it cannot be read)."""
    found = _trailer(data[-_TAIL_BYTES:])
    if found is not None:
        _, hexd, size = found
        return None if digest(data[:len(data) - size]) == hexd else EDITED
    if not data.lstrip().startswith(b"{"):
        return UNSTAMPED
    try:
        doc = _loads(data)
    except (UnicodeDecodeError, ValueError, RecursionError):
        # a stamped document that no longer parses was edited after writing
        return EDITED if b'"' + JSON_KEY.encode() + b'"' in data else UNSTAMPED
    return _doc_reason(doc)


def _doc_reason(doc):
    if not isinstance(doc, dict) or not isinstance(doc.get(JSON_KEY), dict):
        return UNSTAMPED
    if set(doc[JSON_KEY]) != {"sha256"}:     # the stamp holds nothing else
        return EDITED
    recorded = doc[JSON_KEY].get("sha256")
    body = {k: v for k, v in doc.items() if k != JSON_KEY}
    try:
        ok = recorded == digest(canonical_json(body))
    except (TypeError, ValueError):
        ok = False
    return None if ok else EDITED


def verify_doc(doc, where):
    """``doc`` (a parsed manifest) without its stamp, or InputError naming
    ``where`` when the stamp is missing or does not match (an edited
    manifest is never believed)."""
    reason = _doc_reason(doc)
    if reason is not None:
        raise InputError(f"{where}: {reason}; not read")
    return {k: v for k, v in doc.items() if k != JSON_KEY}


def _entry_reason(path, folder=False):
    """Why ``path`` is not a regular file (``folder``: a folder) of its own:
    a link, the other kind, a device..., or None."""
    try:
        mode = os.lstat(path).st_mode
    except OSError as exc:
        return f"cannot be examined ({exc.strerror})"
    if stat.S_ISLNK(mode):
        return "is a symbolic link"
    if folder:
        return None if stat.S_ISDIR(mode) else "is not a folder"
    if stat.S_ISDIR(mode):
        return "is a folder"
    if not stat.S_ISREG(mode):
        return "is not a regular file"
    return None


JSON_CHECK_MAX = 1 << 30
"""The largest JSON file whose stamp is checked (it is parsed whole); a
larger one is not proved unedited. A stamp that ends the file is checked
in a stream, at any size."""


def unedited_file(path):
    """None when ``path`` is a regular file (not a link) whose stamp
    matches, else the reason it is not (the ``replaceable`` rule of a file
    output). A trailing stamp is checked by hashing the file in blocks; a
    JSON stamp by parsing a file of at most ``JSON_CHECK_MAX`` bytes."""
    reason = _entry_reason(path)
    if reason is not None:
        return reason
    try:
        with open(path, "rb") as fh:
            size = os.fstat(fh.fileno()).st_size
            fh.seek(max(size - _TAIL_BYTES, 0))
            found = _trailer(fh.read())
            if found is not None:
                _, hexd, length = found
                fh.seek(0)
                return None if _stream_digest(fh, size - length) == hexd \
                    else EDITED
            fh.seek(0)
            if not fh.read(64).lstrip().startswith(b"{"):
                return UNSTAMPED
            if size > JSON_CHECK_MAX:
                return (f"a JSON file of {size} bytes, too large to check "
                        "its provenance stamp")
            fh.seek(0)
            data = fh.read()
    except OSError as exc:
        return f"cannot be read to check its provenance ({exc.strerror})"
    return unedited_bytes(data)


def _stream_digest(fh, n):
    """The SHA-256 of the next ``n`` bytes of ``fh``, read in blocks."""
    h = hashlib.sha256()
    while n > 0:
        block = fh.read(min(n, 1 << 20))
        if not block:
            break
        h.update(block)
        n -= len(block)
    return h.hexdigest()


def folder_manifest(files, **fields):
    """The bytes of ``eidecomp-manifest.json`` for a folder of ``files``
    (name -> bytes): ``fields`` and the SHA-256 of each file, stamped."""
    doc = {**fields, "sha256": {n: digest(d) for n, d in sorted(files.items())}}
    return (json.dumps(stamp_doc(doc), indent=1) + "\n").encode("ascii")


def is_manifest(path):
    """Whether ``path`` is a regular file holding the stamped manifest of a
    folder eidecomp wrote (a JSON object with its stamp and a "sha256"
    object), edited or not."""
    if _entry_reason(path) is not None:
        return False
    try:
        doc = _loads(Path(path).read_bytes())
    except (OSError, UnicodeDecodeError, ValueError, RecursionError):
        return False
    return (isinstance(doc, dict) and isinstance(doc.get(JSON_KEY), dict)
            and isinstance(doc.get("sha256"), dict))


def stamp_folder(files, **fields):
    """{name: bytes} of a folder output with each text file stamped by its
    ending (``SUFFIX_SYNTAX``) and ``eidecomp-manifest.json`` added
    (``fields`` and every file's SHA-256)."""
    out = {name: stamp(data, SUFFIX_SYNTAX[Path(name).suffix])
           if Path(name).suffix in SUFFIX_SYNTAX else data
           for name, data in files.items()}
    out[FOLDER_MANIFEST] = folder_manifest(out, **fields)
    return out


def unedited_folder(path, manifest=FOLDER_MANIFEST, kind=None):
    """None when ``path`` is a folder (not a link) whose ``manifest`` is
    stamped and unedited and lists every other entry, each a regular file
    with the recorded SHA-256, and (given ``kind``) whose manifest names
    that kind; else the reason (the ``replaceable`` rule of a folder
    output)."""
    path = Path(path)
    reason = _entry_reason(path, folder=True)
    if reason is not None:
        return reason
    try:
        entries = sorted(e.name for e in path.iterdir())
    except OSError as exc:
        return f"cannot be listed ({exc.strerror})"
    if not entries:
        return "an empty folder that eidecomp did not write"
    if manifest not in entries:
        return f"has no {manifest}: not a folder eidecomp wrote"
    reason = unedited_file(path / manifest)
    if reason is not None:
        return f"{manifest}: {reason}"
    try:
        doc = _loads((path / manifest).read_bytes())
        sums = doc.get("sha256")
    except (OSError, UnicodeDecodeError, ValueError, AttributeError):
        doc, sums = {}, None
    if kind is not None and doc.get("kind") != kind:
        return f"holds {doc.get('kind') or 'another output'}, not {kind}"
    if not isinstance(sums, dict):
        return f"its {manifest} lists no files"
    for name in entries:
        if name != manifest and name not in sums:
            return (f"holds {name!r}, which its {manifest} does not list "
                    "(a file of yours?)")
    for name, recorded in sorted(sums.items()):
        where = path / name
        if name not in entries:
            return f"lacks {name!r}, which its {manifest} lists"
        reason = _entry_reason(where)
        if reason is not None:
            return f"{name!r} {reason}"
        try:
            changed = _file_digest(where) != recorded
        except OSError as exc:
            return f"{name!r} cannot be read to check it ({exc.strerror})"
        if changed:
            return f"{name!r} was changed after eidecomp wrote it"
    return None


def _file_digest(path):
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()
