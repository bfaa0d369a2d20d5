"""What every overlay picture carries: a micron marker and a caption strip with the colour key.

The marker is a bar of a round length (1, 2 or 5 × 10ⁿ µm, about a fifth of the field
width) drawn in white on a dark box in the lower left corner of the picture, labelled with
its length; the caption strip under the picture names the image, the pixel size, the
headline numbers and what each colour means.
"""

from __future__ import annotations

import io
import math

import numpy as np

__all__ = ["caption_strip", "draw_micron_marker", "marker_length_um", "overlay_png"]


def marker_length_um(field_width_um: float, fraction: float = 0.2) -> float:
    """Round bar length (1, 2 or 5 × 10ⁿ µm) not above ``fraction`` of the field width."""
    target = max(field_width_um * fraction, 1e-9)
    exp = math.floor(math.log10(target))
    best = 10.0**exp
    for m in (1.0, 2.0, 5.0, 10.0):
        if m * 10.0**exp <= target:
            best = m * 10.0**exp
    return best


def _label(length_um: float) -> str:
    if length_um >= 1000:
        return f"{length_um / 1000:g} mm"
    if length_um < 1:
        return f"{length_um * 1000:g} nm"
    return f"{length_um:g} µm"


def _font(size: int):
    """DejaVu Sans (shipped with matplotlib, has µ and ²) or Pillow's default font."""
    from importlib import resources

    from PIL import ImageFont

    try:
        path = resources.files("matplotlib") / "mpl-data" / "fonts" / "ttf" / "DejaVuSans.ttf"
        return ImageFont.truetype(str(path), size)
    except (OSError, ModuleNotFoundError):
        pass
    try:
        return ImageFont.load_default(size=size)
    except TypeError:  # Pillow < 10.1: one bitmap size only
        return ImageFont.load_default()


def draw_micron_marker(rgb: np.ndarray, pixel_size_um: float) -> np.ndarray:
    """A copy of ``rgb`` (H, W, 3 uint8) with the micron marker in the lower left corner."""
    from PIL import Image, ImageDraw

    h, w = rgb.shape[:2]
    length_um = marker_length_um(w * pixel_size_um)
    bar_px = max(1, round(length_um / pixel_size_um))
    size = max(10, min(28, w // 40))
    thick = max(3, size // 3)
    pad = max(4, size // 2)
    im = Image.fromarray(np.ascontiguousarray(rgb[..., :3]))
    d = ImageDraw.Draw(im)
    font = _font(size)
    text = _label(length_um)
    tw = font.getlength(text)
    box_w = max(bar_px, tw) + 2 * pad
    box_h = thick + size + 3 * pad
    x0, y1 = pad, h - pad
    y0 = max(0, y1 - box_h)
    d.rectangle([x0, y0, x0 + box_w, y1], fill=(0, 0, 0))
    bx = x0 + pad
    by = y1 - pad - thick
    d.rectangle([bx, by, bx + bar_px - 1, by + thick - 1], fill=(255, 255, 255))
    d.text((bx, y0 + pad // 2), text, fill=(255, 255, 255), font=font)
    return np.asarray(im)


def caption_strip(width: int, lines: list[str]) -> np.ndarray:
    """A dark strip with the caption lines, the font shrunk until the longest line fits."""
    from PIL import Image, ImageDraw

    size = max(10, min(22, width // 55))
    while True:
        font = _font(size)
        longest = max(font.getlength(t) for t in lines)
        if longest <= width - 16 or size <= 9:
            break
        size -= 1
    h = (size + 6) * len(lines) + 8
    im = Image.new("RGB", (width, h), (24, 24, 24))
    d = ImageDraw.Draw(im)
    y = 4
    for text in lines:
        d.text((8, y), text, fill=(235, 235, 235), font=font)
        y += size + 6
    return np.asarray(im)


def overlay_png(rgb: np.ndarray, pixel_size_um: float, caption: list[str]) -> bytes:
    """PNG bytes of an overlay with its micron marker and caption strip (legend)."""
    from PIL import Image

    out = np.vstack([draw_micron_marker(rgb, pixel_size_um), caption_strip(rgb.shape[1],
                                                                           caption)])
    buf = io.BytesIO()
    Image.fromarray(out).save(buf, format="PNG", optimize=False, compress_level=1)
    return buf.getvalue()
