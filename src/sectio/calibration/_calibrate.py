"""Measure an objective's µm/px from a calibration image and store it (``sectio calibrate``)."""

from __future__ import annotations

import getpass
import hashlib
import os
import warnings
from datetime import UTC, datetime
from pathlib import Path

from ..errors import CalibrationWarning, OptionError
from ..units import parse_length_um
from . import check_pixel_size_um


def _who() -> str:
    try:
        return getpass.getuser()
    except (KeyError, OSError):  # no login name in some containers
        return "unknown"


def calibrate_objective(image, *, objective: str, division=None, scale_bar=None,
                        calibration_file=None, microscope=None, measured_by=None,
                        write: bool = True, now: datetime | None = None):
    """Measure ``image`` and (if ``write``) store the result for ``objective``.

    Exactly one of ``division`` (stage-micrometer line spacing, e.g. ``"10um"``) and
    ``scale_bar`` (bar length, or ``"auto"``) is given. Returns ``(record, file, replaced)``.
    """
    from .. import __version__
    from ..micrograph import load
    from ._micrometer import measure_ruling
    from ._objectives import calibration_file_path, read_calibrations, store_objective

    if (division is None) == (scale_bar is None):
        raise OptionError("sectio calibrate needs --division (the stage micrometer's line "
                          "spacing, e.g. 10um) or --scale-bar (the bar's length), not both.")
    path = os.fspath(image)
    if division is not None:
        division_um = parse_length_um(division, what="--division")
        with warnings.catch_warnings():  # the 1 µm is a placeholder: the scale is measured
            warnings.simplefilter("ignore", CalibrationWarning)
            mg = load(path, pixel_size="1um")
        ruling = measure_ruling(mg.image, path=path)
        size = division_um / ruling.period_px
        unc = ruling.period_se_px / ruling.period_px
        method = (f"stage micrometer, {division_um:g} µm divisions (line centres fitted, "
                  f"{ruling.lines} lines)")
        details = {"division_um": division_um, **ruling.to_dict()}
    else:
        mg = load(path, scale_bar=scale_bar)
        cal = mg.calibration
        size, unc = mg.pixel_size_um, float(cal.get("relative_uncertainty", 0.0))
        method = f"scale bar of {cal['bar_length_um']:g} µm ({cal['bar_length_px']:.1f} px)"
        details = {k: cal[k] for k in ("bar_length_um", "bar_length_px", "bar_label")
                   if k in cal}
    check_pixel_size_um(size, what=f"the calibration image for objective {objective}",
                        path=path)
    stamp = (now or datetime.now(UTC)).strftime("%Y-%m-%dT%H:%M:%SZ")
    record = {
        "pixel_size_um": float(size),
        "relative_uncertainty": float(unc),
        "method": method,
        "measured": stamp,
        "measured_by": measured_by or _who(),
        "image": str(Path(path).resolve()),
        "image_sha256": hashlib.sha256(Path(path).read_bytes()).hexdigest(),
        "sectio_version": __version__,
        "details": details,
    }
    if microscope:
        record["microscope"] = microscope
    if not write:
        file = calibration_file_path(calibration_file)
        return record, file, read_calibrations(file).get(objective)
    file, old = store_objective(objective, record, calibration_file)
    return record, file, old
