"""Edit files applied on every run: what ``sectio grains``, ``particles`` and ``study`` call.

A run looks for ``<image stem>_<kind>_edits.json`` in the folder it writes the result
document to; when there is one, its image hash is checked against the image and its edits
are applied to the new segmentation (same image and options give the same labels, so the
edits land where they were drawn). A field rejected by hand stays out of the statistics
and is listed with its reason.
"""

from __future__ import annotations

import os
from pathlib import Path

from .editfile import bytes_sha256, edit_file_name, image_sha256, read_edit_file
from .measure import EditedField, add_edit_keys, with_edits


def source_entry(kind: str, *, image_sha: str, calibration: dict, options: dict,
                 edit_file: str) -> dict:
    """What the review page needs to measure the field again exactly as the run did."""
    return {"kind": kind, "image_sha256": image_sha, "calibration": dict(calibration),
            "options": dict(options), "edit_file": edit_file}


def apply_edit_file(kind: str, image: str | os.PathLike, field, folder: Path,
                    used: set[str], *, image_bytes: bytes | None = None
                    ) -> tuple[EditedField, str, str]:
    """The field with the edits of its edit file in ``folder`` (if any).

    Returns ``(edited, edit_file_name, image_sha256)``.
    """
    name = edit_file_name(os.fspath(image), kind, used)
    sha = bytes_sha256(image_bytes) if image_bytes is not None else image_sha256(image)
    p = Path(folder) / name
    if not p.is_file():
        return EditedField(field, None, None), name, sha
    doc = read_edit_file(p, image_sha=sha)
    return with_edits(kind, field, doc), name, sha


def field_dict(edited: EditedField, name: str, **kwargs) -> dict:
    """The field's JSON entry with its ``edits`` entry (``None`` when never reviewed)."""
    d = edited.field.to_dict(**kwargs)
    return add_edit_keys(d, edited.edited, edited.edit_doc, name)


def is_rejected(d: dict) -> bool:
    """True when a field's JSON entry says it was rejected by hand."""
    e = d.get("edits")
    return isinstance(e, dict) and e.get("status") == "rejected"


def split_rejected(dicts: list[dict]) -> tuple[list[dict], list[dict]]:
    """(kept, rejected): rejected fields leave the statistics; listed with their reason."""
    kept = [d for d in dicts if not is_rejected(d)]
    rejected = [{"image": d["image"], "reason": d["edits"].get("reason") or "rejected by hand",
                 "by": d["edits"].get("by", ""), "field": d} for d in dicts if is_rejected(d)]
    return kept, rejected
