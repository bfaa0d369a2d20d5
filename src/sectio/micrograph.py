"""Micrographs: grey pixels with a pixel size in micrometres and where that size came from.

``load(path, pixel_size="0.5um")`` reads TIFF (8/16-bit, float; page 1 of a multi-page
file, with a warning) through tifffile and PNG/JPEG/BMP through Pillow, converts colour
to grey, leaves out any instrument info strip at the bottom or top, and takes the pixel
size from, in order: the ``pixel_size`` argument, a calibrated ``objective``, a scale bar
in the info strip (``scale_bar="2um"`` or ``"auto"``), the file's own metadata (see
:mod:`sectio.calibration`). Without any of these it refuses with a message that says how
to give it.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from ._decode import _finite_or_fill, decode_grey, require_regular_file, to_grey
from .calibration import file_sizes
from .errors import CalibrationError, ImageReadError, MeasurementError, OptionError

TIFF_SUFFIXES = {".tif", ".tiff"}
OTHER_SUFFIXES = {".png", ".jpg", ".jpeg", ".bmp"}
SUPPORTED = sorted(TIFF_SUFFIXES | OTHER_SUFFIXES)

@dataclass(frozen=True)
class Micrograph:
    """A grey micrograph ready for measurement.

    Attributes
    ----------
    image : (M, N) ndarray of float32
        Grey levels scaled to [0, 1] (dark = 0), after any crop.
    pixel_size_um : float
        Side of one (square) pixel in micrometres.
    pixel_size_source : str
        ``"given"``, ``"objective NAME"``, ``"scale bar"`` or the file's metadata
        (e.g. ``"OME-XML PhysicalSizeX/Y"``, ``"TIFF resolution tags"``).
    path : str
        File the image came from (``"<array>"`` for arrays).
    crop_bottom_px, crop_top_px : int
        Rows removed from the bottom and top (instrument info strips).
    notes : tuple of str
        Things worth knowing about how the image was read.
    """

    image: np.ndarray
    pixel_size_um: float
    pixel_size_source: str = "given"
    path: str = "<array>"
    crop_bottom_px: int = 0
    crop_top_px: int = 0
    original_shape: tuple[int, int] = (0, 0)
    notes: tuple[str, ...] = field(default_factory=tuple)
    calibration: dict = field(default_factory=dict)

    @property
    def name(self) -> str:
        return os.path.basename(self.path)

    @property
    def shape(self) -> tuple[int, int]:
        return self.image.shape  # type: ignore[return-value]

    @property
    def area_um2(self) -> float:
        return float(self.image.shape[0] * self.image.shape[1] * self.pixel_size_um**2)

    def to_dict(self) -> dict:
        return {
            "image": self.path,
            "pixel_size_um": self.pixel_size_um,
            "pixel_size_source": self.pixel_size_source,
            "crop_bottom_px": self.crop_bottom_px,
            "crop_top_px": self.crop_top_px,
            "shape_px": list(self.image.shape),
            "original_shape_px": list(self.original_shape),
            "notes": list(self.notes),
            **({"calibration": self.calibration} if self.calibration else {}),
        }


def from_array(
    image,
    *,
    pixel_size_um: float,
    path: str = "<array>",
    pixel_size_source: str = "given",
    crop_bottom: int = 0,
) -> Micrograph:
    """Wrap a 2-D (or RGB) array as a :class:`Micrograph`, scaled to [0, 1]."""
    notes: list[str] = []
    grey = _finite_or_fill(to_grey(np.asarray(image), path, notes), path, notes)
    return _finish(grey, pixel_size_um, pixel_size_source, path, crop_bottom, notes, {})


def _finish(grey, pixel_size_um, source, path, crop_bottom, notes, calibration) -> Micrograph:
    original_shape = (int(grey.shape[0]), int(grey.shape[1]))
    crop_bottom = int(crop_bottom or 0)
    if crop_bottom < 0 or (crop_bottom > 0 and crop_bottom >= grey.shape[0] - 16):
        raise OptionError(
            f"--crop-bottom {crop_bottom} does not fit {path} ({grey.shape[0]} rows); "
            "give the height of the info strip in pixels, less than the image height."
        )
    if crop_bottom:
        grey = grey[: grey.shape[0] - crop_bottom]
    if min(grey.shape) < 16:
        raise ImageReadError(
            f"{path} is only {grey.shape[1]} x {grey.shape[0]} pixels; "
            "use an image at least 16 pixels on each side."
        )
    lo, hi = float(grey.min()), float(grey.max())
    if hi - lo <= 1e-12 * max(1.0, abs(hi)):
        raise MeasurementError(
            f"{path} is blank (every pixel has the value {lo:g}); check the file or the exposure."
        )
    if math.isfinite(hi - lo):
        img = ((grey - lo) / (hi - lo)).astype(np.float32)
    else:  # values near the float64 limits: halve first so that the span stays finite
        img = ((grey * 0.5 - lo * 0.5) / (hi * 0.5 - lo * 0.5)).astype(np.float32)
    if not (pixel_size_um and np.isfinite(pixel_size_um) and pixel_size_um > 0):
        raise CalibrationError(f"{path}: pixel size must be a positive number of micrometres.")
    return Micrograph(
        image=img,
        pixel_size_um=float(pixel_size_um),
        pixel_size_source=source,
        path=str(path),
        crop_bottom_px=crop_bottom,
        original_shape=original_shape,  # type: ignore[arg-type]
        notes=tuple(notes),
        calibration=calibration,
    )


def load(
    path: str | os.PathLike,
    *,
    pixel_size: str | float | None = None,
    crop_bottom: int = 0,
    scale_bar: str | float | None = None,
    max_image_memory: str | int | None = None,
    objective: str | None = None,
    calibration_file: str | os.PathLike | None = None,
    keep_strip: bool = False,
) -> Micrograph:
    """Read a micrograph file and its pixel size.

    Parameters
    ----------
    path : str or path-like
        TIFF (8/16-bit or float), PNG, JPEG or BMP file.
    pixel_size : str or float, optional
        Pixel size with a unit (``"0.5um"``, ``"500nm"``); a bare float is micrometres.
    crop_bottom : int
        Rows to drop from the bottom (an instrument info strip); replaces the automatic
        strip search.
    scale_bar : str or float, optional
        Length of a scale bar drawn in the info strip (``"2um"``), or ``"auto"`` to read it
        from the strip's text; the bar is found and measured.
    max_image_memory : str or int, optional
        Budget of decoded float pixels (``"4GiB"``); default ``$SECTIO_MAX_IMAGE_MEMORY``
        or 1.5 GiB. The file's header is checked against it before anything is decoded.
    objective : str, optional
        Name of an objective calibrated with ``sectio calibrate`` (e.g. ``"50x"``).
    calibration_file : path, optional
        The objectives' calibration file (default: see :mod:`sectio.calibration`).
    keep_strip : bool
        Measure the info strip's rows too (by default strips at the bottom or top are
        found and left out).

    The order in which the pixel size is chosen, and how sources are compared, is
    described in :mod:`sectio.calibration`.

    Returns
    -------
    Micrograph
    """
    path = str(path)
    p = Path(path)
    if not p.exists():
        raise ImageReadError(f"Cannot find the image file {path}; check the path and spelling.")
    if p.is_dir():
        raise ImageReadError(f"{path} is a folder, not an image; name the image files inside it.")
    require_regular_file(path)
    suffix = p.suffix.lower()
    if suffix not in TIFF_SUFFIXES | OTHER_SUFFIXES:
        raise ImageReadError(
            f"{path}: unsupported file type {suffix or '(none)'}; "
            f"use one of {', '.join(SUPPORTED)}."
        )
    # the TIFF callback returns every pixel size the file states and notes on the rest
    grey, sources, meta_notes, notes = decode_grey(
        path, tiff=suffix in TIFF_SUFFIXES, max_image_memory=max_image_memory,
        tiff_tags=file_sizes)
    return _calibrated(grey, path, [*notes, *(meta_notes or [])], sources or [],
                       pixel_size=pixel_size, objective=objective,
                       calibration_file=calibration_file, scale_bar=scale_bar,
                       crop_bottom=crop_bottom, keep_strip=keep_strip)


def _calibrated(grey, path, notes, sources, **options) -> Micrograph:
    """Find the info strip, choose the pixel size (:mod:`sectio.calibration`), finish."""
    from .calibration import calibrate_image

    cal = calibrate_image(grey, path=path, file_sources=sources, **options)
    original_shape = (int(grey.shape[0]), int(grey.shape[1]))
    mg = _finish(grey[cal.crop_top_px:], cal.pixel_size_um, cal.source, path,
                 cal.crop_bottom_px, [*notes, *cal.notes], cal.details)
    return replace(mg, crop_top_px=cal.crop_top_px, original_shape=original_shape)
