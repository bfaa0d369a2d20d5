"""Edit files: the hand corrections of one field, stored beside the results.

One JSON file per field and kind, named ``<image stem>_<kind>_edits.json`` in the folder
of the result document (``grains.json`` / ``particles.json``; in a study the specimen's
folder). Schema ``sectio/edits@1``::

    {
      "schema": "sectio/edits@1",
      "kind": "grains",                      # or "particles"
      "image": "LC1-650/f1.tif",             # as named in the results
      "image_sha256": "…",                   # of the image file's bytes
      "shape_px": [rows, columns],           # of the measured image (after any crop)
      "options": {…},                        # the measurement options the edits were made under
      "edits": [ {"op": "join", "points": [[x, y], [x, y]], "by": "…", "at": "…"}, … ],
      "redo": [ … ],                         # edits undone (redo brings them back)
      "status": null,                        # or "reviewed" / "rejected"
      "reason": "",                          # why a field was rejected
      "by": "", "updated": ""                # who / when, if given
    }

Coordinates are image pixels ``[x, y]`` (column, row) of the measured image. The edits
are documented in :mod:`sectio.review.apply`. An edit file whose image changed (another
content hash) is refused: the edits were drawn on other pixels.
"""

from __future__ import annotations

import hashlib
import json
import os
from pathlib import Path

from ..errors import InputError
from .apply import GRAIN_OPS, PARTICLE_OPS

SCHEMA = "sectio/edits@1"
STATUSES = (None, "reviewed", "rejected")
MAX_EDITS = 5000


class EditFileError(InputError, ValueError):
    """An edit file is malformed or belongs to another image."""


def image_sha256(path: str | os.PathLike) -> str:
    """sha256 hex digest of an image file's bytes."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def bytes_sha256(data: bytes) -> str:
    """sha256 hex digest of ``data``."""
    return hashlib.sha256(data).hexdigest()


def edit_file_name(image: str, kind: str, used: set[str] | None = None) -> str:
    """``<stem>_<kind>_edits.json``, made unique within one folder (``_2``, ``_3`` ...)."""
    stem = Path(str(image).replace("\\", "/")).stem or "field"
    if len(os.fsencode(stem)) > 150:  # keep the edit file's name within NAME_MAX
        from ..report._safe import safe_stem

        stem = safe_stem(str(image))
    name, i = f"{stem}_{kind}_edits.json", 2
    while used is not None and name in used:
        name, i = f"{stem}_{i}_{kind}_edits.json", i + 1
    if used is not None:
        used.add(name)
    return name


def new_edit_doc(*, kind: str, image: str, image_sha: str, shape_px, options: dict) -> dict:
    """An empty edit document for one field (no edits yet)."""
    return {"schema": SCHEMA, "kind": kind, "image": image, "image_sha256": image_sha,
            "shape_px": [int(shape_px[0]), int(shape_px[1])], "options": options,
            "edits": [], "redo": [], "status": None, "reason": "", "by": "", "updated": ""}


def check_edit_doc(doc, *, where: str) -> dict:
    """Validate the structure of an edit document (not the geometry of its edits)."""
    if not isinstance(doc, dict) or doc.get("schema") != SCHEMA:
        raise EditFileError(f"{where} is not a sectio edit file (schema {SCHEMA}); "
                            "remove it or restore the original.")
    kind = doc.get("kind")
    if kind not in ("grains", "particles"):
        raise EditFileError(f"{where}: kind must be grains or particles, got {kind!r}.")
    ops = GRAIN_OPS if kind == "grains" else PARTICLE_OPS
    for key in ("edits", "redo"):
        lst = doc.get(key, [])
        if not isinstance(lst, list) or len(lst) > MAX_EDITS:
            raise EditFileError(f"{where}: {key} must be a list of at most {MAX_EDITS} edits.")
        for e in lst:
            if not isinstance(e, dict) or e.get("op") not in ops:
                raise EditFileError(f"{where}: {e!r} is not an edit of {kind} "
                                    f"({', '.join(ops)}).")
    if doc.get("status") not in STATUSES:
        raise EditFileError(f"{where}: status must be reviewed, rejected or null, "
                            f"got {doc.get('status')!r}.")
    if not isinstance(doc.get("image_sha256"), str):
        raise EditFileError(f"{where}: image_sha256 is missing.")
    doc.setdefault("redo", [])
    doc.setdefault("reason", "")
    return doc


def read_edit_file(path: str | os.PathLike, *, image_sha: str | None = None) -> dict:
    """Read and check an edit file; refuse it when the image's content hash differs."""
    where = os.fspath(path)
    try:
        doc = json.loads(Path(path).read_text(encoding="utf-8"))
    except OSError as exc:
        raise EditFileError(f"Cannot read the edit file {where} ({exc.strerror}).") from None
    except ValueError:
        raise EditFileError(f"{where} is not valid JSON; fix it or remove it.") from None
    doc = check_edit_doc(doc, where=where)
    if image_sha is not None and doc["image_sha256"] != image_sha:
        raise EditFileError(
            f"The edit file {where} was made on another version of {doc.get('image')} "
            "(the image's content changed): remove or rename the edit file, then review "
            "the field again.")
    return doc


def write_edit_file(path: str | os.PathLike, doc: dict) -> None:
    """Write an edit document atomically."""
    from ..report import write_json

    write_json(Path(path), doc)


def edits_entry(doc: dict | None, file_name: str | None = None) -> dict | None:
    """The ``edits`` entry of a field in the result JSON (None for a field never reviewed)."""
    if doc is None:
        return None
    return {"count": len(doc.get("edits", [])), "status": doc.get("status"),
            "reason": doc.get("reason") or "", "by": doc.get("by") or "",
            "updated": doc.get("updated") or "", "file": file_name,
            "ops": sorted({e["op"] for e in doc.get("edits", [])})}
