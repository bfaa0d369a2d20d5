"""Instrument-style info strips with real text, scale bars and stage-micrometer rulings.

``info_strip(width, bar_px=..., label="10 µm")`` draws a flat band with a scale bar of
exactly ``bar_px`` pixels (anti-aliased ends), its length label in a TrueType font, and
other instrument text ("HV 15.0 kV", "WD 8.5 mm", ...); ``attach_strip`` puts it at the
bottom or top of an image. ``stage_micrometer`` renders a ruling of parallel lines with an
exact period, tilted, blurred and noisy, with longer lines every fifth division.

Fonts come from matplotlib's bundled set (present wherever sectio is installed) and
Pillow's default font; :func:`font_paths` lists them.
"""

from __future__ import annotations

import os

import numpy as np
from scipy import ndimage as ndi

from ._render import add_noise, blur, quantise

__all__ = ["attach_strip", "font_paths", "info_strip", "load_font", "stage_micrometer"]

#: matplotlib's bundled fonts that hold digits, '.', 'µ', 'm', 'n'.
BUNDLED_FONTS = ("DejaVuSans.ttf", "DejaVuSans-Bold.ttf", "DejaVuSansMono.ttf",
                 "DejaVuSerif.ttf", "STIXGeneral.ttf")


def font_paths() -> list[str]:
    """Paths of the bundled TrueType fonts (matplotlib's data folder)."""
    import matplotlib

    folder = os.path.join(matplotlib.get_data_path(), "fonts", "ttf")
    return [os.path.join(folder, f) for f in BUNDLED_FONTS
            if os.path.exists(os.path.join(folder, f))]


def load_font(font: str | None, size: int):
    """A Pillow font: a TrueType path, or None for Pillow's own default font."""
    from PIL import ImageFont

    if font is None:
        return ImageFont.load_default(size=size)
    return ImageFont.truetype(font, size)


def info_strip(
    width: int,
    *,
    bar_px: float,
    label: str | None,
    height: int = 48,
    font: str | None = None,
    font_size: int = 18,
    background: float = 0.0,
    ink: float = 1.0,
    label_place: str = "above",
    other_text: tuple[str, ...] = ("HV 15.0 kV", "WD 8.5 mm", "Mag 5 000 x"),
    bar_thickness: int = 4,
) -> np.ndarray:
    """A (height, width) float strip in [0, 1]: bar, its label and other instrument text.

    The bar's outer length is exactly ``bar_px`` (fractional ends drawn as grey levels).
    ``label_place`` puts the label ``"above"`` the bar (centred), ``"right"`` of it or
    ``"left"`` of it. Other text is written left of the bar, from the left edge.
    """
    from PIL import Image, ImageDraw

    canvas = Image.new("L", (width, height), 0)
    draw = ImageDraw.Draw(canvas)
    f = load_font(font, font_size)
    c0 = width - bar_px - max(24, 0.05 * width)
    if label_place == "right" and label:
        c0 -= draw.textlength(label, font=f) + 12
    c0 = max(c0, 0.45 * width) if c0 + bar_px <= width else max(0.0, width - bar_px - 2)
    row = int(height * (0.68 if label_place == "above" else 0.5))
    cols = np.arange(width) + 0.5
    frac = np.clip(np.minimum(cols - c0, c0 + bar_px - cols) + 0.5, 0, 1)
    if label:
        box = draw.textbbox((0, 0), label, font=f)
        tw, th = box[2] - box[0], box[3] - box[1]
        if label_place == "above":
            x, y = c0 + bar_px / 2 - tw / 2, row - bar_thickness // 2 - 5 - th
        elif label_place == "right":
            x, y = c0 + bar_px + 12, row - th / 2
        else:
            x, y = c0 - 12 - tw, row - th / 2
        draw.text((x - box[0], y - box[1]), label, fill=255, font=f)
    x = 0.02 * width
    small = load_font(font, max(8, int(0.8 * font_size)))
    for text in other_text:
        tw = draw.textlength(text, font=small)
        if x + tw > c0 - 30 - (tw if label_place == "left" else 0):
            break
        draw.text((x, height * 0.3), text, fill=255, font=small)
        x += tw + 18
    strip = np.asarray(canvas, float) / 255.0
    r0 = row - bar_thickness // 2
    strip[r0: r0 + bar_thickness] = np.maximum(strip[r0: r0 + bar_thickness], frac)
    return background + (ink - background) * strip


def attach_strip(image: np.ndarray, strip: np.ndarray, *, side: str = "bottom") -> np.ndarray:
    """Stack ``strip`` (floats in [0, 1]) under or above ``image``, in the image's dtype."""
    top = np.iinfo(image.dtype).max if image.dtype.kind in "ui" else 1.0
    band = np.round(strip * top).astype(image.dtype) if image.dtype.kind in "ui" \
        else strip.astype(image.dtype)
    return np.vstack([image, band] if side == "bottom" else [band, image])


def stage_micrometer(
    shape: tuple[int, int],
    *,
    period_px: float,
    angle_deg: float = 0.0,
    line_width_px: float = 2.5,
    dark_lines: bool = True,
    blur_px: float = 1.2,
    noise: float = 0.02,
    long_every: int = 5,
    rng=None,
) -> np.ndarray:
    """An 8-bit image of a stage-micrometer ruling with an exact line period.

    Lines run at ``angle_deg`` from the vertical; every ``long_every``-th line is longer
    (the others stop short of the image's top third), as on common rulings. The line
    centres lie at exactly ``k * period_px`` along the normal (plus an offset).
    """
    rng = np.random.default_rng(rng)
    h, w = shape
    yy, xx = np.mgrid[0:h, 0:w].astype(float)
    t = np.deg2rad(angle_deg)
    u = (xx - w / 2) * np.cos(t) + (yy - h / 2) * np.sin(t)  # along the normal
    v = -(xx - w / 2) * np.sin(t) + (yy - h / 2) * np.cos(t)  # along the lines
    offset = rng.uniform(0, period_px)
    k = np.round((u - offset) / period_px)
    d = np.abs(u - offset - k * period_px)
    cover = np.clip(line_width_px / 2 - d + 0.5, 0, 1)
    long_line = (k % long_every) == 0
    reach = np.where(long_line, 0.42 * h, 0.25 * h)
    cover = np.where(np.abs(v) <= reach, cover, 0.0)
    lo, hi = (0.15, 0.85) if dark_lines else (0.85, 0.15)
    img = hi + (lo - hi) * cover
    img = blur(img, blur_px)
    img = img * (1 + 0.1 * ndi.zoom(rng.normal(size=(4, 4)), (h / 4, w / 4), order=3)[:h, :w])
    return quantise(add_noise(img, rng, sigma=noise), 8)
