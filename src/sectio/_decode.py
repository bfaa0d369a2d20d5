"""Decoding image files into one grey plane, safely.

Everything here happens before any measurement: the file must be a regular file (a FIFO
or a device would hang or never end); its header is read first and the decoded size
checked against a memory budget *before* a single pixel is decoded; the colour model is
then turned into grey the way its specification says (or refused with one sentence), and
non-finite values of float images are replaced and said so.

Colour models handled (TIFF 6.0 photometric interpretations; Pillow modes):

* grey (min-is-black; min-is-white is inverted), bilevel (1 bit), 8/16/32-bit and float;
* RGB / RGBA / LA (alpha dropped, said so when some pixels are transparent);
* palette (the colour map applied), CMYK (R = (1 - C)(1 - K), ..., the ICC-free
  conversion Pillow also uses), YCbCr (decoded to RGB);
* refused: complex values, CIE L*a*b*, separated inks other than CMYK, 3-D stacks and
  multi-channel planes that are not colour.

The budget: the grey conversion works on 8-byte floats, so an image of ``h x w`` pixels
with ``s`` samples needs about ``8 h w s`` bytes; above the budget (default 1.5 GiB, the
``max_image_memory`` argument, ``--max-image-memory`` or the ``SECTIO_MAX_IMAGE_MEMORY``
environment variable) the file is refused with :class:`ImageTooLargeError` — unless one of
the :data:`OVER_BUDGET_READERS` (e.g. a tiled reader for huge mosaics) takes it.
"""

from __future__ import annotations

import math
import os
import re
import stat
import warnings
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from .errors import ImageReadError, InputError, OptionError

__all__ = [
    "DEFAULT_MAX_IMAGE_MEMORY",
    "HeaderInfo",
    "ImageTooLargeError",
    "OVER_BUDGET_READERS",
    "decode_grey",
    "format_bytes",
    "image_memory_budget",
    "parse_bytes",
    "require_regular_file",
    "to_grey",
]

#: Default budget of decoded float pixels: 1.5 GiB (sized for a 2-core, ~8 GB machine
#: running two workers side by side).
DEFAULT_MAX_IMAGE_MEMORY = int(1.5 * 2**30)
ENV_BUDGET = "SECTIO_MAX_IMAGE_MEMORY"
_FLOAT_BYTES = 8


class ImageTooLargeError(ImageReadError):
    """An image whose decoded pixels would exceed the memory budget."""

    def __init__(self, message: str, *, header: HeaderInfo, budget: int):
        super().__init__(message)
        self.header = header
        self.budget = budget


@dataclass(frozen=True)
class HeaderInfo:
    """What a file's header says, read before any pixel is decoded."""

    path: str
    format: str  # "TIFF", "PNG", "JPEG", "BMP"
    height: int
    width: int
    samples: int
    planes: int = 1  # > 1 for 3-D stacks

    @property
    def decoded_bytes(self) -> int:
        return self.height * self.width * self.samples * self.planes * _FLOAT_BYTES


#: Readers tried, in order, for an image over the budget: ``reader(header, budget)``
#: returns a 2-D float array (or ``None`` to decline). A tiled reader of huge mosaics
#: registers itself here; without one the image is refused with one sentence.
OVER_BUDGET_READERS: list[Callable[[HeaderInfo, int], np.ndarray | None]] = []

_UNITS = {"": 1, "b": 1, "k": 1e3, "kb": 1e3, "m": 1e6, "mb": 1e6, "g": 1e9, "gb": 1e9,
          "t": 1e12, "tb": 1e12, "kib": 2**10, "mib": 2**20, "gib": 2**30, "tib": 2**40}
_SIZE = re.compile(r"\s*(\d{1,15}(?:\.\d{0,15})?|\.\d{1,15})\s*([A-Za-z]{0,3})\s*")


def parse_bytes(text: str | int | float, *, what: str = "--max-image-memory") -> int:
    """A memory size such as ``'1.5GiB'``, ``'800MB'`` or a number of bytes."""
    if isinstance(text, (int, float)) and not isinstance(text, bool):
        value, factor = float(text), 1.0
    else:
        m = _SIZE.fullmatch(str(text))
        got = _UNITS.get(m.group(2).lower()) if m else None
        if m is None or got is None:
            raise OptionError(f"{what} {str(text)[:40]!r} is not a memory size; give e.g. "
                              "4GiB, 800MB or a number of bytes.")
        value, factor = float(m.group(1)), got
    n = value * factor
    if not (math.isfinite(n) and 2**20 <= n <= 2**50):
        raise OptionError(f"{what} {str(text)[:40]!r} is outside the allowed range "
                          "1 MiB to 1 PiB; give e.g. 4GiB.")
    return int(n)


