"""One unit of work of a study: measure one field (grains or particles) of one image.

:func:`field_key` is the content hash that names a field's result (image bytes + the
canonical JSON of the options + the sectio version), so a rerun recognises finished work
even when files are renamed or the output folder moves. :func:`run_field` runs in a worker
process (local pool or a Dask worker, possibly on another machine): it receives the image
bytes, not a path, and returns a JSON-ready record plus the overlay PNG; the caller writes
both atomically.
"""

from __future__ import annotations

import functools
import hashlib
import json
import os
import tempfile
import warnings
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

from .. import __version__

RECORD_SCHEMA = "sectio/study-field@1"


@dataclass(frozen=True)
class FieldTask:
    """What a worker needs to measure one field."""

    key: str
    kind: str  # "grains" or "particles"
    image_name: str  # as shown in the outputs (relative to the study folder)
    image_bytes: bytes
    calibration: dict
    options: dict  # make_options kwargs (grains) or measure_particles kwargs (particles)
    tmp_dir: str | None = None  # where the image copy goes (the output folder's temp area)
    edits: dict | None = None  # the field's edit file (sectio.review.editfile), if any
    edit_file: str = ""  # its name in the specimen's folder


def canonical_json(obj) -> bytes:
    return json.dumps(obj, sort_keys=True, separators=(",", ":"), ensure_ascii=True,
                      default=str).encode("ascii")


@functools.lru_cache(maxsize=1)
def code_fingerprint() -> str:
    """sha256 of sectio's own source files: a cached field is reused only by the same code."""
    root = Path(__file__).resolve().parents[1]
    h = hashlib.sha256()
    for p in sorted(root.rglob("*.py")) + sorted(root.rglob("*.toml")):
        h.update(p.relative_to(root).as_posix().encode())
        h.update(p.read_bytes())
    return h.hexdigest()[:16]


def field_key(image_bytes: bytes, kind: str, calibration: dict, options: dict) -> str:
    """sha256 of the image bytes, the canonical JSON of what is measured, and the version."""
    h = hashlib.sha256()
    h.update(image_bytes)
    h.update(b"\0")
    h.update(canonical_json({"kind": kind, "calibration": calibration, "options": options,
                             "sectio": __version__, "code": code_fingerprint()}))
    return h.hexdigest()


def _replace_strings(obj, old: str, new: str):
    if isinstance(obj, str):
        return obj.replace(old, new)
    if isinstance(obj, dict):
        return {k: _replace_strings(v, old, new) for k, v in obj.items()}
    if isinstance(obj, list):
        return [_replace_strings(v, old, new) for v in obj]
    return obj


def _measure(task: FieldTask, path: str) -> tuple[dict, bytes]:
    from ..micrograph import load
    from ..report import jsonable
    from ..specimen import measure_field

    cal = task.calibration
    mg = load(path, pixel_size=cal.get("pixel_size"), crop_bottom=cal.get("crop_bottom", 0),
              scale_bar=cal.get("scale_bar"), objective=cal.get("objective"),
              calibration_file=cal.get("calibration_file"),
              keep_strip=bool(cal.get("keep_strip", False)))
    options: Any = task.options
    if task.kind == "grains":
        from ..grains import make_options

        opts = dict(task.options)
        if "angles_deg" in opts:
            opts["angles_deg"] = tuple(opts["angles_deg"])
        options = make_options(**opts)
    # Hand edits: the edit file goes beside the image in the worker's folder, where
    # measure_field looks for it (the study checked its image hash against these bytes).
    folder = Path(path).parent
    if task.edits is not None:
        from ..review.editfile import edit_file_name, write_edit_file

        write_edit_file(folder / edit_file_name(path, task.kind), task.edits)
    measured = measure_field(task.kind, mg, options, chords=True, edit_folder=folder,
                             image_bytes=task.image_bytes)
    from ..review.runs import source_entry

    record = replace(measured.record, source=source_entry(
        task.kind, image_sha=measured.image_sha256 or "", calibration=task.calibration,
        options=task.options, edit_file=task.edit_file))
    return jsonable(record.payload()), measured.overlay_png()


def run_field(task: FieldTask) -> tuple[dict, bytes | None]:
    """Measure one field; returns ``(record, overlay_png_bytes)``.

    A field the user's input makes unmeasurable (unreadable file, no calibration, nothing
    found) gives a record with ``status = "failed"`` and the reason; such a record is
    deterministic and is kept like a result. Any other exception gives ``status = "error"``:
    reported, but not kept, so that a rerun tries the field again.
    """
    from ..errors import InputError

    base = {"schema": RECORD_SCHEMA, "key": task.key, "kind": task.kind,
            "image": task.image_name, "sectio_version": __version__}
    # a short, safe name for the copy: any image name (bytes, length) works; messages and
    # records get the image's own name back below
    name = "field" + Path(task.image_name).suffix.lower()[:8]
    if task.tmp_dir:
        os.makedirs(task.tmp_dir, exist_ok=True)
    with tempfile.TemporaryDirectory(prefix="field-", dir=task.tmp_dir or None) as tmp:
        path = os.path.join(tmp, name)
        with open(path, "wb") as fh:
            fh.write(task.image_bytes)
        try:
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                record, png = _measure(task, path)
        except InputError as exc:
            reason = str(exc).replace(path, task.image_name).replace(tmp, "")
            return {**base, "status": "failed", "reason": reason}, None
        except Exception as exc:  # noqa: BLE001 - recorded, not cached; the study goes on
            reason = f"internal error {type(exc).__name__}: {exc}".replace(path, task.image_name)
            return {**base, "status": "error", "reason": reason}, None
        notes = sorted({str(w.message).replace(path, task.image_name) for w in caught})
        record = _replace_strings(record, path, task.image_name)
    return {**base, "status": "ok", "warnings": notes, **record}, png


def init_worker(parent_pid: int | None = None) -> None:
    """Worker start-up: one BLAS / OpenMP thread per process (the pool gives parallelism);
    the worker ends when the run's process ends, however it ends."""
    from ._guard import die_with_parent

    die_with_parent(parent_pid)
    for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        os.environ.setdefault(var, "1")
    warnings.simplefilter("ignore")  # warnings are captured per field in run_field
