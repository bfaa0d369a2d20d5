"""Objective calibrations: µm per pixel for each named objective, kept in a TOML file.

The file (written by ``sectio calibrate``, readable and editable by hand)::

    # sectio objective calibrations
    [objectives."50x"]
    pixel_size_um = 0.1302
    relative_uncertainty = 0.0004
    method = "stage micrometer, 10 µm divisions (line centres fitted, 61 lines)"
    measured = "2026-12-02T17:05:11Z"
    measured_by = "jdoe"
    image = "/data/cal/micrometer_50x.tif"
    microscope = "bench microscope 2"

Where it is, in order: the ``--calibration-file`` option, the ``SECTIO_CALIBRATIONS``
environment variable (point it at a shared file for a lab-wide set), else the per-user
file ``$XDG_CONFIG_HOME/sectio/calibrations.toml`` (``~/.config/...``).
"""

from __future__ import annotations

import os
import tomllib
from pathlib import Path

from ..errors import CalibrationError, OptionError

ENV_FILE = "SECTIO_CALIBRATIONS"
HEADER = "# sectio objective calibrations (written by 'sectio calibrate'; editable by hand)\n"


def calibration_file_path(path=None) -> Path:
    """The calibration file to use: ``path``, else $SECTIO_CALIBRATIONS, else per user."""
    if path:
        return Path(path)
    if os.environ.get(ENV_FILE):
        return Path(os.environ[ENV_FILE])
    base = os.environ.get("XDG_CONFIG_HOME") or os.path.join(os.path.expanduser("~"), ".config")
    return Path(base) / "sectio" / "calibrations.toml"


def read_calibrations(path) -> dict:
    """The ``objectives`` table of a calibration file ({} if the file does not exist)."""
    p = Path(path)
    if not p.exists():
        return {}
    try:
        doc = tomllib.loads(p.read_text(encoding="utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise CalibrationError(f"{p}: not a valid calibration file ({exc}); fix or remove it.")\
            from None
    table = doc.get("objectives", {})
    if not isinstance(table, dict):
        raise CalibrationError(f"{p}: 'objectives' must be a table of [objectives.NAME] "
                               "entries; fix or remove it.")
    return table


def lookup_objective(name: str, path=None) -> dict:
    """The calibration record of objective ``name``; one sentence if it is missing."""
    p = calibration_file_path(path)
    table = read_calibrations(p)
    entry = table.get(name)
    if entry is None:
        known = ", ".join(sorted(table)) or "none yet"
        where = "" if p.exists() else " (the file does not exist)"
        raise OptionError(
            f"--objective {name!r} is not calibrated in {p}{where}; known: {known}; measure "
            f"it with 'sectio calibrate IMAGE --objective {name} --division 10um'."
        )
    size = entry.get("pixel_size_um") if isinstance(entry, dict) else None
    if not isinstance(size, (int, float)) or isinstance(size, bool) or not size > 0:
        raise CalibrationError(f"{p}: objectives.{name}.pixel_size_um must be a positive "
                               "number of µm; re-run 'sectio calibrate' for it.")
    return {**entry, "name": name, "pixel_size_um": float(size), "file": str(p)}


def store_objective(name: str, record: dict, path=None) -> tuple[Path, dict | None]:
    """Write ``record`` for objective ``name`` into the calibration file (atomically).

    Returns the file and the record it replaced (None if new). The replaced record's
    size and date are kept under ``previous`` so that a change can be traced.
    """
    import tomli_w

    if not name or not name.strip():
        raise OptionError("--objective needs a name, e.g. 50x.")
    p = calibration_file_path(path)
    table = read_calibrations(p)
    old = table.get(name)
    new = dict(record)
    if isinstance(old, dict) and "pixel_size_um" in old:
        new["previous"] = {k: old[k] for k in ("pixel_size_um", "measured", "measured_by")
                           if k in old}
    table[name] = new
    p.parent.mkdir(parents=True, exist_ok=True)
    text = HEADER + tomli_w.dumps({"objectives": table})
    tmp = p.with_name(f".{p.name}.{os.getpid()}.tmp")
    tmp.write_text(text, encoding="utf-8")
    os.replace(tmp, p)
    return p, old if isinstance(old, dict) else None
