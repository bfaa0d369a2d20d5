"""The instrument's info strip: a flat band at the bottom or top holding text and/or a bar.

A strip is found when, scanning from the image edge inwards,

1. rows sit mostly (at least half their pixels) within 1 % of the grey range of one
   background level (the most common value of the six edge rows); runs of up to 12 other rows
   (a long bar, large text) are allowed inside the band;
2. the band is 8 rows or more and at most 35 % of the image, and at least two of its rows
   are clean (90 % of the pixels at the background level);
3. the image beyond the band is *not* flat at that level (at most 10 % of the next 48
   rows are), so that a noise-free drawing or a flat-shaded map is never cut; and
4. the band holds marks: pixels at least 20 % of the grey range away from the background
   (text, a bar), but no more than 40 % of its area.

Micrograph rows are textured and noisy; strips drawn by instrument software are flat
apart from the glyphs (common practice).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["InfoStrip", "find_info_strips"]

MAX_GAP_ROWS = 12
MIN_ROWS = 8


@dataclass(frozen=True)
class InfoStrip:
    """Where a strip was found: ``side`` ("bottom" or "top"), height and background level."""

    side: str
    rows: int
    level: float

    def to_dict(self) -> dict:
        return {"side": self.side, "rows": self.rows, "background_level": self.level}


def _edge_level(row: np.ndarray, lo: float, hi: float) -> float:
    hist, edges = np.histogram(row, bins=256, range=(lo, hi if hi > lo else lo + 1))
    k = int(np.argmax(hist))
    sel = row[(row >= edges[k]) & (row <= edges[k + 1])]
    return float(np.median(sel))


def _strip_from_bottom(img: np.ndarray, lo: float, hi: float, max_share: float):
    h = img.shape[0]
    rng = hi - lo
    level = _edge_level(img[-6:].ravel(), lo, hi)  # pooled: a frame line may edge the strip
    near = np.abs(img - level) <= 0.01 * rng
    share = near.mean(axis=1)
    flat = share >= 0.5
    height, r, gap = 0, h - 1, 0
    while r >= 0:
        if flat[r]:
            height, gap = h - r, 0
        else:
            gap += 1
            if gap > MAX_GAP_ROWS:
                break
        r -= 1
    if height < MIN_ROWS or height > max_share * h:
        return None
    band = slice(h - height, h)
    if int((share[band] >= 0.9).sum()) < 2:
        return None
    beyond = flat[max(0, h - height - 48): h - height]
    if beyond.size == 0 or beyond.mean() > 0.1:
        return None
    ink = np.abs(img[band] - level) >= 0.2 * rng
    if ink.sum() < 20 or ink.mean() > 0.4:
        return None
    return height, level


def find_info_strips(image, *, max_share: float = 0.35) -> list[InfoStrip]:
    """Info strips at the bottom and/or top of ``image`` (an empty list if none).

    Parameters
    ----------
    image : (M, N) ndarray
        The whole grey image as read (any grey range).
    max_share : float
        Largest share of the image height a strip may take.
    """
    img = np.asarray(image, dtype=np.float64)
    finite = np.isfinite(img)
    if img.ndim != 2 or not finite.any() or img.shape[0] < 4 * MIN_ROWS:
        return []
    lo, hi = float(img[finite].min()), float(img[finite].max())
    if hi <= lo:
        return []
    if not finite.all():
        img = np.where(finite, img, lo)
    # to [0, 1] first (halved so that the span of values near the float limits stays finite)
    unit = (img * 0.5 - lo * 0.5) / (hi * 0.5 - lo * 0.5)
    out = []
    for side, view in (("bottom", unit), ("top", unit[::-1])):
        found = _strip_from_bottom(view, 0.0, 1.0, max_share)
        if found:
            level = lo * (1.0 - found[1]) + hi * found[1]  # back in the image's grey units
            out.append(InfoStrip(side, int(found[0]), float(level)))
    return out
