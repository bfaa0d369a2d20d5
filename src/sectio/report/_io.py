"""Atomic file writing: a temp file in the same folder, then ``os.replace``.

An interrupted run never leaves a half-written result: either the old file or the new one.
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


def atomic_write_bytes(path: str | os.PathLike, data: bytes) -> Path:
    """Write ``data`` to ``path`` atomically (temp file + rename)."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        os.chmod(tmp, 0o644)  # mkstemp makes 0600; results are ordinary readable files
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
    return path


def atomic_write_text(path: str | os.PathLike, text: str) -> Path:
    return atomic_write_bytes(path, text.encode("utf-8"))


def _jsonable(obj):
    if isinstance(obj, dict):
        return {str(k): _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_jsonable(v) for v in obj]
    if isinstance(obj, (np.floating, float)):
        v = float(obj)
        return v if math.isfinite(v) else None
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    if isinstance(obj, np.ndarray):
        return _jsonable(obj.tolist())
    if isinstance(obj, Path):
        return str(obj)
    return obj


def to_json_text(doc: dict) -> str:
    """Deterministic JSON: NaN/inf become null, numpy scalars become Python numbers."""
    return json.dumps(_jsonable(doc), indent=2, sort_keys=False, ensure_ascii=False) + "\n"


def write_json(path: str | os.PathLike, doc: dict) -> Path:
    """Write a JSON document atomically (NaN written as null)."""
    return atomic_write_text(path, to_json_text(doc))


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
    v = _jsonable(v)
    if v is None:
        return ""
    if isinstance(v, float):
        return repr(v)
    if isinstance(v, list):
        return ";".join(str(x) for x in v)
    return v