def format_bytes(n: float) -> str:
    for unit, f in (("TiB", 2**40), ("GiB", 2**30), ("MiB", 2**20), ("KiB", 2**10)):
        if n >= f:
            return f"{n / f:.1f} {unit}"
    return f"{int(n)} bytes"


def image_memory_budget(value=None) -> int:
    """The budget in bytes: ``value``, else ``$SECTIO_MAX_IMAGE_MEMORY``, else 1.5 GiB."""
    if value is not None:
        return parse_bytes(value)
    env = os.environ.get(ENV_BUDGET)
    if env:
        return parse_bytes(env, what=ENV_BUDGET)
    return DEFAULT_MAX_IMAGE_MEMORY


def require_regular_file(path: str) -> None:
    """Refuse FIFOs, devices and sockets (reading them hangs or never ends)."""
    try:
        st = os.stat(path)
    except OSError as exc:
        raise ImageReadError(f"Cannot open the image file {path} "
                             f"({exc.strerror or type(exc).__name__}); check the path and its "
                             "permissions.") from None
    if stat.S_ISDIR(st.st_mode):
        raise ImageReadError(f"{path} is a folder, not an image; name the image files "
                             "inside it.")
    if not stat.S_ISREG(st.st_mode):
        kind = ("a named pipe (FIFO)" if stat.S_ISFIFO(st.st_mode) else
                "a device" if stat.S_ISCHR(st.st_mode) or stat.S_ISBLK(st.st_mode) else
                "not a regular file")
        raise ImageReadError(f"{path} is {kind}, not an image file; copy the image into an "
                             "ordinary file and name that.")


def _check_budget(header: HeaderInfo, budget: int) -> np.ndarray | None:
    """None when the image fits; else the array of a reader that took it, or raise."""
    if header.decoded_bytes <= budget:
        return None
    for reader in OVER_BUDGET_READERS:
        arr = reader(header, budget)
        if arr is not None:
            return arr
    need = header.decoded_bytes
    dims = f"{header.width} x {header.height} pixels" + (
        f" x {header.samples} samples" if header.samples > 1 else "") + (
        f" x {header.planes} planes" if header.planes > 1 else "")
    raise ImageTooLargeError(
        f"{header.path} would need {format_bytes(need)} decoded ({dims}), above the "
        f"{format_bytes(budget)} image memory budget; raise it with --max-image-memory "
        f"{_round_up_gib(need)} (or {ENV_BUDGET}) if the machine has the memory, or crop the "
        "image.", header=header, budget=budget)


def _round_up_gib(n: int) -> str:
    return f"{max(1, math.ceil(n / 2**30))}GiB"


# --------------------------------------------------------------------------- grey
def _opaque_note(alpha: np.ndarray, notes: list[str]) -> None:
    top = np.iinfo(alpha.dtype).max if alpha.dtype.kind in "ui" else 1.0
    if alpha.size and float(alpha.min()) < top:
        notes.append("transparency (alpha channel) ignored: transparent pixels are measured "
                     "with their colour")


def _rgb_to_grey(rgb: np.ndarray, notes: list[str]) -> np.ndarray:
    rgb = rgb[..., :3]
    if not (np.array_equal(rgb[..., 0], rgb[..., 1])
            and np.array_equal(rgb[..., 1], rgb[..., 2])):
        notes.append("colour image converted to grey (ITU-R BT.709 luminance)")
    # Luminance weights of ITU-R BT.709 (as skimage.color.rgb2gray).
    return rgb.astype(np.float64) @ np.array([0.2125, 0.7154, 0.0721])


