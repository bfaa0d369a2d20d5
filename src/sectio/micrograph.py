"""Micrographs: grey pixels with a pixel size in micrometres and where that size came from.

``load(path, pixel_size="0.5um")`` reads TIFF (8/16-bit, float; page 1 of a multi-page
file, with a warning) through tifffile and PNG/JPEG/BMP through Pillow, converts colour
to grey, and takes the pixel size from, in order: the ``pixel_size`` argument, a scale bar
in the info strip (``scale_bar="2um"``), the TIFF resolution tags when they carry a
physical unit. Without any of these it refuses with a message that says how to give it.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ._decode import _finite_or_fill, decode_grey, require_regular_file, to_grey
from .errors import CalibrationError, ImageReadError, MeasurementError, OptionError
from .units import parse_length_um

TIFF_SUFFIXES = {".tif", ".tiff"}
OTHER_SUFFIXES = {".png", ".jpg", ".jpeg", ".bmp"}
SUPPORTED = sorted(TIFF_SUFFIXES | OTHER_SUFFIXES)

# TIFF ResolutionUnit: 2 = inch, 3 = centimetre (TIFF 6.0 specification).
_RESUNIT_UM = {2: 25400.0, 3: 10000.0}
_IMAGEJ_UNITS_UM = {
    "micron": 1.0,
    "microns": 1.0,
    "um": 1.0,
    "µm": 1.0,
    "\\u00B5m": 1.0,
    "nm": 1e-3,
    "mm": 1e3,
    "cm": 1e4,
    "m": 1e6,
}


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
        ``"given"``, ``"scale bar"`` or ``"TIFF resolution tags"``.
    path : str
        File the image came from (``"<array>"`` for arrays).
    crop_bottom_px : int
        Rows removed from the bottom (instrument info strip).
    notes : tuple of str
        Things worth knowing about how the image was read.
    """

    image: np.ndarray
    pixel_size_um: float
    pixel_size_source: str = "given"
    path: str = "<array>"
    crop_bottom_px: int = 0
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
            "shape_px": list(self.image.shape),
            "original_shape_px": list(self.original_shape),
            "notes": list(self.notes),
            **({"calibration": self.calibration} if self.calibration else {}),
        }


def _tiff_pixel_size_um(tif, page) -> tuple[float | None, str]:
    """Pixel size from TIFF tags: resolution with a physical unit, or ImageJ 'unit'."""
    tags = page.tags
    xres = tags.get("XResolution")
    yres = tags.get("YResolution")
    unit = tags.get("ResolutionUnit")
    if xres is None:
        return None, ""

    def ratio(tag):
        v = tag.value
        return (
            v[0] / v[1]
            if isinstance(v, tuple) and v[1]
            else float(v)
            if not isinstance(v, tuple)
            else 0.0
        )

    px_per_unit_x = ratio(xres)
    px_per_unit_y = ratio(yres) if yres is not None else px_per_unit_x
    unit_value = int(unit.value) if unit is not None else 2
    unit_um = _RESUNIT_UM.get(unit_value)
    if unit_um is None:
        ij = tif.imagej_metadata or {}
        unit_um = _IMAGEJ_UNITS_UM.get(str(ij.get("unit", "")).strip())
    if unit_um is None or px_per_unit_x <= 0:
        return None, ""
    # Many writers put a default 72 dpi with unit inch: that is not a calibration.
    if unit_value == 2 and round(px_per_unit_x) in (72, 96, 300) and px_per_unit_x == px_per_unit_y:
        return None, "TIFF resolution tags hold a screen/print dpi, not a calibration"
    sx, sy = unit_um / px_per_unit_x, unit_um / px_per_unit_y
    if not np.isclose(sx, sy, rtol=1e-3):
        raise CalibrationError(
            f"{tif.filename}: the TIFF tags give non-square pixels ({sx:.4g} x {sy:.4g} µm); "
            "resample to square pixels or give --pixel-size."
        )
    return sx, "TIFF resolution tags"


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
    original_shape = tuple(int(v) for v in grey.shape)
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
) -> Micrograph:
    """Read a micrograph file and its pixel size.

    Parameters
    ----------
    path : str or path-like
        TIFF (8/16-bit or float), PNG, JPEG or BMP file.
    pixel_size : str or float, optional
        Pixel size with a unit (``"0.5um"``, ``"500nm"``); a bare float is micrometres.
    crop_bottom : int
        Rows to drop from the bottom (an instrument info strip).
    scale_bar : str or float, optional
        Length of a scale bar drawn in the info strip (``"2um"``); the bar is found and
        measured, and the strip below the image is excluded.
    max_image_memory : str or int, optional
        Budget of decoded float pixels (``"4GiB"``); default ``$SECTIO_MAX_IMAGE_MEMORY``
        or 1.5 GiB. The file's header is checked against it before anything is decoded.

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
    grey, tag_size, tag_source, notes = decode_grey(
        path, tiff=suffix in TIFF_SUFFIXES, max_image_memory=max_image_memory,
        tiff_tags=_tiff_pixel_size_um)
    if tag_size is None and tag_source:
        notes.append(tag_source)
    calibration: dict = {}
    if pixel_size is not None:
        size = parse_length_um(
            pixel_size,
            what="--pixel-size",
            default_unit="um" if isinstance(pixel_size, (int, float)) else None,
        )
        source = "given"
    elif scale_bar is not None:
        from .scalebar import measure_scale_bar

        bar_um = parse_length_um(scale_bar, what="--scale-bar")
        found = measure_scale_bar(grey, bar_length_um=bar_um, path=path)
        size, source = found.pixel_size_um, "scale bar"
        calibration = found.to_dict()
        crop_bottom = max(int(crop_bottom or 0), found.strip_height_px)
    elif tag_size is not None:
        size, source = tag_size, tag_source
    else:
        raise CalibrationError(
            f"{path} carries no pixel size; give one with --pixel-size (e.g. 0.5um or 500nm) "
            "or --scale-bar with the bar's length."
        )
    return _finish(grey, size, source, path, crop_bottom, notes, calibration)
