"""Annealing twins in synthetic grain structures, with exact truth.

An annealing twin in a section of an FCC metal shows as a straight, parallel-sided band
inside a grain: either right across it (the grain is cut into two or more parent parts of
the same shade) or ending inside it at a short step. Its boundaries are straight (coherent
twin boundaries lie on one {111} plane) and etch less than grain boundaries; the band
etches to another shade than its parent (another orientation). Several twins of one
grain here are parallel (one twin plane per grain).

:func:`add_twins` draws the bands into a :class:`GrainTruth` and returns it with
``twin_labels`` (every band and every parent part its own region: the truth *counting*
twin boundaries) beside ``labels`` (grains only: the truth *without* twins), and the band
geometry for :func:`render_twins`.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
from scipy import ndimage as ndi


@dataclass(frozen=True)
class TwinBand:
    """One straight band in grain ``grain``: ``|s| < half_width_px`` and ``a < end_px``.

    ``s`` and ``a`` are the coordinates across and along the band measured from
    ``centre_px`` (row, col); the band runs along ``angle_rad`` (from the x axis, y down).
    ``end_px`` is ``inf`` for a band right across the grain.
    """

    grain: int
    centre_px: tuple[float, float]
    angle_rad: float
    half_width_px: float
    end_px: float
    shade_step: float  # shade of the band minus the parent's (grey units of a 0-1 image)
    depth_factor: float  # groove depth of its boundaries relative to a grain boundary's


def _coords(band: TwinBand, rows: np.ndarray, cols: np.ndarray):
    cy, cx = band.centre_px
    ux, uy = np.cos(band.angle_rad), np.sin(band.angle_rad)
    a = (cols - cx) * ux + (rows - cy) * uy
    s = -(cols - cx) * uy + (rows - cy) * ux
    return s, a


def _band_mask(band: TwinBand, rows, cols):
    s, a = _coords(band, rows, cols)
    return (np.abs(s) < band.half_width_px) & (a < band.end_px)


def add_twins(
    truth,
    *,
    rng=None,
    twinned_fraction: float = 0.5,
    twins_per_grain: tuple[int, int] = (1, 3),
    width_fraction: tuple[float, float] = (0.08, 0.3),
    min_width_px: float = 6.0,
    ending_fraction: float = 0.35,
    shade_step: tuple[float, float] = (0.06, 0.2),
    depth_factor: tuple[float, float] = (0.35, 0.8),
):
    """Twin bands in a share of the grains; returns ``(truth, bands)``.

    Parameters
    ----------
    truth : GrainTruth
        A twin-free structure from :func:`sectio.synth.grains.grain_structure`.
    twinned_fraction : float
        Share of the grains large enough to hold a twin (equivalent diameter ≥ 4 ×
        ``min_width_px``) that get twins.
    twins_per_grain : (min, max)
        Number of parallel bands tried per twinned grain.
    width_fraction : (low, high)
        Band width as a fraction of the grain's equivalent circle diameter (at least
        ``min_width_px``).
    ending_fraction : float
        Share of the bands that end inside the grain instead of crossing it.
    shade_step, depth_factor : (low, high)
        Ranges of the band's shade step (either sign) and of its boundary groove depth
        relative to a grain boundary's.

    Returns
    -------
    truth : GrainTruth
        The input with ``twin_labels`` set: grains split into bands and parent parts.
    bands : list of TwinBand
    """
    rng = np.random.default_rng(rng)
    labels = truth.labels
    twin = labels.astype(np.int32).copy()
    next_id = int(labels.max()) + 1
    areas = np.bincount(labels.ravel())
    objs = ndi.find_objects(labels)
    bands: list[TwinBand] = []
    for g, sl in enumerate(objs, start=1):
        if sl is None:
            continue
        ecd = np.sqrt(4 * areas[g] / np.pi)
        if ecd < 4 * min_width_px or rng.random() >= twinned_fraction:
            continue
        inside = labels[sl] == g
        rows, cols = np.nonzero(inside)
        rows = rows + sl[0].start + 0.5
        cols = cols + sl[1].start + 0.5
        angle = rng.uniform(0, np.pi)
        taken = np.zeros(rows.size, bool)
        region = twin[sl].copy()
        for _ in range(int(rng.integers(twins_per_grain[0], twins_per_grain[1] + 1))):
            hw = 0.5 * max(min_width_px, rng.uniform(*width_fraction) * ecd)
            k = int(rng.integers(rows.size))
            centre = (float(rows[k]), float(cols[k]))
            band = TwinBand(g, centre, angle, hw, np.inf, 0.0, 0.0)
            s, a = _coords(band, rows, cols)
            on = np.abs(s) < hw
            if not on.any():
                continue
            if rng.random() < ending_fraction:
                lo, hi = a[on].min(), a[on].max()
                end = lo + rng.uniform(0.45, 0.8) * (hi - lo)
                band = replace(band, end_px=float(end))
                on &= a < end
            # Keep bands apart (a gap of at least one band width) and long enough.
            near = np.abs(s) < hw + 2 * min_width_px
            if (near & taken).any() or np.ptp(a[on]) < 2.5 * hw:
                continue
            # Parent on both sides along most of the band (not a band along the grain
            # boundary), and no thin slivers of parent left beside it.
            outer = (np.abs(s) >= hw) & (np.abs(s) < hw + min_width_px) & (a < band.end_px)
            inner = on & (np.abs(s) >= hw - min_width_px)
            if any(np.count_nonzero(outer & (sgn * s > 0)) < 0.8 * np.count_nonzero(
                    inner & (sgn * s > 0)) for sgn in (-1, 1)):
                continue
            trial = region.copy()
            trial[rows[on].astype(int) - sl[0].start, cols[on].astype(int) - sl[1].start] = -1
            parent = trial == g
            parts, n_parts = ndi.label(parent)
            sizes = np.bincount(parts.ravel())[1:]
            if n_parts == 0 or sizes.min() < 2 * min_width_px**2:
                continue
            depth = ndi.maximum(ndi.distance_transform_edt(parent), parts,
                                np.arange(1, n_parts + 1))
            if np.min(depth) < min_width_px:
                continue
            step = rng.choice([-1.0, 1.0]) * rng.uniform(*shade_step)
            band = replace(band, shade_step=float(step),
                           depth_factor=float(rng.uniform(*depth_factor)))
            trial[trial == -1] = next_id
            next_id += 1
            # Parent parts: the largest keeps the grain's id, the others get new ones.
            order = np.argsort(sizes)[::-1]
            for j in order[1:]:
                trial[parts == j + 1] = next_id
                next_id += 1
            region = trial
            taken |= on
            bands.append(band)
        twin[sl][inside] = region[inside]
    twin = _sequential(twin)
    params = {**truth.params, "n_twins": len(bands)}
    return replace(truth, twin_labels=twin, params=params), bands


def _sequential(labels: np.ndarray) -> np.ndarray:
    ids = np.unique(labels)
    lut = np.zeros(int(ids.max()) + 1, np.int32)
    lut[ids] = np.arange(1, ids.size + 1, dtype=np.int32)
    return lut[labels]


def render_twins(img, labels, bands, *, boundary_width_px: float, boundary_depth: float,
                 bright: bool = False):
    """Shade each band and etch its boundaries (sides and end step) inside its grain."""
    out = img.copy()
    sigma = boundary_width_px / 2.3548
    objs = ndi.find_objects(labels)
    for band in bands:
        sl = objs[band.grain - 1]
        inside = labels[sl] == band.grain
        rr, cc = np.mgrid[sl[0], sl[1]].astype(float) + 0.5
        s, a = _coords(band, rr, cc)
        on = (np.abs(s) < band.half_width_px) & (a < band.end_px) & inside
        sub = out[sl]
        sub[on] = np.clip(sub[on] + band.shade_step, 0.02, 0.98)
        d_side = np.where(a < band.end_px, np.abs(np.abs(s) - band.half_width_px), np.inf)
        d_end = np.where(np.abs(s) < band.half_width_px, np.abs(a - band.end_px), np.inf)
        d = np.minimum(d_side, d_end)
        groove = boundary_depth * band.depth_factor * np.exp(-0.5 * (d / sigma) ** 2) * inside
        sub[:] = sub + (1.0 - sub) * groove * 1.2 if bright else sub * (1.0 - groove)
    return out
