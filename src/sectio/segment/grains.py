"""Grain boundaries and grain label maps from etched micrographs.

Pipeline (every size and threshold is an option of :class:`GrainSegmentOptions`; the
values used are recorded in :class:`GrainSegmentation`):

1. **Flatten** uneven illumination: divide by a wide Gaussian blur of the image.
2. **Scale**: on a central crop (at most 512²) the boundary strength is computed at each
   of ``ridge_sigmas_px``; the scale with the best boundary/noise ratio is taken, then
   kept below 1/``scale_to_spacing`` of the closest boundary spacing found by a trial
   segmentation of the crop. An image where nothing stands out from the noise is refused
   (:class:`~sectio.errors.MeasurementError`).
3. **Boundary strength** at that scale: the larger Hessian eigenvalue (scale-normalised
   ridge strength) for dark or bright boundary lines; the gradient magnitude for shade
   contrast between grains (``contrast="grains"``).
4. **Threshold** with hysteresis: the high level from Otsu's method, the low level the
   noise level off the boundaries (capped by the same percentile for simulated white
   noise of the measured pixel noise, floored at a fraction of the high level for
   noise-free drawings).
5. **Pits** (small isolated blobs) are dropped from the boundary mask; **scratches** (long
   straight Hough segments with the same shade on both sides) are removed where the local
   line direction follows them.
6. **Grains**: seeds at local maxima of the distance to the boundary mask (they see
   through gaps up to about twice ``gap_px``), then a seeded watershed of the boundary
   strength (in horizontal strips, two threads, on tall images).
7. **Merge** neighbouring regions whose dividing line lies mostly below the low level, and
   join regions below the size floor to the neighbour they share most border with.
"""

from __future__ import annotations

import os
from dataclasses import asdict, dataclass, field, replace

import numpy as np
from scipy import ndimage as ndi

from ..errors import MeasurementError, OptionError


@dataclass(frozen=True)
class GrainSegmentOptions:
    """Options of the grain segmentation (pixels unless stated)."""

    boundaries: str = "dark"  # "dark" | "bright"
    contrast: str = "boundaries"  # "boundaries" | "grains"
    flatten_sigma_px: float | None = None  # None: max(shape) / 8
    ridge_sigma_px: float | None = None  # None: chosen per image among ridge_sigmas_px
    ridge_sigmas_px: tuple[float, ...] = (1.0, 1.5, 2.0, 3.0)
    min_boundary_strength: float = 0.01  # Otsu level below this (grey range 1): no boundaries
    min_noise_ratio: float = 0.8  # Otsu level below this × white-noise level: no boundaries
    scale_to_spacing: float = 7.0  # the scale stays below 1/7 of the closest boundary spacing
    threshold_high: float | None = None  # None: Otsu on the boundary strength
    threshold_low: float | None = None  # None: noise level (percentile off the boundaries)
    noise_percentile: float = 99.5
    min_low_fraction: float | None = None  # low ≥ this × high; None: 0.25 lines, 0.02 shades
    gap_px: float = 3.0  # seeds are interiors > gap_px from boundaries: bridges ~2·gap gaps
    merge_support: float = 0.3  # merge neighbours whose dividing line is < 30 % above low
    min_grain_area_px: float | None = None  # None: auto (5 % of the median grain area)
    min_grain_area_fraction: float = 0.05
    remove_scratches: bool = True
    scratch_min_length_fraction: float = 0.2
    scratch_side_ratio: float = 1.0
    scratch_side_offset: float = 100.0  # side samples at most this × typical size away (off)
    scratch_votes: float = 0.3  # Hough votes needed, as a fraction of the minimum length
    scratch_gap_fraction: float = 0.0  # largest gap bridged along a scratch (of the shorter side)
    remove_pits: bool = True
    detect_twins: bool = True  # straight parallel-sided bands (sectio.segment.twins)
    twin_scale_to_width: float = 5.0  # twinned: scale ≤ median band width / 5

    def __post_init__(self):
        if self.boundaries not in ("dark", "bright"):
            raise OptionError(f"--boundaries must be dark or bright, got {self.boundaries!r}.")
        if self.contrast not in ("boundaries", "grains"):
            raise OptionError(f"--contrast must be boundaries or grains, got {self.contrast!r}.")
        if self.ridge_sigma_px is not None and not 0.5 <= self.ridge_sigma_px <= 20:
            raise OptionError(
                f"--ridge-scale must lie between 0.5 and 20 pixels, got {self.ridge_sigma_px}."
            )
        if not 50.0 <= self.noise_percentile < 100.0:
            raise OptionError("noise_percentile must lie in [50, 100).")

    def to_dict(self) -> dict:
        return asdict(self)


