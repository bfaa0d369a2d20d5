"""Pixel size from a scale bar drawn in the instrument's info strip.

The info strip is the band of rows at the bottom of many SEM/optical images where the
instrument writes text and a scale bar on a flat background. ``measure_scale_bar``

1. finds the strip: the run of bottom rows in which most pixels sit at one flat background
   level (micrograph rows are textured and noisy, strip rows are flat apart from glyphs);
2. marks ink (pixels far from the strip background, either polarity);
3. takes as the bar the ink component that is a long, straight, uniform line: at least
   20 px long, at least 6 times longer than thick, filling its bounding box (a rectangle);
   end ticks are allowed (the line's extent is measured along its middle row);
4. measures its length with sub-pixel ends (ink fraction of the end pixels), and
5. refuses with :class:`sectio.errors.CalibrationError` when there is no strip, no bar,
   more than one bar-like line of different lengths, or a bar too short to trust.

The bar's length is its outer extent, end ticks included (the common convention of
instrument software — common practice).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import ndimage as ndi

from .errors import CalibrationError

__all__ = ["ScaleBar", "measure_scale_bar", "find_info_strip"]

MIN_BAR_PX = 20
MIN_ELONGATION = 6.0


@dataclass(frozen=True)
class ScaleBar:
    """What was found: the bar, its length in pixels and the resulting pixel size."""

    pixel_size_um: float
    bar_length_um: float
    bar_length_px: float
    bar_thickness_px: int
    bar_row_px: int
    bar_start_col_px: float
    strip_height_px: int
    polarity: str  # "light on dark" or "dark on light"
    relative_uncertainty: float  # ±0.5 px at each end / length

    def to_dict(self) -> dict:
        return {
            "method": "scale bar",
            "pixel_size_um": self.pixel_size_um,
            "bar_length_um": self.bar_length_um,
            "bar_length_px": self.bar_length_px,
            "bar_thickness_px": self.bar_thickness_px,
            "bar_row_px": self.bar_row_px,
            "bar_start_col_px": self.bar_start_col_px,
            "strip_height_px": self.strip_height_px,
            "polarity": self.polarity,
            "relative_uncertainty": self.relative_uncertainty,
        }


def _flat_rows(img: np.ndarray, level: float, tol: float) -> np.ndarray:
    """Share of each row's pixels within ``tol`` of ``level``."""
    return (np.abs(img - level) <= tol).mean(axis=1)


def find_info_strip(img: np.ndarray, *, max_share: float = 0.35) -> tuple[int, float]:
    """Height (rows) and background level of the info strip at the bottom; (0, nan) if none.

    A strip row has at least half of its pixels within 2 % of the full grey range of the
    strip's background level (the most common value of the bottom row); runs of up to 12
    other rows (a long bar, large text) are allowed inside the strip.
    """
    h, w = img.shape
    rng = float(img.max() - img.min()) or 1.0
    tol = 0.02 * rng
    bottom = img[-1]
    hist, edges = np.histogram(bottom, bins=64, range=(float(img.min()), float(img.max())))
    k = int(np.argmax(hist))
    level = float(np.median(bottom[(bottom >= edges[k]) & (bottom <= edges[k + 1])]))
    flat = _flat_rows(img, level, tol) >= 0.5
    # scan upwards; rows crossed by a long bar may not look flat, so gaps of up to 12
    # rows are allowed when flat rows resume above them
    height, r, gap = 0, h - 1, 0
    while r >= 0:
        if flat[r]:
            height, gap = h - r, 0
        else:
            gap += 1
            if gap > 12:
                break
        r -= 1
    if height < 8 or height > max_share * h:
        return 0, float("nan")
    return height, level


def measure_scale_bar(image: np.ndarray, *, bar_length_um: float, path: str = "<array>"
                      ) -> ScaleBar:
    """Find the scale bar in the info strip of ``image`` and derive the pixel size.

    Parameters
    ----------
    image : (M, N) ndarray
        The whole grey image, info strip included (any grey range).
    bar_length_um : float
        The length the bar stands for, in µm.
    path : str
        File name, for messages.

    Returns
    -------
    ScaleBar

    Raises
    ------
    CalibrationError
        When no strip or no unambiguous bar is found.
    """
    img = np.asarray(image, dtype=np.float64)
    h, w = img.shape
    strip_h, level = find_info_strip(img)
    if strip_h == 0:
        raise CalibrationError(
            f"{path}: no info strip with a scale bar found at the bottom of the image; "
            "give --pixel-size instead (and --crop-bottom for any strip)."
        )
    strip = img[h - strip_h:]
    rng = float(img.max() - img.min()) or 1.0
    diff = strip - level
    polarity = "light on dark" if np.abs(diff.max()) >= np.abs(diff.min()) else "dark on light"
    ink_level = diff.max() if polarity == "light on dark" else diff.min()
    frac = np.clip(diff / ink_level, 0.0, 1.0) if ink_level else np.zeros_like(diff)
    if abs(ink_level) < 0.2 * rng:
        raise CalibrationError(f"{path}: the info strip holds no contrasting marks; "
                               "give --pixel-size instead.")
    ink = frac >= 0.5
    lab, n = ndi.label(ink, structure=np.ones((3, 3)))
    candidates = []
    for i, sl in enumerate(ndi.find_objects(lab), start=1):
        if sl is None:
            continue
        comp = lab[sl] == i
        rows_len = comp.sum(axis=1)
        core = rows_len >= 0.9 * comp.shape[1]  # rows spanning the whole extent
        thick = int(core.sum())
        if comp.shape[1] < MIN_BAR_PX or thick == 0:
            continue
        if comp.shape[1] < MIN_ELONGATION * thick:
            continue
        # rows other than the core (ticks) must be sparse; the core must be solid
        if comp[core].mean() < 0.97:
            continue
        vals = strip[sl][comp]
        if np.std(vals) > 0.1 * rng:  # not uniform: a photo detail or text run
            continue
        mid = sl[0].start + int(np.flatnonzero(core)[len(np.flatnonzero(core)) // 2])
        c0, c1 = sl[1].start, sl[1].stop
        row = frac[mid, max(c0 - 2, 0): min(c1 + 2, w)]
        length = float(row.sum())
        candidates.append((length, thick, mid, c0 - (frac[mid, max(c0 - 1, 0)]
                                                       if c0 > 0 else 0.0)))
    if not candidates:
        raise CalibrationError(
            f"{path}: no straight, uniform scale bar at least {MIN_BAR_PX} px long was found "
            "in the info strip; give --pixel-size instead."
        )
    candidates.sort(key=lambda c: -c[0])
    longest = candidates[0]
    others = [c for c in candidates[1:] if c[0] > 0.5 * longest[0]]
    if any(abs(c[0] - longest[0]) > max(1.0, 0.01 * longest[0]) for c in others):
        lens = ", ".join(f"{c[0]:.1f}" for c in [longest, *others])
        raise CalibrationError(
            f"{path}: the info strip holds several bar-like lines ({lens} px) and it is not "
            "clear which is the scale bar; give --pixel-size instead."
        )
    length, thick, mid, start = longest
    return ScaleBar(
        pixel_size_um=bar_length_um / length, bar_length_um=float(bar_length_um),
        bar_length_px=length, bar_thickness_px=thick, bar_row_px=int(h - strip_h + mid),
        bar_start_col_px=float(start), strip_height_px=int(strip_h), polarity=polarity,
        relative_uncertainty=1.0 / length,
    )
