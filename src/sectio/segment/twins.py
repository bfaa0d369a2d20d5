"""Annealing twins in a region map: straight, parallel-sided bands inside grains.

The segmentation cuts a twinned grain into regions along every visible line, twin
boundaries included. A coherent annealing twin boundary lies on one crystal plane, so its
trace is straight, and the two boundaries of a twin lamella are parallel; an ordinary
grain boundary bends and meets others at triple junctions. A region is taken for a twin
band when

* it is elongated (length ≥ ``min_aspect`` × width),
* most of its border (``min_side_fraction``) lies on two parallel straight lines, within
  ``line_tolerance_px``, each running along most of the band (``min_side_cover``),
* and the regions beyond its two sides are one grain: either the same region on both
  sides (a lamella that ends inside its grain) or two regions of the same shade (a lamella
  right across the grain, whose parent parts keep one orientation, hence one etch shade;
  the band itself may differ).

The result is a list of twin-related label pairs of the region map. ASTM E112 leaves twin
boundaries out of the grain size of twinned FCC metals (REFERENCES.md §1.5, from memory),
so :func:`merge_twins` joins each twin with its parent into one grain.

Representation (shared with hand edits): ``regions`` is the label map with every twin band
and parent part its own region; ``twin_pairs`` is an (k, 2) int array of region labels
whose common border is a twin boundary. :func:`twin_boundary_mask` gives the pixels of
those borders, :func:`merge_twins` the grain map without twins.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class TwinOptions:
    """Geometry thresholds of twin detection (pixels unless stated)."""

    min_aspect: float = 2.0
    min_side_fraction: float = 0.6
    min_side_cover: float = 0.6
    line_tolerance_px: float = 1.0
    min_width_px: float = 3.0
    same_shade: float = 0.3  # parent parts' shade difference < this × the band's step

    def to_dict(self) -> dict:
        from dataclasses import asdict

        return asdict(self)


def _contacts(labels: np.ndarray):
    """Border contacts of 4-adjacent pixels of different labels: owner, other, y, x (each
    contact listed once for each of its two regions; positions at the pixel-pair midpoint)."""
    out = []
    for axis in (0, 1):
        a = labels[:-1, :] if axis == 0 else labels[:, :-1]
        b = labels[1:, :] if axis == 0 else labels[:, 1:]
        ys, xs = np.nonzero(a != b)
        la, lb = a[ys, xs], b[ys, xs]
        yf = ys + (0.5 if axis == 0 else 0.0)
        xf = xs + (0.5 if axis == 1 else 0.0)
        out.append((la, lb, yf, xf))
        out.append((lb, la, yf, xf))
    owner = np.concatenate([o[0] for o in out])
    other = np.concatenate([o[1] for o in out])
    y = np.concatenate([o[2] for o in out]).astype(np.float32)
    x = np.concatenate([o[3] for o in out]).astype(np.float32)
    return owner, other, y, x


def _moments(labels: np.ndarray):
    """Per label: area, centroid, orientation (radians) and √(major/minor) eigenvalue."""
    n = int(labels.max()) + 1
    flat = labels.ravel()
    grid = np.indices(labels.shape, dtype=np.float32)
    rr, cc = grid[0].ravel(), grid[1].ravel()
    area = np.bincount(flat, minlength=n).astype(float)
    a = np.maximum(area, 1)
    my = np.bincount(flat, rr, n) / a
    mx = np.bincount(flat, cc, n) / a
    syy = np.bincount(flat, rr * rr, n) / a - my**2
    sxx = np.bincount(flat, cc * cc, n) / a - mx**2
    sxy = np.bincount(flat, rr * cc, n) / a - mx * my
    half = (sxx + syy) / 2
    root = np.sqrt(((sxx - syy) / 2) ** 2 + sxy**2)
    l1, l2 = half + root, np.maximum(half - root, 1e-9)
    angle = 0.5 * np.arctan2(2 * sxy, sxx - syy)  # major axis, from x towards y (down)
    return area, my, mx, angle, np.sqrt(l1 / l2)


def _line_fractions(s: np.ndarray, tol: float):
    """Per row of offsets ``s`` (angles × points): the outermost two lines holding points,
    refitted once on their points; returns (low, high, on_low, on_high)."""
    ends = np.percentile(s, [3, 97], axis=1)
    out = []
    for e in ends:
        on = np.abs(s - e[:, None]) <= tol
        cnt = np.maximum(on.sum(1), 1)
        refit = np.where(on.any(1), (s * on).sum(1) / cnt, e)
        out.append((refit, np.abs(s - refit[:, None]) <= tol))
    (lo, on_lo), (hi, on_hi) = out
    return lo, hi, on_lo, on_hi


def find_twins(
    regions: np.ndarray, image: np.ndarray | None = None, options: TwinOptions | None = None,
    *, return_widths: bool = False, min_ending: int | None = 3,
):
    """Twin-related label pairs of a region map.

    Parameters
    ----------
    regions : (M, N) ndarray of int
        Region map (1..n), every visible line a border, twin boundaries included.
    image : (M, N) ndarray of float, optional
        The (flattened) grey image, for the shades of the parent parts; without it a
        lamella right across a grain is taken for a twin on its geometry alone.
    options : TwinOptions, optional

    Returns
    -------
    (k, 2) ndarray of int32
        Pairs (band, parent part), smaller label first, sorted.
    widths : ndarray of float
        With ``return_widths``: the width (pixels) of every band-shaped region examined
        that passed the geometric test; then also the number of lamellae that end inside
        their grain.

    Notes
    -----
    Bands right across a grain are kept only when at least ``min_ending`` lamellae of
    the field end inside their grain (a band bordered on both long sides by one region
    cannot be an ordinary convex grain, so these show that the structure is twinned).
    """
    opts = options or TwinOptions()
    regions = np.asarray(regions)
    none = np.zeros((0, 2), np.int32)
    if regions.max() < 2:
        return (none, np.zeros(0), 0) if return_widths else none
    area, _, _, _, elong = _moments(regions)
    cand = np.nonzero((elong >= opts.min_aspect * 0.85) & (area >= 4 * opts.min_width_px**2))[0]
    cand = cand[cand > 0]
    if cand.size == 0:
        return (none, np.zeros(0), 0) if return_widths else none
    owner, other, y, x = _contacts(regions)
    keep = np.isin(owner, cand)
    owner, other, y, x = owner[keep], other[keep], y[keep], x[keep]
    order = np.argsort(owner, kind="stable")
    owner, other, y, x = owner[order], other[order], y[order], x[order]
    starts = np.searchsorted(owner, cand, side="left")
    ends = np.searchsorted(owner, cand, side="right")
    shade = None
    if image is not None:
        from scipy import ndimage as ndi

        # Mean shade of each region's pixels away from its border (grooves left out).
        away = ndi.minimum_filter(regions, size=5) == ndi.maximum_filter(regions, size=5)
        n = int(regions.max()) + 1
        cnt = np.bincount(regions[away], minlength=n)
        tot = np.bincount(regions[away], weights=image[away], minlength=n)
        all_mean = np.bincount(regions.ravel(), weights=image.ravel(), minlength=n) / np.maximum(
            np.bincount(regions.ravel(), minlength=n), 1)
        shade = np.where(cnt >= 5, tot / np.maximum(cnt, 1), all_mean)
    pairs, widths, ending = [], [], []
    for r, i0, i1 in zip(cand, starts, ends, strict=True):
        if i1 - i0 < 8:
            continue
        found = _band_sides(y[i0:i1], x[i0:i1], opts)
        if found is None:
            continue
        on_lo, on_hi, width = found
        widths.append(width)
        nb_lo = np.bincount(other[i0:i1][on_lo]).argmax()
        nb_hi = np.bincount(other[i0:i1][on_hi]).argmax()
        if nb_lo == nb_hi:
            pairs.append((r, nb_lo))
            ending.append(r)
            continue
        if shade is not None:
            a, b, t = shade[nb_lo], shade[nb_hi], shade[r]
            if abs(a - b) >= opts.same_shade * abs(t - (a + b) / 2):
                continue
        pairs.extend([(r, nb_lo), (r, nb_hi)])
    if pairs:
        p = np.sort(np.asarray(pairs, np.int64), axis=1)
        p = np.unique(p, axis=0).astype(np.int32)
    else:
        p = np.zeros((0, 2), np.int32)
    if min_ending is not None and len(ending) < min_ending:
        # Too few lamellae end inside their grain for a twinned structure: keep only
        # those, not the crossing bands (a band between two grains of one shade is then
        # more likely an ordinary grain).
        keep = np.asarray(np.isin(p, np.asarray(ending, np.int32)).any(axis=1), bool)
        p = p[keep]
    return (p, np.asarray(widths, float), len(ending)) if return_widths else p


def _band_sides(y, x, opts: TwinOptions):
    """Contact masks of the two long sides if the border is a parallel-sided band.

    The direction is searched over all angles (1°, then 0.1° around the best); the score
    is the share of border contacts on the two outermost lines parallel to it.
    """
    yc, xc = y - y.mean(), x - x.mean()

    def score(th):
        s = -xc[None, :] * np.sin(th)[:, None] + yc[None, :] * np.cos(th)[:, None]
        lo, hi, on_lo, on_hi = _line_fractions(s, opts.line_tolerance_px)
        return (on_lo.sum(1) + on_hi.sum(1)) / s.shape[1], lo, hi, on_lo, on_hi

    coarse = np.deg2rad(np.arange(0.0, 180.0, 1.0))
    th0 = coarse[int(np.argmax(score(coarse)[0]))]
    fine = th0 + np.deg2rad(np.arange(-1.0, 1.01, 0.1))
    frac, lo, hi, on_lo, on_hi = score(fine)
    k = int(np.argmax(frac))
    th, width = fine[k], hi[k] - lo[k]
    if frac[k] < opts.min_side_fraction or width < opts.min_width_px:
        return None
    a = xc * np.cos(th) + yc * np.sin(th)
    length = float(np.ptp(a))
    if length < opts.min_aspect * width:
        return None
    for on in (on_lo[k], on_hi[k]):
        if np.count_nonzero(on) < 3 or np.ptp(a[on]) < opts.min_side_cover * length:
            return None
    return on_lo[k], on_hi[k], float(width)


def merge_twins(regions: np.ndarray, twin_pairs: np.ndarray) -> np.ndarray:
    """Grain map without twins: every twin joined to its parent (labels 1..n, raster order
    of the smallest region label of each grain)."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    n = int(regions.max()) + 1
    pairs = np.asarray(twin_pairs, np.int64).reshape(-1, 2)
    g = coo_matrix((np.ones(len(pairs)), (pairs[:, 0], pairs[:, 1])), shape=(n, n))
    _, comp = connected_components(g, directed=False)
    _, new = np.unique(comp[1:], return_inverse=True)
    lut = np.zeros(n, np.int32)
    lut[1:] = new + 1
    return lut[regions]


