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


#: ``--csv-dialect`` choices: name -> (delimiter, decimal mark). ``comma`` is read by any
#: program set to a decimal-point locale; ``semicolon`` by spreadsheets in decimal-comma
#: locales (most of continental Europe, South America).
CSV_DIALECTS = {"comma": (",", "."), "semicolon": (";", ",")}


def write_csv(
    path: str | os.PathLike, rows: list[dict], *, columns: list[str] | None = None,
    dialect: str = "comma", digits: int | None = None,
) -> Path:
    """Write a list of flat dicts as CSV atomically (header from ``columns`` or the first row).

    ``dialect`` is a key of :data:`CSV_DIALECTS`; ``digits`` rounds every float to that many
    significant figures (None: the shortest text that reads back as the same float).
    """
    from ..errors import OptionError

    if dialect not in CSV_DIALECTS:
        raise OptionError(f"--csv-dialect {dialect!r} is not known; choose "
                          f"{' or '.join(CSV_DIALECTS)}.")
    delimiter, decimal = CSV_DIALECTS[dialect]
    if columns is None:
        columns = []
        for row in rows:
            for k in row:
                if k not in columns:
                    columns.append(k)
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=columns, extrasaction="ignore", lineterminator="\n",
                       delimiter=delimiter)
    w.writeheader()
    for row in rows:
        w.writerow({k: _csv_value(row.get(k), digits, decimal) for k in columns})
    return atomic_write_text(path, buf.getvalue())


def round_significant(v: float, digits: int) -> float:
    """``v`` rounded to ``digits`` significant figures (0, NaN and inf unchanged)."""
    if v == 0 or not math.isfinite(v):
        return v
    return float(f"{v:.{digits}g}")


def _csv_number(v: float, digits: int | None) -> str:
    if digits is None:
        return repr(v)
    # positional notation (no exponent) unless the number is very large or very small
    r = round_significant(v, digits)
    if r != 0 and not 1e-6 <= abs(r) < 1e12:
        return f"{r:.{digits - 1}e}"
    return np.format_float_positional(r, trim="-")


def _csv_value(v, digits: int | None = None, decimal: str = "."):
    v = jsonable(v)
    if v is None:
        return ""
    if isinstance(v, float):
        return _csv_number(v, digits).replace(".", decimal)
    if isinstance(v, list):
        return ";".join(str(_csv_value(x, digits, decimal)) for x in v)
    return v