def to_grey(arr: np.ndarray, path: str, notes: list[str]) -> np.ndarray:
    """A 2-D float64 grey plane from grey, grey+alpha, RGB(A) or planar RGB arrays."""
    arr = np.asarray(arr)
    if arr.dtype.kind == "c":
        raise ImageReadError(f"{path} holds complex values (e.g. a Fourier transform), not a "
                             "micrograph; export the real image or its magnitude.")
    if arr.dtype.kind not in "biuf":
        raise ImageReadError(f"{path} holds {arr.dtype} values, not grey levels; export it as "
                             "an 8- or 16-bit image.")
    if arr.dtype.kind == "b":
        notes.append("bilevel (black and white) image")
        arr = arr.astype(np.uint8)
    if arr.ndim == 3 and arr.shape[-1] in (3, 4):
        if arr.shape[-1] == 4:
            _opaque_note(arr[..., 3], notes)
        return _rgb_to_grey(arr, notes)
    if arr.ndim == 3 and arr.shape[0] in (3, 4) and arr.shape[-1] > 4:
        return to_grey(np.moveaxis(arr, 0, -1), path, notes)
    if arr.ndim == 3 and arr.shape[-1] == 2:  # grey + alpha
        _opaque_note(arr[..., 1], notes)
        return arr[..., 0].astype(np.float64)
    if arr.ndim != 2:
        raise ImageReadError(
            f"{path} has shape {arr.shape}, not a 2-D grey or RGB image; "
            "export a single 2-D plane (grey or RGB) and try again."
        )
    return arr.astype(np.float64)


def _int_scale(arr: np.ndarray) -> float:
    return float(np.iinfo(arr.dtype).max) if arr.dtype.kind in "ui" else 1.0


def cmyk_to_rgb(cmyk: np.ndarray) -> np.ndarray:
    """RGB in [0, 1] from CMYK ink amounts: R = (1 - C)(1 - K) and so on.

    The plain conversion without a colour profile (the one Pillow's ``convert("RGB")``
    uses); enough to recover the grey levels of a micrograph saved as CMYK.
    """
    c = cmyk[..., :4].astype(np.float64) / _int_scale(cmyk)
    k = 1.0 - c[..., 3:4]
    return (1.0 - c[..., :3]) * k


def _finite_or_fill(grey: np.ndarray, path: str, notes: list[str]) -> np.ndarray:
    from .errors import MeasurementError

    finite = np.isfinite(grey)
    if finite.all():
        return grey
    n_bad = int(grey.size - np.count_nonzero(finite))
    if n_bad == grey.size:
        raise MeasurementError(f"{path} holds no finite pixel values; re-export the image.")
    grey = np.where(finite, grey, np.median(grey[finite]))
    notes.append(f"non-finite pixels (NaN or infinity: {n_bad}, "
                 f"{100.0 * n_bad / grey.size:.2g} % of the image) replaced by the median grey "
                 "level; they are measured as flat grey")
    return grey


# --------------------------------------------------------------------------- TIFF
# TIFF 6.0 PhotometricInterpretation codes.
_MINISWHITE, _MINISBLACK, _RGB, _PALETTE, _SEPARATED, _YCBCR = 0, 1, 2, 3, 5, 6


def _read_tiff(path: str, notes: list[str], budget: int, tags: Callable | None):
    import tifffile

    try:
        with tifffile.TiffFile(path) as tif:
            pages = tif.pages
            if len(pages) == 0:
                raise ImageReadError(f"{path} holds no image pages; re-export it as a TIFF "
                                     "image.")
            if len(pages) > 1:
                warnings.warn(f"{path} has {len(pages)} pages; using page 1 only.",
                              _image_warning(), stacklevel=4)
                notes.append(f"multi-page TIFF ({len(pages)} pages): page 1 used")
            page = pages[0]
            if not hasattr(page, "shape") or page.dtype is None:
                raise ImageReadError(f"{path}: the first page of the TIFF has no decodable "
                                     "image data; re-export it.")
            header = _tiff_header(path, page)
            photometric = int(page.photometric)  # type: ignore[union-attr]  # a page, not a frame
            if np.dtype(page.dtype).kind == "c":
                raise ImageReadError(f"{path} holds complex values (e.g. a Fourier "
                                     "transform), not a micrograph; export the real image or "
                                     "its magnitude.")
            if photometric not in (_MINISWHITE, _MINISBLACK, _RGB, _PALETTE, _SEPARATED,
                                   _YCBCR):
                raise ImageReadError(f"{path} uses a colour model (TIFF photometric "
                                     f"{photometric}) sectio does not convert; save it as grey "
                                     "or RGB.")
            if photometric == _SEPARATED and int(getattr(page, "inkset", 1) or 1) != 1:
                raise ImageReadError(f"{path} is separated into inks other than CMYK; save it "
                                     "as grey or RGB.")
            axes = str(page.axes)
            big = _check_budget(header, budget)
            if big is not None:  # a reader of over-budget images gave one grey plane
                arr, photometric, axes = big, _MINISBLACK, "YX"
            else:
                try:
                    arr = page.asarray(maxworkers=1)
                except ValueError as exc:  # a codec tifffile lacks (LZW, JPEG without
                    if "imagecodecs" not in str(exc):  # imagecodecs): Pillow has them
                        raise
                    arr, photometric, axes = _read_pillow(
                        path, notes, budget, formats=("TIFF",), grey=True), _MINISBLACK, "YX"
            size, source = tags(tif, page) if tags else (None, "")
            colormap = (page.colormap  # type: ignore[union-attr]  # a page, not a frame
                        if photometric == _PALETTE else None)
    except InputError:
        raise
    except MemoryError:
        raise ImageReadError(f"{path} does not fit in memory; crop the image or lower "
                             "its size.") from None
    except Exception as exc:  # tifffile raises many types for corrupt files
        raise ImageReadError(
            f"{path} could not be read as a TIFF ({type(exc).__name__}); "
            "check that the file is complete and not corrupt, or re-export it."
        ) from None
    return _tiff_grey(arr, axes, photometric, colormap, path, notes), size, source


