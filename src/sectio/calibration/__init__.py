"""How sectio decides the pixel size of a micrograph, and the info strip it leaves out.

Sources, in the order they are used (the first one present wins):

1. ``--pixel-size`` typed by the user (``0.5um``, ``500nm``, ``0.02mm``, ``1e-5in``);
2. ``--objective NAME``: the µm/px stored for that objective by ``sectio calibrate``;
3. ``--scale-bar LENGTH`` (or ``auto``, the length read from the strip's text): the bar in
   the info strip is measured;
4. what the file states about itself (:mod:`._metadata`): SEM/FIB vendor metadata, then
   OME-XML, MetaSeries, ImageJ, and last the baseline TIFF resolution tags.

Every other source the file holds is compared with the one used; a disagreement above
2 % is stated in the notes, listed under ``calibration.sources`` in the JSON and warned
about (:class:`sectio.errors.CalibrationWarning`). A pixel size outside 0.1 nm – 1 mm is
refused: no light or electron micrograph of a metal section has such pixels.
"""

from __future__ import annotations

import warnings
from collections.abc import Sequence
from dataclasses import dataclass, field

from ..errors import CalibrationError, CalibrationWarning, OptionError
from ._metadata import FileSize, file_sizes, unit_um
from ._strip import InfoStrip, find_info_strips

__all__ = ["DISAGREEMENT", "ENV_FILE", "MAX_PIXEL_UM", "MIN_PIXEL_UM", "FileSize", "InfoStrip",
           "Resolved", "RulingMeasurement", "calibrate_image", "calibrate_objective",
           "calibration_file_path", "check_pixel_size_um", "file_sizes", "find_info_strips",
           "lookup_objective", "measure_ruling", "read_bar_length", "read_calibrations",
           "resolve_pixel_size", "store_objective", "unit_um"]

MIN_PIXEL_UM = 1e-4  # 0.1 nm
MAX_PIXEL_UM = 1e3  # 1 mm
DISAGREEMENT = 0.02  # relative difference above which two sources are said to disagree


def check_pixel_size_um(size_um: float, *, what: str, path: str = "",
                        error=CalibrationError) -> float:
    """``size_um`` if it lies within 0.1 nm – 1 mm per pixel; else one sentence, raised."""
    if not MIN_PIXEL_UM * (1 - 1e-9) <= size_um <= MAX_PIXEL_UM * (1 + 1e-9):
        where = f"{path}: " if path else ""
        raise error(
            f"{where}a pixel size of {size_um:.4g} µm from {what} is outside the plausible "
            "0.1 nm to 1 mm; check the number and its unit (e.g. 0.5um, 500nm, 0.02mm)."
        )
    return float(size_um)


@dataclass(frozen=True)
class Resolved:
    """The pixel size used, where it came from, and what else the file said."""

    pixel_size_um: float
    source: str
    details: dict = field(default_factory=dict)
    notes: tuple[str, ...] = ()


def _relative(a: float, b: float) -> float:
    return abs(a / b - 1.0)


def resolve_pixel_size(
    *,
    path: str,
    typed_um: float | None = None,
    typed_text: str | None = None,
    objective: dict | None = None,
    bar: dict | None = None,
    file_sources: Sequence[FileSize] = (),
) -> Resolved:
    """Choose the pixel size by the order of the module docstring and compare the rest.

    Parameters
    ----------
    path : str
        The image, for messages.
    typed_um, typed_text : float and str, optional
        ``--pixel-size`` in µm and as typed.
    objective : dict, optional
        An objective calibration record (``pixel_size_um``, ``name``, ``file``, ...).
    bar : dict, optional
        A scale-bar measurement (:meth:`sectio.scalebar.ScaleBar.to_dict`).
    file_sources : list of FileSize
        What the file states, most trusted first.
    """
    notes: list[str] = []
    details: dict = {}
    if typed_um is not None:
        size = check_pixel_size_um(typed_um, what=f"--pixel-size {typed_text or typed_um}",
                                   error=OptionError)
        source = "given"
    elif objective is not None:
        size = check_pixel_size_um(objective["pixel_size_um"],
                                   what=f"the calibration of objective {objective['name']}",
                                   path=objective.get("file", ""))
        source = f"objective {objective['name']}"
        details["objective"] = dict(objective)
    elif bar is not None:
        size = check_pixel_size_um(bar["pixel_size_um"], what="the scale bar", path=path)
        source = "scale bar"
        details.update(bar)
    else:
        usable = [s for s in file_sources if s.square]
        if not file_sources:
            raise CalibrationError(
                f"{path} carries no pixel size; give one with --pixel-size (e.g. 0.5um or "
                "500nm), --objective with a calibrated objective, or --scale-bar with the "
                "bar's length (or auto)."
            )
        if not usable:
            s = file_sources[0]
            raise CalibrationError(
                f"{path}: the {s.source} give non-square pixels ({s.width_um:.4g} x "
                f"{s.height_um:.4g} µm); resample to square pixels or give --pixel-size."
            )
        chosen = usable[0]
        size = check_pixel_size_um(chosen.width_um, what=f"the {chosen.source}", path=path)
        source = chosen.source
    sources = []
    for s in file_sources:
        entry = {**s.to_dict(), "used": s.source == source}
        if not s.square:
            entry["non_square"] = True
            if source == "given":
                notes.append(f"the {s.source} give non-square pixels ({s.width_um:.4g} x "
                             f"{s.height_um:.4g} µm); the typed --pixel-size is used")
        elif s.source != source:
            diff = _relative(s.width_um, size)
            entry["differs_by_pct"] = round(100 * diff, 3)
            if diff > DISAGREEMENT:
                msg = (f"{path}: the {s.source} say {s.width_um:.5g} µm per pixel, "
                       f"{100 * diff:.1f} % away from the {size:.5g} µm of the "
                       f"{'typed --pixel-size' if source == 'given' else source} that is used")
                notes.append(msg.split(": ", 1)[1])
                warnings.warn(msg + "; check which is right.", CalibrationWarning, stacklevel=3)
        sources.append(entry)
    details["sources"] = sources
    details["used"] = source
    return Resolved(float(size), source, details, tuple(notes))


# After resolve_pixel_size: _apply imports it from this package.
from ._apply import calibrate_image  # noqa: E402
from ._objectives import (  # noqa: E402
    ENV_FILE,
    calibration_file_path,
    lookup_objective,
    read_calibrations,
    store_objective,
)

#: imported on first use (scipy and Pillow stay out of ``sectio --help``)
_LAZY = {"calibrate_objective": "_calibrate", "RulingMeasurement": "_micrometer",
         "measure_ruling": "_micrometer", "read_bar_length": "_label"}


def __getattr__(name: str):
    if name in _LAZY:
        import importlib

        return getattr(importlib.import_module(f"{__name__}.{_LAZY[name]}"), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