def twin_boundary_mask(regions: np.ndarray, twin_pairs: np.ndarray) -> np.ndarray:
    """Pixels on a border between two twin-related regions (the pixel left of or above
    each label change, as in :func:`sectio.report.grains.boundary_pixels`)."""
    n = int(regions.max()) + 1
    pairs = np.asarray(twin_pairs, np.int64).reshape(-1, 2)
    keys = np.sort(pairs[:, 0] * n + pairs[:, 1])
    out = np.zeros(regions.shape, bool)
    if keys.size == 0:
        return out
    for a, b, sl in (
        (regions[:, :-1], regions[:, 1:], (slice(None), slice(None, -1))),
        (regions[:-1, :], regions[1:, :], (slice(None, -1), slice(None))),
    ):
        lo = np.minimum(a, b).astype(np.int64)
        hi = np.maximum(a, b).astype(np.int64)
        k = lo * n + hi
        idx = np.clip(np.searchsorted(keys, k), 0, keys.size - 1)
        out[sl] |= (a != b) & (keys[idx] == k)
    return out


def join_fragments(
    regions: np.ndarray, twin_pairs: np.ndarray, *, min_share: float = 0.75,
    max_area_ratio: float = 0.25, passes: int = 3,
) -> np.ndarray:
    """Twin pairs plus fragments of twinned grains: a region whose border lies mostly
    (``min_share``) against one twinned grain (a grain made of several regions) and whose
    area is below ``max_area_ratio`` of that grain's joins it, paired with the region of the
    grain it shares most border with. Pieces of a band cut by a spurious cross line, or
    the corner pieces at a lamella's end, go back to their grain; a grain without twins is
    never touched."""
    pairs = np.asarray(twin_pairs, np.int64).reshape(-1, 2)
    if pairs.size == 0:
        return pairs.astype(np.int32)
    owner, other, _, _ = _contacts(regions)
    n = int(regions.max()) + 1
    area = np.bincount(regions.ravel(), minlength=n)
    for _ in range(passes):
        grains = merge_twins(np.arange(n), pairs)  # region label -> grain label
        n_regions = np.bincount(grains, minlength=grains.max() + 1)
        g_area = np.bincount(grains, weights=area, minlength=grains.max() + 1)
        go, gt = grains[owner], grains[other]
        cross = go != gt
        o, t = owner[cross], gt[cross]
        total = np.bincount(o, minlength=n)
        key = o * (grains.max() + 1) + t
        uk, cnt = np.unique(key, return_counts=True)
        ro, rg = uk // (grains.max() + 1), uk % (grains.max() + 1)
        ok = (
            (cnt >= min_share * total[ro])
            & (n_regions[rg] >= 2)
            & (area[ro] < max_area_ratio * g_area[rg])
        )
        if not ok.any():
            break
        new = []
        for r, g in zip(ro[ok], rg[ok], strict=True):
            m = (owner == r) & (grains[other] == g)
            new.append((r, np.bincount(other[m]).argmax()))
        pairs = np.unique(np.sort(np.vstack([pairs, np.asarray(new, np.int64)]), axis=1), axis=0)
    return pairs.astype(np.int32)