def _tiff_header(path, page) -> HeaderInfo:
    shape = tuple(int(v) for v in page.shape)
    axes = str(page.axes)
    dims = dict(zip(axes, shape, strict=False))
    h, w = dims.get("Y", shape[0] if shape else 0), dims.get("X", shape[-1] if shape else 0)
    samples = dims.get("S", 1)
    planes = int(np.prod([n for a, n in dims.items() if a not in "YXS"], dtype=np.int64))
    return HeaderInfo(path, "TIFF", int(h), int(w), int(samples), max(1, planes))


def _tiff_grey(arr, axes: str, photometric: int, colormap, path: str, notes) -> np.ndarray:
    arr = np.asarray(arr)
    if arr.ndim == len(axes) and "S" in axes and axes.index("S") != arr.ndim - 1:
        arr = np.moveaxis(arr, axes.index("S"), -1)  # planar -> interleaved samples
        axes = axes.replace("S", "") + "S"
    if arr.ndim > 2 + ("S" in axes) or (arr.ndim == 3 and "S" not in axes):
        raise ImageReadError(f"{path} holds a 3-D stack (shape {arr.shape}), not one plane; "
                             "export a single 2-D plane (grey or RGB) and try again.")
    samples = arr.shape[-1] if arr.ndim == 3 else 1
    if photometric == _PALETTE and colormap is not None and arr.ndim == 2:
        cmap = np.asarray(colormap, dtype=np.float64)
        idx = np.clip(arr.astype(np.int64), 0, cmap.shape[-1] - 1)
        rgb = np.moveaxis(cmap[:, idx], 0, -1) / 65535.0
        notes.append("palette (colour-mapped) image: its colour map applied")
        return _rgb_to_grey(rgb, notes)
    if photometric == _SEPARATED:
        if samples < 4:
            raise ImageReadError(f"{path} says CMYK but has {samples} sample(s) per pixel; "
                                 "re-export it as grey or RGB.")
        notes.append("CMYK image converted to RGB (R = (1 - C)(1 - K), no colour profile), "
                     "then to grey")
        return _rgb_to_grey(cmyk_to_rgb(arr), notes)
    if photometric in (_RGB, _YCBCR):
        if samples < 3:
            raise ImageReadError(f"{path} says RGB but has {samples} sample(s) per pixel; "
                                 "re-export it.")
        if samples > 4:
            notes.append(f"{samples - 3} extra samples per pixel ignored")
            arr = arr[..., :4]
        return to_grey(arr, path, notes)
    # grey: min-is-black or min-is-white; extra samples (alpha, masks) are not the image
    if arr.ndim == 3:
        if samples == 2:
            grey = to_grey(arr, path, notes)
        else:
            raise ImageReadError(f"{path} has shape {arr.shape}, not a 2-D grey or RGB image;"
                                 " export a single 2-D plane (grey or RGB) and try again.")
    else:
        grey = to_grey(arr, path, notes)
    if photometric == _MINISWHITE:
        notes.append("min-is-white TIFF: grey levels inverted so that dark is 0")
        top = _int_scale(arr) if arr.dtype.kind in "uib" else float(np.nanmax(grey))
        grey = (1.0 if arr.dtype.kind == "b" else top) - grey
    return grey


