"""Atomic file writing (a temp file in the same folder, then ``os.replace``) and the one
JSON writer of the project.

An interrupted run never leaves a half-written result: either the old file or the new one.
Every JSON file sectio writes goes through :func:`to_json_text` (NaN/inf -> null, numpy
scalars -> Python numbers).
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
import tempfile
from pathlib import Path

import numpy as np

from ._safe import display_text


def atomic_write_bytes(path: str | os.PathLike, data: bytes) -> Path:
    """Write ``data`` to ``path`` atomically (temp file + rename)."""
    from ._safe import output_error

    path = Path(path)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        # the temp name stays short: a long result name must not fail for its temp file
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name[:40]}.", suffix=".tmp",
                                   dir=path.parent)
    except OSError as exc:
        raise output_error(path, exc) from None
    try:
        os.chmod(tmp, 0o644)  # mkstemp makes 0600; results are ordinary readable files
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException as exc:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        if isinstance(exc, OSError):
            raise output_error(path, exc) from None
        raise
    return path


def atomic_write_text(path: str | os.PathLike, text: str) -> Path:
    """Write ``text`` (UTF-8) to ``path`` atomically."""
    return atomic_write_bytes(path, text.encode("utf-8"))


def jsonable(obj):
    """``obj`` with numpy scalars/arrays, tuples and paths made JSON-ready; NaN/inf -> None."""
    if isinstance(obj, str):
        return display_text(obj)
    if isinstance(obj, dict):
        return {display_text(str(k)): jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [jsonable(v) for v in obj]
    if isinstance(obj, (np.floating, float)):
        v = float(obj)
        return v if math.isfinite(v) else None
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    if isinstance(obj, np.ndarray):
        return jsonable(obj.tolist())
    if isinstance(obj, Path):
        return display_text(str(obj))
    return obj


def to_json_text(doc: dict, *, indent: int = 2, sort_keys: bool = False) -> str:
    """Deterministic JSON: NaN/inf become null, numpy scalars become Python numbers."""
    return (
        json.dumps(jsonable(doc), indent=indent, sort_keys=sort_keys, ensure_ascii=False)
        + "\n"
    )


def write_json(
    path: str | os.PathLike, doc: dict, *, indent: int = 2, sort_keys: bool = False
) -> Path:
    """Write a JSON document atomically (NaN written as null); see :func:`to_json_text`."""
    return atomic_write_text(path, to_json_text(doc, indent=indent, sort_keys=sort_keys))


def png_bytes(rgb: np.ndarray) -> bytes:
    """PNG bytes of an RGB (or grey) uint8 array (Pillow; zlib level 1: several times
    faster than the default level 6, files about a third larger)."""
    from PIL import Image

    buf = io.BytesIO()
    Image.fromarray(np.ascontiguousarray(rgb)).save(buf, format="PNG", compress_level=1)
    return buf.getvalue()


def write_csv(
    path: str | os.PathLike, rows: list[dict], *, columns: list[str] | None = None
) -> Path:
    """Write a list of flat dicts as CSV atomically (header from ``columns`` or the first row)."""
    if columns is None:
        columns = []
        for row in rows:
            for k in row:
                if k not in columns:
                    columns.append(k)
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=columns, extrasaction="ignore", lineterminator="\n")
    w.writeheader()
    for row in rows:
        w.writerow({k: _csv_value(row.get(k)) for k in columns})
    return atomic_write_text(path, buf.getvalue())


def _csv_value(v):
    v = jsonable(v)
    if v is None:
        return ""
    if isinstance(v, float):
        return repr(v)
    if isinstance(v, list):
        return ";".join(str(x) for x in v)
    return v
