"""Pixel size from a scale bar drawn in the instrument's info strip.

The info strip is the band of rows at the bottom of many SEM/optical images where the
instrument writes text and a scale bar on a flat background. ``measure_scale_bar``

1. finds the strip (:func:`sectio.calibration.find_info_strips`: a flat band at the bottom
   or top; micrograph rows are textured and noisy, strip rows flat apart from glyphs);
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

from .calibration import InfoStrip, find_info_strips
from .errors import CalibrationError

__all__ = ["ScaleBar", "measure_scale_bar"]

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
    strip_side: str  # "bottom" or "top"
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
            "strip_side": self.strip_side,
            "polarity": self.polarity,
            "relative_uncertainty": self.relative_uncertainty,
        }


def measure_scale_bar(image: np.ndarray, *, bar_length_um: float, path: str = "<array>",
                      strip: InfoStrip | None = None) -> ScaleBar:
    """Find the scale bar in the info strip of ``image`` and derive the pixel size.

    Parameters
    ----------
    image : (M, N) ndarray
        The whole grey image, info strip included (any grey range).
    bar_length_um : float
        The length the bar stands for, in µm.
    path : str
        File name, for messages.
    strip : InfoStrip, optional
        The info strip already found (default: looked for at the bottom, then the top).

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
    if strip is None:
        found = find_info_strips(img)
        if not found:
            raise CalibrationError(
                f"{path}: no info strip with a scale bar found at the bottom or top of the "
                "image; give --pixel-size instead (and --crop-bottom for any strip)."
            )
        strip = found[0]
    strip_h, level = strip.rows, strip.level
    row0 = h - strip_h if strip.side == "bottom" else 0
    side = strip.side
    band = img[row0: row0 + strip_h]
    rng = float(img.max() - img.min()) or 1.0
    diff = band - level
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
        vals = band[sl][comp]
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
        bar_length_px=length, bar_thickness_px=thick, bar_row_px=int(row0 + mid),
        bar_start_col_px=float(start), strip_height_px=int(strip_h), strip_side=side,
        polarity=polarity,
        relative_uncertainty=1.0 / length,
    )