@dataclass(frozen=True)
class GrainSegmentation:
    """A grain label map and the levels and counts of the segmentation that made it."""

    labels: np.ndarray  # (M, N) int32, grains 1..n, no gaps
    boundary_mask: np.ndarray  # detected boundary pixels (before watershed)
    strength: np.ndarray  # boundary strength image
    threshold_high: float
    threshold_low: float
    min_grain_area_px: float
    n_scratches_removed: int
    n_merged: int
    n_small_removed: int
    ridge_sigma_px: float = 1.5
    typical_region_px: float = 0.0  # √ median area of the watershed regions before merging
    # Twin-related region pairs of ``labels`` (sectio.segment.twins): (k, 2) int32.
    twin_pairs: np.ndarray = field(default_factory=lambda: np.zeros((0, 2), np.int32))
    twin_rescaled: bool = False  # the scale was lowered to resolve narrow twin bands


def flatten(image: np.ndarray, sigma_px: float | None = None) -> np.ndarray:
    """Divide out uneven illumination (a wide Gaussian of the image); result scaled to [0, 1]."""
    img = image.astype(np.float32)
    sigma = sigma_px or max(img.shape) / 8.0
    bg = _wide_blur(img, sigma)
    flat = img / np.maximum(bg, 1e-3)
    return (flat - flat.min()) / max(float(np.ptp(flat)), 1e-6)


def ridge_strength(
    flat: np.ndarray, sigma_px: float, *, dark: bool = True, orientation: bool = False
):
    """Scale-normalised line (ridge) strength: largest Hessian eigenvalue × σ².

    A dark line has a positive second derivative across it, so the larger eigenvalue of
    the Hessian of the Gaussian-smoothed image is large on the line and near zero in flat
    grain interiors whatever their shade (Lindeberg 1998, *Int. J. Comput. Vis.* 30:117,
    scale normalisation; from memory).
    """
    img = flat if dark else -flat
    hxx = ndi.gaussian_filter(img, sigma_px, order=(0, 2))
    hyy = ndi.gaussian_filter(img, sigma_px, order=(2, 0))
    hxy = ndi.gaussian_filter(img, sigma_px, order=(1, 1))
    half_trace = (hxx + hyy) / 2
    root = np.sqrt(((hxx - hyy) / 2) ** 2 + hxy**2)
    strength = ((half_trace + root) * sigma_px**2).astype(np.float32)
    if not orientation:
        return strength
    # Direction (radians, image x to the right, y down) of the eigenvector of the larger
    # eigenvalue, i.e. the normal of the line.
    normal = 0.5 * np.arctan2(2 * hxy, hxx - hyy)
    return strength, normal.astype(np.float32)


def strength_of_flat(
    flat: np.ndarray, opts: GrainSegmentOptions, sigma: float, *, orientation: bool = False
):
    """Boundary strength of a flattened image at one scale: the ridge strength of dark (or
    bright) lines, or the gradient magnitude for shade contrast (which has no orientation,
    returned as None)."""
    if opts.contrast == "grains":
        grad = ndi.gaussian_gradient_magnitude(flat, sigma).astype(np.float32)
        return (grad, None) if orientation else grad
    return ridge_strength(flat, sigma, dark=opts.boundaries == "dark", orientation=orientation)


def _noise_sigma(flat: np.ndarray) -> float:
    """Pixel noise from horizontal neighbour differences (robust: most pairs lie in grains)."""
    d = flat[::2, 1::2].astype(np.float32) - flat[::2, 0:-1:2].astype(np.float32)
    return float(1.4826 * np.median(np.abs(d)) / np.sqrt(2.0))


def _white_noise_level(opts: GrainSegmentOptions, sigma: float, noise: float) -> float:
    """The noise percentile of the boundary strength of pure white noise of this level."""
    rng = np.random.default_rng(12345)
    sim = rng.normal(0.5, max(noise, 1e-6), size=(256, 256)).astype(np.float32)
    st = strength_of_flat(sim, opts, sigma)
    return float(np.percentile(st[16:-16, 16:-16], opts.noise_percentile))


