"""Micrographs: grey pixels with a pixel size in micrometres and where that size came from.

``load(path, pixel_size="0.5um")`` reads TIFF (8/16-bit, float; page 1 of a multi-page
file, with a warning) through tifffile and PNG/JPEG/BMP through Pillow, converts colour
to grey, and takes the pixel size from, in order: the ``pixel_size`` argument, a scale bar
in the info strip (``scale_bar="2um"``), the TIFF resolution tags when they carry a
physical unit. Without any of these it refuses with a message that says how to give it.
"""

from __future__ import annotations

import os
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import CalibrationError, ImageReadError, ImageWarning, MeasurementError, OptionError
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


def _to_grey(arr: np.ndarray, path: str, notes: list[str]) -> np.ndarray:
    arr = np.asarray(arr)
    if arr.ndim == 3 and arr.shape[-1] in (3, 4):
        rgb = arr[..., :3].astype(np.float64)
        if not (
            np.array_equal(rgb[..., 0], rgb[..., 1]) and np.array_equal(rgb[..., 1], rgb[..., 2])
        ):
            notes.append("colour image converted to grey (ITU-R BT.709 luminance)")
        # Luminance weights of ITU-R BT.709 (as skimage.color.rgb2gray).
        return rgb @ np.array([0.2125, 0.7154, 0.0721])
    if arr.ndim == 3 and arr.shape[0] in (3, 4) and arr.shape[-1] > 4:
        return _to_grey(np.moveaxis(arr, 0, -1), path, notes)
    if arr.ndim == 3 and arr.shape[-1] == 2:  # grey + alpha
        return arr[..., 0].astype(np.float64)
    if arr.ndim != 2:
        raise ImageReadError(
            f"{path} has shape {arr.shape}, not a 2-D grey or RGB image; "
            "export a single 2-D plane (grey or RGB) and try again."
        )
    return arr.astype(np.float64)


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


def _read_tiff(path: str, notes: list[str]):
    import tifffile

    try:
        with tifffile.TiffFile(path) as tif:
            pages = tif.pages
            if len(pages) == 0:
                raise ImageReadError(f"{path} holds no image pages; re-export it as a TIFF image.")
            if len(pages) > 1:
                warnings.warn(
                    f"{path} has {len(pages)} pages; using page 1 only.", ImageWarning, stacklevel=3
                )
                notes.append(f"multi-page TIFF ({len(pages)} pages): page 1 used")
            page = pages[0]
            arr = page.asarray()
            size, source = _tiff_pixel_size_um(tif, page)
    except ImageReadError:
        raise
    except CalibrationError:
        raise
    except Exception as exc:  # tifffile raises many types for corrupt files
        raise ImageReadError(
            f"{path} could not be read as a TIFF ({type(exc).__name__}); "
            "check that the file is complete and not corrupt, or re-export it."
        ) from None
    return arr, size, source


def _read_other(path: str):
    from PIL import Image, UnidentifiedImageError

    try:
        with Image.open(path) as im:
            im.load()
            if im.mode in ("I;16", "I;16B", "I;16L", "I", "F"):
                arr = np.asarray(im)
            elif im.mode in ("L", "RGB", "RGBA", "LA"):
                arr = np.asarray(im)
            else:
                arr = np.asarray(im.convert("RGB"))
    except (UnidentifiedImageError, OSError, ValueError) as exc:
        raise ImageReadError(
            f"{path} could not be read as an image ({type(exc).__name__}); "
            "check that the file is complete and not corrupt, or re-export it as TIFF or PNG."
        ) from None
    return arr


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
    grey = _to_grey(np.asarray(image), path, notes)
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
    finite = np.isfinite(grey)
    if not finite.all():
        if not finite.any():
            raise MeasurementError(f"{path} holds no finite pixel values; re-export the image.")
        grey = np.where(finite, grey, np.nanmedian(grey[finite]))
        notes.append("non-finite pixels replaced by the median grey level")
    lo, hi = float(grey.min()), float(grey.max())
    if hi - lo <= 1e-12 * max(1.0, abs(hi)):
        raise MeasurementError(
            f"{path} is blank (every pixel has the value {lo:g}); check the file or the exposure."
        )
    img = ((grey - lo) / (hi - lo)).astype(np.float32)
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
    suffix = p.suffix.lower()
    if suffix not in TIFF_SUFFIXES | OTHER_SUFFIXES:
        raise ImageReadError(
            f"{path}: unsupported file type {suffix or '(none)'}; "
            f"use one of {', '.join(SUPPORTED)}."
        )
    notes: list[str] = []
    tag_size, tag_source = None, ""
    if suffix in TIFF_SUFFIXES:
        arr, tag_size, tag_source = _read_tiff(path, notes)
        if tag_size is None and tag_source:
            notes.append(tag_source)
    else:
        arr = _read_other(path)
    grey = _to_grey(arr, path, notes)
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
