"""Connected components of a band-by-band labelling joined across the seams.

Each band of rows is labelled on its own (``scipy.ndimage.label``); the labels of band k
are numbered from an offset so that every (band, label) pair has one global id. Two ids
are one component when their pixels touch across a seam (the last row of a band and the
first row of the next). Components are numbered in the order of their first pixel in
raster order, exactly as ``ndi.label`` numbers them on the whole image.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class BandLabels:
    """What one band's labelling tells the stitching step."""

    n: int  # labels 1..n in this band
    top: np.ndarray  # labels of the band's first row
    bottom: np.ndarray  # labels of the band's last row


def offsets(bands: list[BandLabels]) -> np.ndarray:
    """Global id of label 0 of each band (global id = offset + local label, local ≥ 1)."""
    return np.concatenate([[0], np.cumsum([b.n for b in bands])[:-1]]).astype(np.int64)


def seam_pairs(bands: list[BandLabels], diagonal: bool) -> tuple[np.ndarray, np.ndarray]:
    """Global ids that touch across each seam (4- or 8-connected)."""
    off = offsets(bands)
    a_all, b_all = [], []
    shifts = (-1, 0, 1) if diagonal else (0,)
    for k in range(len(bands) - 1):
        up, down = bands[k].bottom, bands[k + 1].top
        w = up.size
        for s in shifts:
            u = up[max(0, -s) : w - max(0, s)]
            d = down[max(0, s) : w - max(0, -s)]
            m = (u > 0) & (d > 0)
            a_all.append(u[m] + off[k])
            b_all.append(d[m] + off[k + 1])
    if not a_all:
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    return np.concatenate(a_all).astype(np.int64), np.concatenate(b_all).astype(np.int64)


def components(bands: list[BandLabels], diagonal: bool) -> tuple[np.ndarray, int]:
    """Component number (1..m, raster order of first pixel) of every global id; index 0
    (background) maps to 0. Returns (lut over global ids 0..N, m)."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    total = int(sum(b.n for b in bands))
    a, b = seam_pairs(bands, diagonal)
    g = coo_matrix((np.ones(a.size), (a, b)), shape=(total + 1, total + 1))
    _, comp = connected_components(g, directed=False)
    # number components by their smallest global id: bands in order, and within a band
    # ndi.label numbers by first pixel, so this is the raster order of first pixels
    comp = comp[1:]
    first = np.full(comp.max() + 1 if comp.size else 0, np.iinfo(np.int64).max)
    np.minimum.at(first, comp, np.arange(comp.size))
    used = first < np.iinfo(np.int64).max
    rank = np.zeros(first.size, np.int64)
    rank[np.argsort(np.where(used, first, np.iinfo(np.int64).max))] = np.arange(first.size)
    lut = np.zeros(total + 1, np.int64)
    lut[1:] = rank[comp] + 1
    return lut, int(used.sum())