def _background_sample(strength: np.ndarray, hi: float, sigma: float) -> np.ndarray:
    """Strength values away from clear boundaries (mostly grain interiors), subsampled."""
    strong = strength > hi
    reach = 2 * int(np.ceil(3.0 * sigma + 2.0)) + 1
    far = ~ndi.maximum_filter(strong.view(np.uint8), size=reach).astype(bool)
    sample = strength[far] if np.count_nonzero(far) > 1000 else strength[~strong]
    return sample[:: max(1, sample.size // 400_000)]


def _levels(
    strength: np.ndarray, opts: GrainSegmentOptions, sigma: float, flat: np.ndarray | None = None
) -> tuple[float, float]:
    """High level (Otsu) and low level (the noise level).

    The low level is the ``noise_percentile`` of the strength away from clear boundaries,
    capped at 1.5 × the same percentile for white noise of the measured pixel noise (weak
    boundaries far from strong ones would otherwise inflate it).
    """
    hi = opts.threshold_high if opts.threshold_high is not None else _otsu(strength)
    if opts.threshold_low is not None:
        lo = float(opts.threshold_low)
    else:
        sample = _background_sample(strength, hi, sigma)
        noise = _noise_sigma(flat) if flat is not None else None
        lo = _noise_low_level(sample, hi, opts, sigma, noise)
    return _final_levels(hi, lo, opts)


def _noise_low_level(sample, hi: float, opts: GrainSegmentOptions, sigma: float, noise) -> float:
    """The noise percentile of a background sample, capped by the white-noise level."""
    lo = float(np.percentile(sample, opts.noise_percentile)) if sample.size else hi / 2
    if noise is not None:
        lo = min(lo, 1.5 * _white_noise_level(opts, sigma, noise))
    return lo


def _final_levels(hi: float, lo: float, opts: GrainSegmentOptions) -> tuple[float, float]:
    # Noise-free images (drawn or traced boundaries) have a noise level near zero; keep the
    # low level at a fraction of the high one so grain interiors are never "boundary".
    fraction = opts.min_low_fraction
    if fraction is None:
        # Ridge strength leaves a halo around a clean line; shade edges in flat-shaded
        # maps (e.g. orientation maps) can be weak yet real, so they get a lower floor.
        fraction = 0.02 if opts.contrast == "grains" else 0.25
    lo = max(lo, fraction * hi)
    return float(hi), float(min(lo, hi))


def _wide_blur(img: np.ndarray, sigma: float) -> np.ndarray:
    """Gaussian blur of a wide sigma, computed on a subsampled image (background only)."""
    small, f = _blur_subsampled(img, sigma)
    return upsample_rows(small, img.shape, 0, img.shape[0])


def _blur_subsampled(img, sigma: float) -> tuple[np.ndarray, int]:
    """The wide blur on every f-th pixel (f = sigma // 4): the small background image."""
    f = max(1, int(sigma // 4))
    return ndi.gaussian_filter(img[::f, ::f], sigma / f, mode="reflect"), f


def _linear_axis0(small: np.ndarray, coords: np.ndarray) -> np.ndarray:
    i0 = np.clip(np.floor(coords).astype(np.intp), 0, small.shape[0] - 1)
    i1 = np.minimum(i0 + 1, small.shape[0] - 1)
    t = (coords - i0)[:, None]
    return small[i0] * (1.0 - t) + small[i1] * t


def _zoom_coords(n_out: int, n_in: int) -> np.ndarray:
    """Input coordinate of every output index when n_in samples are stretched over n_out
    (end points on end points, as ``scipy.ndimage.zoom`` places them)."""
    if n_out <= 1 or n_in <= 1:
        return np.zeros(n_out)
    return np.arange(n_out) * ((n_in - 1) / (n_out - 1))


def upsample_rows(small: np.ndarray, shape, r0: int, r1: int) -> np.ndarray:
    """Rows r0..r1 of the linear interpolation of ``small`` stretched to ``shape``.

    The same numbers as ``ndi.zoom(small, order=1)`` up to rounding, but any band of rows
    can be made on its own, identical to the same rows of the whole image (tiled mosaics).
    """
    rows = _linear_axis0(small, _zoom_coords(shape[0], small.shape[0])[r0:r1])
    return _linear_axis0(rows.T, _zoom_coords(shape[1], small.shape[1])).T.astype(np.float32)


def _otsu(values: np.ndarray) -> float:
    from skimage.filters import threshold_otsu

    return float(threshold_otsu(values))


def _remove_pits(mask: np.ndarray, max_extent_px: float) -> np.ndarray:
    """Drop small compact components of the boundary mask (pits, dust), not networks."""
    lab, n = ndi.label(mask, structure=np.ones((3, 3)))
    if n == 0:
        return mask
    objs = ndi.find_objects(lab)
    ext = np.array([max(s[0].stop - s[0].start, s[1].stop - s[1].start) for s in objs])
    small = np.concatenate([[False], ext <= max_extent_px])
    return mask & ~small[lab]


def _scratch_lines(
    mask, flat, strength, lo, typical_grain_px: float, opts: GrainSegmentOptions, sigma: float
):
    """Long straight segments of the mask along which the shade does not change side to side."""
    from skimage.transform import probabilistic_hough_line

    h, w = mask.shape
    min_len = max(opts.scratch_min_length_fraction * min(h, w), 1.5 * typical_grain_px)
    if min_len > 0.95 * max(h, w):
        return []
    # Faint scratches break up in the hysteresis mask: look for them in everything above
    # the noise level, thinned to one-pixel lines, and bridge gaps of a few pixels.
    from skimage.morphology import skeletonize

    candidates = skeletonize(strength > lo)
    smooth = ndi.gaussian_filter(flat, 2.0)
    noise = _noise_sigma(flat) / 4  # pixel noise after the 2-px smoothing, roughly
    lines = probabilistic_hough_line(
        candidates,
        threshold=int(min_len * opts.scratch_votes),
        line_length=int(min_len),
        line_gap=int(max(2 * sigma + 6, opts.scratch_gap_fraction * min(h, w))),
        rng=0,
    )
    found = []
    for (x0, y0), (x1, y1) in lines:
        n = int(np.hypot(x1 - x0, y1 - y0))
        if n < min_len:
            continue
        t = np.linspace(0, 1, n)
        xs, ys = x0 + t * (x1 - x0), y0 + t * (y1 - y0)
        nx, ny = -(y1 - y0) / n, (x1 - x0) / n
        # Sample the two sides just outside the line, but well inside the grains it crosses.
        off = max(sigma + 2.0, min(3.0 * sigma + 3.0, opts.scratch_side_offset * typical_grain_px))
        a = ndi.map_coordinates(smooth, [ys + ny * off, xs + nx * off], order=1, mode="nearest")
        b = ndi.map_coordinates(smooth, [ys - ny * off, xs - nx * off], order=1, mode="nearest")
        a2 = ndi.map_coordinates(
            smooth, [ys + ny * 2 * off, xs + nx * 2 * off], order=1, mode="nearest"
        )
        # A grain boundary separates two shades over most of its length; a scratch runs
        # through grain interiors, the same shade on both sides for most of its length.
        # Reference: the shade change between two points on the same side, as far apart.
        side_diff = np.median(np.abs(a - b))
        same_side = np.median(np.abs(a - a2)) + 1e-6
        if side_diff < 0.5 * opts.scratch_side_ratio * same_side + 2.0 * noise:
            found.append(((x0, y0), (x1, y1)))
    return found


def _scratch_pixels(
    shape, lines, width: float, normal: np.ndarray, tolerance_deg: float = 20.0
) -> np.ndarray:
    """Pixels near a scratch line whose own line direction follows the scratch.

    Boundaries that cross the scratch keep their pixels (their direction differs), so
    removing a scratch does not open gaps in the boundaries it crosses.
    """
    from skimage.draw import line as draw_line

    out = np.zeros(shape, bool)
    for (x0, y0), (x1, y1) in lines:
        band = np.zeros(shape, bool)
        rr, cc = draw_line(int(y0), int(x0), int(y1), int(x1))
        band[rr, cc] = True
        band = ndi.binary_dilation(band, iterations=max(1, int(round(width))))
        line_normal = np.arctan2(x1 - x0, -(y1 - y0))  # normal of the segment, x-right y-down
        diff = np.abs(((normal[band] - line_normal) + np.pi / 2) % np.pi - np.pi / 2)
        aligned = np.zeros(shape, bool)
        aligned[band] = diff < np.deg2rad(tolerance_deg)
        out |= aligned
    return out


def _pair_table(labels: np.ndarray, values: np.ndarray):
    """Per pair of 4-adjacent labels: (key array, n contacts, sum of values at contacts)."""
    n = int(labels.max())
    los, his, vals = [], [], []
    for a, b, va, vb in (
        (labels[:, :-1], labels[:, 1:], values[:, :-1], values[:, 1:]),
        (labels[:-1, :], labels[1:, :], values[:-1, :], values[1:, :]),
    ):
        m = a != b
        los.append(np.minimum(a[m], b[m]))
        his.append(np.maximum(a[m], b[m]))
        vals.append(np.maximum(va[m], vb[m]))
    lo = np.concatenate(los).astype(np.int64)
    hi = np.concatenate(his).astype(np.int64)
    v = np.concatenate(vals).astype(float)
    key = lo * (n + 1) + hi
    uk, inv = np.unique(key, return_inverse=True)
    return uk, n, np.bincount(inv), np.bincount(inv, weights=v)


def _two_label_pixels(labels: np.ndarray, radius: int, n_labels: int | None = None) -> np.ndarray:
    """Pixels whose (2·radius+1)² window holds at most two labels (away from junctions
    and from other boundaries). Two orders of the labels are checked by their window
    minimum and maximum; a third label hides from both only by chance. ``n_labels``
    (default: the map's largest label + 1) fixes the second order for a band of a map."""
    size = 2 * radius + 1
    out = np.ones(labels.shape, bool)
    n = int(labels.max()) + 1 if n_labels is None else int(n_labels)
    perm = np.random.default_rng(0).permutation(n).astype(np.int32)
    for lab in (labels, perm[labels]):
        lo = ndi.minimum_filter(lab, size=size)
        hi = ndi.maximum_filter(lab, size=size)
        out &= (lab == lo) | (lab == hi)
    return out


def _merge_unsupported(labels, on_boundary: np.ndarray, min_support: float,
                       junction_px: int = 0):
    """Merge neighbouring regions whose dividing line lies mostly off detected boundaries.

    With ``junction_px``, a dividing line is judged on its pixels farther than that from
    any third region (where the halo of the boundaries it runs into cannot lend it
    support): a short cross line in a narrow band is judged on its middle, not on its
    ends. Lines with fewer than two such pixels are judged on all of theirs.
    """
    if labels.max() < 2:
        return labels, 0
    uk, n, total, supported = _pair_table(labels, on_boundary.astype(np.float32))
    if junction_px > 0:
        inner = _two_label_pixels(labels, junction_px)
        _, _, _, n_inner = _pair_table(labels, inner.astype(np.float32))
        _, _, _, sup_inner = _pair_table(labels, (inner & on_boundary).astype(np.float32))
        total, supported = judged_away_from_junctions(total, supported, n_inner, sup_inner)
    lut, n_merged = _merge_lut(uk, n, total, supported, min_support)
    return (labels, 0) if lut is None else (lut[labels], n_merged)


def judged_away_from_junctions(total, supported, n_inner, sup_inner):
    """(contacts, supported contacts) of each pair, on its inner pixels where it has two
    or more (the whole image and the tiled path share this rule)."""
    use = n_inner >= 2
    return np.where(use, n_inner, total), np.where(use, sup_inner, supported)


def junction_radius_px(sigma: float, opts) -> int:
    """How far from a third region a dividing line's pixels must lie to judge it."""
    return int(np.ceil(sigma + 1.0)) if opts.contrast == "boundaries" else 0


def _merge_lut(uk, n, total, supported, min_support: float):
    """Label map of the merge from the pair table (None when nothing merges)."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    weak = supported / total < min_support
    a, b = uk[weak] // (n + 1), uk[weak] % (n + 1)
    if a.size == 0:
        return None, 0
    g = coo_matrix((np.ones(a.size), (a, b)), shape=(n + 1, n + 1))
    _, comp = connected_components(g, directed=False)
    uniq, new = np.unique(comp[1:], return_inverse=True)
    lut = np.zeros(n + 1, dtype=np.int32)
    lut[1:] = new + 1
    return lut, int(n - uniq.size)


def _absorb_small(labels, min_area_px):
    """Join each region below the size floor to the neighbour it shares most border with.

    Repeated until no region below the floor is left (or nothing changes), so a cluster of
    small fragments ends up inside a neighbouring grain.
    """
    counts = np.bincount(labels.ravel())
    n_small = int(np.count_nonzero((counts[1:] < min_area_px) & (counts[1:] > 0)))
    if n_small == 0 or n_small == np.count_nonzero(counts[1:]):
        return labels, 0
    for _ in range(10):
        counts = np.bincount(labels.ravel())
        if not _any_small(counts, min_area_px):
            break
        uk, n, contacts, _ = _pair_table(labels, np.zeros(labels.shape, np.float32))
        lut = _absorb_lut(counts, uk, n, contacts, min_area_px)
        if lut is None:
            break
        new = lut[labels].astype(np.int32)
        if np.array_equal(new, labels):
            break
        labels = new
    return labels, n_small


def _any_small(counts, min_area_px) -> bool:
    small = (counts < min_area_px) & (counts > 0)
    small[0] = False
    return bool(small.any()) and bool(np.count_nonzero(counts[1:] > 0) >= 2)


def _absorb_lut(counts, uk, n, contacts, min_area_px):
    """One round of :func:`_absorb_small` as a label map (None when no small region touches
    another): each small region to its neighbour of longest shared border (ties: larger)."""
    small = (counts < min_area_px) & (counts > 0)
    small[0] = False
    a, b = uk // (n + 1), uk % (n + 1)
    own = np.concatenate([a, b])
    other = np.concatenate([b, a])
    touch = np.concatenate([contacts, contacts]).astype(float)
    keep = small[own]
    own, other, touch = own[keep], other[keep], touch[keep]
    if own.size == 0:
        return None
    order = np.lexsort((counts[other], touch, own))
    last = np.r_[own[order][1:] != own[order][:-1], True]
    lut = np.arange(n + 1)
    lut[own[order][last]] = other[order][last]
    # Two small regions pointing at each other join under the smaller label.
    mutual = lut[lut] == np.arange(n + 1)
    lut = np.where(mutual, np.minimum(lut, np.arange(n + 1)), lut)
    for _ in range(8):  # follow chains a -> b -> c
        nxt = lut[lut]
        if np.array_equal(nxt, lut):
            break
        lut = nxt
    return lut


def _relabel_sequential(labels):
    ids = np.unique(labels)
    ids = ids[ids > 0]
    lut = np.zeros(int(labels.max()) + 1, dtype=np.int32)
    lut[ids] = np.arange(1, ids.size + 1, dtype=np.int32)
    return lut[labels]


def _crop(image: np.ndarray, size: int = 512) -> np.ndarray:
    h, w = image.shape
    return image[
        max(0, h // 2 - size // 2) : h // 2 + size // 2,
        max(0, w // 2 - size // 2) : w // 2 + size // 2,
    ]


def _scale_scores(crop: np.ndarray, opts: GrainSegmentOptions):
    """Per candidate scale: (sigma, Otsu level, noise level, white-noise level) on a crop."""
    flat = flatten(crop, opts.flatten_sigma_px)
    noise = _noise_sigma(flat)
    out = []
    for sigma in opts.ridge_sigmas_px:
        st = strength_of_flat(flat, opts, sigma)
        hi, lo = _levels(st, opts, sigma, flat)
        out.append((sigma, hi, lo, _white_noise_level(opts, sigma, noise)))
    return flat, out


def _check_boundaries_present(scores, opts: GrainSegmentOptions) -> None:
    """Refuse an image in which nothing stands out as boundaries at any scale.

    On synthetic sections (noisy, faint, bright boundaries, shade contrast) the best Otsu
    level was ≥ 0.015 of the grey range and ≥ 0.96 × the white-noise level of the measured
    pixel noise; smooth ramps and spots gave < 0.006, a noisy ramp 0.68 ×, noise 0.24 ×.
    """
    best_level = max(hi for _, hi, _, _ in scores)
    best_ratio = max(hi / wn if wn > 0 else np.inf for _, hi, _, wn in scores)
    if best_level < opts.min_boundary_strength or best_ratio < opts.min_noise_ratio:
        raise MeasurementError(
            "no grain boundaries stand out from the noise; check the image, "
            "--boundaries dark/bright or --contrast grains"
        )


def _choose_scale(image: np.ndarray, opts: GrainSegmentOptions) -> tuple[float, float | None]:
    """The smoothing scale for the boundary strength, judged on a central crop (≤ 512²).

    First the scale that best separates boundaries from noise (largest high/low level
    ratio, a finer scale preferred unless a coarser one is clearly better); then, since a
    scale must stay well below the spacing of neighbouring boundaries or close boundaries
    blur together, the largest candidate below 1/``scale_to_spacing`` of the smallest
    per-direction mean intercept of a trial segmentation of the crop. Raises
    :class:`MeasurementError` when no scale shows boundaries above the noise.
    """
    from ..stereology import count_crossings

    crop = _crop(image)
    flat, scores = _scale_scores(crop, opts)
    if opts.threshold_high is None:
        _check_boundaries_present(scores, opts)
    if opts.ridge_sigma_px is not None:
        return float(opts.ridge_sigma_px), None
    best, best_score = opts.ridge_sigmas_px[0], -np.inf
    for sigma, hi, lo, _ in scores:
        score = hi / max(lo, 1e-9)
        if score > best_score * 1.05:  # prefer the finer scale unless clearly better
            best, best_score = sigma, score
    try:
        trial = _segment_at_scale(flat, opts, best)
    except MeasurementError:
        return float(best), None
    spacing = float(np.nanmin(count_crossings(trial.labels).direction_intercepts_px))
    finer = [s for s in opts.ridge_sigmas_px if s <= spacing / opts.scale_to_spacing]
    if best > spacing / opts.scale_to_spacing and finer and max(finer) < best:
        return float(max(finer)), None
    return float(best), trial.typical_region_px


def segment_grains(
    image: np.ndarray, options: GrainSegmentOptions | None = None
) -> GrainSegmentation:
    """Grain label map of a grey micrograph.

    Parameters
    ----------
    image : (M, N) ndarray of float
        Grey image in [0, 1].
    options : GrainSegmentOptions, optional

    Returns
    -------
    GrainSegmentation
        ``labels`` numbers the grains 1..n and leaves no pixel unassigned.

    Raises
    ------
    MeasurementError
        When no boundary network (hence no grains) can be found.
    """
    opts = options or GrainSegmentOptions()
    sigma, typical_px = _choose_scale(image, opts)
    flat = flatten(image, opts.flatten_sigma_px)
    seg = _segment_at_scale(flat, opts, sigma, typical_px)
    if not opts.detect_twins:
        return seg
    return _with_twins(seg, flat, opts)


def _with_twins(seg: GrainSegmentation, flat, opts: GrainSegmentOptions) -> GrainSegmentation:
    """Twin pairs of the region map. A twinned field whose narrow bands are blurred
    together at the chosen scale (the scale above 1/``twin_scale_to_width`` of the median
    band width, five bands or more, one of them ending inside its grain) is segmented
    again at a finer candidate scale."""
    from .twins import find_twins, join_fragments

    pairs, widths, n_ending = find_twins(seg.labels, flat, return_widths=True)
    wanted = opts.ridge_sigma_px is None and opts.contrast == "boundaries"
    if wanted and widths.size >= 5 and n_ending >= 1:
        limit = float(np.median(widths)) / opts.twin_scale_to_width
        finer = [s for s in opts.ridge_sigmas_px if s <= limit]
        if seg.ridge_sigma_px > limit and finer and max(finer) < seg.ridge_sigma_px:
            fine = replace(_segment_at_scale(flat, opts, max(finer)), twin_rescaled=True)
            fine_pairs, _, fine_ending = find_twins(fine.labels, flat, return_widths=True)
            if fine_ending >= 3:  # twinned after all: keep the finer map
                seg, pairs = fine, fine_pairs
    return replace(seg, twin_pairs=join_fragments(seg.labels, pairs))


def _segment_at_scale(
    flat: np.ndarray, opts: GrainSegmentOptions, sigma: float, typical_px: float | None = None
) -> GrainSegmentation:
    """Segment at one scale. ``typical_px``: the typical region size (√ median area of the
    watershed regions before merging) if already known from a trial; scratches are then
    looked for before the watershed, which then runs once."""
    from skimage.filters import apply_hysteresis_threshold

    strength, normal = strength_of_flat(flat, opts, sigma, orientation=True)
    if float(np.ptp(strength)) <= 1e-9:
        raise MeasurementError("the image shows no boundaries (no contrast); check the image")
    hi, lo = _levels(strength, opts, sigma, flat)
    mask = apply_hysteresis_threshold(strength, lo, hi)
    if mask.mean() < 1e-4 or mask.mean() > 0.8:
        raise MeasurementError(
            "no grain boundary network was found; "
            "check --boundaries dark/bright or --contrast grains"
        )
    if opts.remove_pits:
        mask = _remove_pits(mask, max_extent_px=6 * sigma + 4)
    scratches_wanted = opts.remove_scratches and opts.contrast != "grains"
    labels = None
    if typical_px is None:
        labels = _seeded_watershed(mask, strength, opts.gap_px)
        areas = np.bincount(labels.ravel())[1:]
        typical_px = float(np.sqrt(np.median(areas[areas > 0]))) if areas.any() else 0.0
    n_scratches = 0
    if scratches_wanted and typical_px > 0:
        lines = _scratch_lines(mask, flat, strength, lo, typical_px, opts, sigma)
        if lines:
            n_scratches = len(lines)
            scratch = _scratch_pixels(mask.shape, lines, sigma + 1, normal)
            mask = mask & ~scratch
            strength = np.where(scratch, np.minimum(strength, lo * 0.5), strength)
            labels = None
    if labels is None:
        labels = _seeded_watershed(mask, strength, opts.gap_px)
    if labels.max() < 1:
        raise MeasurementError("no grains were found; check the boundary contrast options")
    support = strength > lo
    if opts.contrast == "grains":
        # A shade edge gives a band several pixels wide; judge dividing lines against its
        # centre line, or seeds in the tips of grains inside the band are never merged.
        from skimage.morphology import skeletonize

        support = ndi.binary_dilation(skeletonize(support), iterations=1)
    junction = junction_radius_px(sigma, opts)
    labels, n_merged = _merge_unsupported(labels, support, opts.merge_support, junction)
    areas = np.bincount(labels.ravel())[1:]
    areas = areas[areas > 0]
    if opts.min_grain_area_px is not None:
        min_area = float(opts.min_grain_area_px)
    else:
        min_area = max(4.0, opts.min_grain_area_fraction * float(np.median(areas)))
    labels, n_small = _absorb_small(labels, min_area)
    labels = _relabel_sequential(labels)
    if labels.max() < 2:
        raise MeasurementError("fewer than two grains were found; check the boundary options")
    return GrainSegmentation(
        labels,
        mask,
        strength,
        hi,
        lo,
        min_area,
        n_scratches,
        n_merged,
        n_small,
        sigma,
        typical_px,
    )


def _seeded_watershed(mask, strength, gap_px):
    """Seeds = grain interiors farther than ``gap_px`` from any boundary pixel.

    Eroding the interiors this way cuts the narrow necks left by gaps in a boundary (up to
    about 2·gap_px wide), so two grains joined through a gap still get a seed each; the
    watershed of the boundary strength then draws the missing piece of boundary.
    """

    dist = ndi.distance_transform_edt(~mask).astype(np.float32)
    size = 2 * int(np.ceil(gap_px)) + 1
    peaks = (dist >= ndi.maximum_filter(dist, size=size)) & (dist >= 1.0)
    # Peaks that touch (plateaus, medial ridges) form one seed; the merge step later
    # joins seeds of one grain whose dividing line does not lie on a boundary.
    markers, _ = ndi.label(peaks, structure=np.ones((3, 3)))
    return _watershed_in_strips(strength, markers)


def _watershed_in_strips(strength, markers, strip_rows: int = 1024, margin_rows: int = 256):
    """Seeded watershed, in horizontal strips on large images, two strips at a time.

    Markers carry global labels, so strips need no stitching: each strip is flooded with
    ``margin_rows`` of context above and below, and only its own rows are kept. A core
    pixel comes out as in one whole-image flood unless its grain reaches further than the
    margin beyond the strip (grains over 256 px tall in an image over 1536 rows). The
    flooding releases the GIL, so two threads use both cores; the strips are also faster
    one by one than a single flood of a large image (the priority queue stays small).
    """
    from concurrent.futures import ThreadPoolExecutor

    from skimage.segmentation import watershed

    h = strength.shape[0]
    if h <= 1.5 * strip_rows:
        return watershed(strength, markers=markers).astype(np.int32)

    def flood(r0: int) -> np.ndarray:
        r1 = min(h, r0 + strip_rows)
        a, b = max(0, r0 - margin_rows), min(h, r1 + margin_rows)
        return watershed(strength[a:b], markers=markers[a:b])[r0 - a : r1 - a].astype(np.int32)

    starts = list(range(0, h, strip_rows))
    with ThreadPoolExecutor(max_workers=min(2, os.cpu_count() or 1)) as pool:
        return np.vstack(list(pool.map(flood, starts)))