# --------------------------------------------------------------------------- Pillow
# Formats Pillow may decode for our suffixes (a JPEG named .png is common; nothing else).
_PIL_FORMATS = ("PNG", "JPEG", "BMP")


def _pil_header(path, im) -> HeaderInfo:
    w, h = (int(v) for v in im.size)
    return HeaderInfo(path, str(im.format or "image"), h, w, max(1, len(im.getbands())))


def _pil_array(im, notes: list[str]) -> np.ndarray:
    mode = im.mode
    if mode in ("I;16", "I;16B", "I;16L", "I", "F", "L", "RGB", "RGBA", "LA"):
        return np.asarray(im)
    if mode == "1":
        notes.append("bilevel (black and white) image")
        return np.asarray(im.convert("L"))
    if mode in ("P", "PA"):
        notes.append("palette (colour-mapped) image: its colour map applied")
        rgba = "transparency" in im.info or mode == "PA"
        return np.asarray(im.convert("RGBA" if rgba else "RGB"))
    if mode == "CMYK":
        notes.append("CMYK image converted to RGB (R = (1 - C)(1 - K), no colour profile), "
                     "then to grey")
        return cmyk_to_rgb(np.asarray(im))
    if mode in ("YCbCr", "RGBX", "RGBa", "La", "I;16N"):
        return np.asarray(im.convert("RGBA" if mode in ("RGBa", "La") else "RGB"))
    raise ImageReadError(f"{im.filename}: colour model {mode} is not converted by sectio; "
                         "save the image as grey or RGB.")


def _read_pillow(path: str, notes: list[str], budget: int, *,
                 formats: tuple[str, ...] = _PIL_FORMATS, grey: bool = False) -> np.ndarray:
    """Decode with Pillow (header checked first); ``grey=True`` returns the grey plane."""
    from PIL import Image

    # Pillow's own bomb check (an error at twice MAX_IMAGE_PIXELS) stays on, set from the
    # budget; our header check below gives the sentence for anything between.
    limit = max(Image.MAX_IMAGE_PIXELS or 0, budget // _FLOAT_BYTES)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", Image.DecompressionBombWarning)
            old, Image.MAX_IMAGE_PIXELS = Image.MAX_IMAGE_PIXELS, limit
            try:
                with Image.open(path, formats=formats) as im:
                    header = _pil_header(path, im)
                    big = _check_budget(header, budget)
                    if big is not None:
                        return big
                    im.load()
                    arr = _pil_array(im, notes)
                    return to_grey(arr, path, notes) if grey else arr
            finally:
                Image.MAX_IMAGE_PIXELS = old
    except InputError:
        raise
    except Image.DecompressionBombError:
        raise ImageReadError(f"{path} declares more than {2 * limit} pixels, far above the "
                             f"{format_bytes(budget)} image memory budget; raise it with "
                             "--max-image-memory if the file is genuine.") from None
    except MemoryError:
        raise ImageReadError(f"{path} does not fit in memory; crop the image or lower "
                             "its size.") from None
    except Exception as exc:  # Pillow raises many types (OSError, SyntaxError, ...) on junk
        raise ImageReadError(
            f"{path} could not be read as an image ({type(exc).__name__}); check that the "
            "file is complete and not corrupt, or re-export it as TIFF or PNG."
        ) from None


def _image_warning():
    from .errors import ImageWarning

    return ImageWarning


def decode_grey(path: str, *, tiff: bool, max_image_memory=None,
                tiff_tags: Callable | None = None) -> tuple[np.ndarray, float | None, str, list]:
    """Decode ``path`` into a finite 2-D float64 grey plane.

    Returns ``(grey, tag_pixel_size_um, tag_source, notes)``; the tag values come from
    ``tiff_tags(tif, page)`` for TIFF files (``None, ""`` otherwise).
    """
    budget = image_memory_budget(max_image_memory)
    require_regular_file(path)
    notes: list[str] = []
    size, source = None, ""
    if tiff:
        grey, size, source = _read_tiff(path, notes, budget, tiff_tags)
    else:
        grey = to_grey(_read_pillow(path, notes, budget), path, notes)
    return _finite_or_fill(grey, path, notes), size, source, notes
