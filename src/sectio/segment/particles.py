"""Second-phase particles: background flattening, threshold, clean-up, touching-particle split.

Steps (each recorded in :class:`ParticleSegmentation`):

1. **Flatten** — the matrix grey level is estimated in blocks (median per block), smoothed
   and interpolated, and the image is divided by it (illumination is multiplicative).
   Rescaled to [0, 1].
2. **Phase and regime** — the field is cut into edge-bounded regions and the region means
   split in two (:mod:`sectio.segment._regions`). ``phase="auto"`` takes the continuous
   class as the matrix. When the particle class covers ``DENSE`` of the field or more
   (and differs significantly from the matrix class, and is not itself the continuous
   phase) the structure is dense and the regions are the mask; otherwise step 4.
3. **Denoise** — Gaussian filter, ``denoise_px`` (default 1 px).
4. **Half-contrast threshold** (sparse particles) — the matrix level is the mode of the
   grey histogram and the particle level the median of particle interiors (pixels well
   above the matrix noise and at least 3 px inside them, out of reach of the blur); the
   threshold is their midpoint. This is the intermeans principle of Ridler & Calvard
   (1978), with robust class levels instead of class means. Why: with a few per cent of
   particles Otsu's between-class criterion is pulled towards the dominant matrix peak,
   and minimum-error thresholding (Kittler & Illingworth 1986) puts the cut at the Bayes
   boundary of unequal classes; both shift blurred particle edges and bias the area
   fraction. Cutting a blurred edge at half the step height puts it where the true edge
   is (common practice), whatever the fraction. A manual ``threshold`` (0–1 of the
   flattened, denoised image) replaces steps 2 and 4.
5. **Edge rims** — a secondary-electron rim just outside the particles moves their edges
   out to the rim's inner foot (:func:`rim_refine`).
6. **Clean** — holes filled (dense structures: pinholes only), components below the size
   floor removed.
7. **Split** — touching particles are separated by a watershed of the distance transform
   (Beucher & Lantuéjoul 1979); seeds are the maxima of log(1 + dist/3 px) that stand out
   by more than ``split_depth`` (default 0.3 ≈ a neck narrower than 3/4 of the smaller
   particle's inscribed radius, with an absolute floor of ≈1 px for small particles).

:func:`partial_area_fraction` gives the area fraction with the edge band counted by grey
level (reported beside the mask's fraction).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy import ndimage as ndi

from ..errors import OptionError
from ._edges import _deep_median, partial_area_fraction, rim_refine

__all__ = ["ParticleSegmentation", "segment_particles", "flatten_background",
           "half_contrast_threshold", "partial_area_fraction", "rim_refine"]

#: Share of the field above which "particles" are probably the matrix (wrong --phase).
MOSTLY_PARTICLE = 0.6
#: Particle share of the edge-bounded regions from which the structure counts as dense
#: (the histogram mode may no longer be the matrix).
DENSE = 0.2


@dataclass(frozen=True)
class ParticleSegmentation:
    """Result of :func:`segment_particles` (pixel units)."""

    mask: np.ndarray  # bool, particle pixels (after holes filled / size floor)
    labels: np.ndarray  # int32, one label per particle after splitting
    split_lines: np.ndarray  # bool, pixels on a boundary created by splitting
    flattened: np.ndarray  # float32, flattened and denoised image in [0, 1] (phase bright)
    threshold: float | None  # on ``flattened``; None when no particle contrast was found
    threshold_method: str
    matrix_level: float
    particle_level: float | None
    noise_sd: float
    opposite_fraction: float  # share of pixels clearly on the other side of the matrix
    min_area_px: float
    n_split: int  # particles created by splitting minus components split
    phase: str = "bright"  # the phase segmented (chosen when ``auto`` was asked)
    region_fraction: float = 0.0  # particle class share of the edge-bounded regions
    particle_continuity: float = 0.0  # share of the particle class in its largest piece
    matrix_continuity: float = 0.0  # the same for the matrix class
    region_separability: float = 0.0  # Otsu's eta of the region means
    region_significance: float = 0.0  # class contrast / s.e. of a region mean
    options: dict = field(default_factory=dict)


def flatten_background(image: np.ndarray, *, block_px: int | None = None) -> np.ndarray:
    """Divide out a smooth matrix-level field estimated from block medians.

    Parameters
    ----------
    image : (M, N) ndarray
        Grey image, particles brighter than the matrix.
    block_px : int, optional
        Block side; default one eighth of the shorter side (at least 16 px).

    Returns
    -------
    (M, N) ndarray of float32 in [0, 1]
    """
    img = np.asarray(image, dtype=np.float32)
    h, w = img.shape
    b = int(block_px or max(16, min(h, w) // 8))
    nb_r, nb_c = max(1, h // b), max(1, w // b)
    rows = np.linspace(0, h, nb_r + 1).astype(int)
    cols = np.linspace(0, w, nb_c + 1).astype(int)
    med = np.empty((nb_r, nb_c), np.float32)
    for i in range(nb_r):
        for j in range(nb_c):
            med[i, j] = np.median(img[rows[i]:rows[i + 1], cols[j]:cols[j + 1]])
    if nb_r * nb_c > 1:
        # a block crowded with particles reads high; a 3x3 median of blocks removes it
        med = ndi.median_filter(med, size=3, mode="nearest")
        med = ndi.gaussian_filter(med, 1.0, mode="nearest")
    # interpolate block centres to pixels (order-1 spline through the centres)
    rc = (rows[:-1] + rows[1:] - 1) / 2.0
    cc = (cols[:-1] + cols[1:] - 1) / 2.0
    ri = np.interp(np.arange(h), rc, np.arange(nb_r))
    ci = np.interp(np.arange(w), cc, np.arange(nb_c))
    bg = ndi.map_coordinates(med, np.meshgrid(ri, ci, indexing="ij"), order=1, mode="nearest")
    floor = max(float(np.percentile(img, 1)), 1e-3) if img.max() > 0 else 1e-3
    flat = img / np.maximum(bg, floor)
    lo, hi = float(flat.min()), float(flat.max())
    return ((flat - lo) / max(hi - lo, 1e-12)).astype(np.float32)


def half_contrast_threshold(img: np.ndarray, *, significance: float = 6.0
                            ) -> tuple[float | None, float, float | None, float]:
    """Midpoint between the matrix mode and the particle-interior level.

    Returns ``(threshold, matrix_level, particle_level, noise_sd)``; the threshold and
    particle level are None when nothing rises ``significance`` noise s.d. above the
    matrix (a field without particles).
    """
    mode, noise = _matrix_mode(img)
    cand = img > mode + significance * noise
    if cand.sum() < 3:
        return None, mode, None, noise
    # particle level from pixels deep inside (>= 3 px from the edge, where blur no longer
    # reaches), shallower if the particles are too small to have such pixels
    depth = ndi.distance_transform_edt(cand)
    level = None
    for d_px in (3.0, 2.0, 1.5):
        core = depth >= d_px
        if core.sum() >= 20:
            level = float(np.median(img[core]))
            break
    if level is None:
        level = float(np.percentile(img[cand], 90))
    return mode + 0.5 * (level - mode), mode, level, noise


def _matrix_mode(img: np.ndarray) -> tuple[float, float]:
    """Matrix grey level (histogram mode) and noise s.d.

    The noise is the half-normal MAD of the side of the mode with fewer outliers (the
    smaller of the two one-sided estimates), so particles of either phase do not inflate it.
    """
    x = img.ravel()
    hist, edges = np.histogram(x, bins=512, range=(0.0, 1.0))
    hist = ndi.gaussian_filter1d(hist.astype(float), 2.0)
    k = int(np.argmax(hist))
    mode = 0.5 * (edges[k] + edges[k + 1])
    sides = [mode - x[x <= mode], x[x >= mode] - mode]
    est = [1.4826 * float(np.median(v)) for v in sides if v.size > 0.01 * x.size]
    return mode, max(min(est) if est else 0.0, 1.0 / 512)


def _split(mask: np.ndarray, min_area_px: float, depth: float):
    from skimage.segmentation import watershed

    from ._morph import h_maxima  # = skimage.morphology.h_maxima, without the full sort

    dist = ndi.distance_transform_edt(mask)
    f = np.log1p(dist / 3.0)
    seeds = h_maxima(f, depth)
    markers, _ = ndi.label(seeds, structure=np.ones((3, 3)))
    labels = watershed(-dist, markers, mask=mask)
    # fragments below the size floor are flooded again from their neighbours
    areas = np.bincount(labels.ravel())
    small = areas < min_area_px
    small[0] = False
    if small.any():
        markers2 = np.where(small[labels], 0, labels)
        labels = watershed(-dist, markers2, mask=mask)
    return labels


def _reduced(img: np.ndarray, max_px: int = 2**20) -> np.ndarray:
    """Block mean of ``img`` down to at most ``max_px`` pixels (the image itself if small)."""
    f = int(np.ceil(np.sqrt(img.size / max_px)))
    if f <= 1:
        return img
    h, w = (img.shape[0] // f) * f, (img.shape[1] // f) * f
    return img[:h, :w].reshape(h // f, f, w // f, f).mean(axis=(1, 3))


def _interior_median(img: np.ndarray, mask: np.ndarray) -> float | None:
    return _deep_median(img, ndi.distance_transform_edt(mask))


def _region_cut(labels: np.ndarray, img: np.ndarray, pmask: np.ndarray) -> float | None:
    """The grey level of ``img`` between the region means of the two classes."""
    if not pmask.any() or pmask.all():
        return None
    area = np.bincount(labels.ravel())
    mean = np.bincount(labels.ravel(), img.ravel()) / np.maximum(area, 1)
    is_p = np.bincount(labels.ravel(), pmask.ravel()) > 0.5 * area
    used = area > 0
    return float(0.5 * (mean[used & ~is_p].max() + mean[used & is_p].min()))


def _clean(mask: np.ndarray, min_area_px: float, *, fill_holes_below: float | None) -> np.ndarray:
    """Fill holes (all, or those below an area) and drop pieces below the size floor."""
    if fill_holes_below is None:
        mask = ndi.binary_fill_holes(mask)
    else:
        holes, n = ndi.label(~mask)
        if n:
            areas = np.bincount(holes.ravel())
            small = areas < fill_holes_below
            small[0] = False
            mask = mask | small[holes]
    lab, n = ndi.label(mask, structure=np.ones((3, 3)))
    if n:
        areas = np.bincount(lab.ravel())
        keep = areas >= min_area_px
        keep[0] = False
        mask = keep[lab]
    return mask


def segment_particles(
    image: np.ndarray,
    *,
    phase: str = "bright",
    threshold: float | None = None,
    min_area_px: float = 7.0,
    split: bool = True,
    split_depth: float = 0.3,
    denoise_px: float = 1.0,
    block_px: int | None = None,
    method: str = "auto",
) -> ParticleSegmentation:
    """Segment second-phase particles in a grey image.

    Parameters
    ----------
    image : (M, N) ndarray
        Grey image (any range).
    phase : {"bright", "dark", "auto"}
        Whether the particles are brighter or darker than the matrix; ``auto`` takes the
        matrix to be the continuous phase (:mod:`sectio.segment._regions`).
    threshold : float, optional
        Manual threshold in [0, 1] of the flattened, denoised image in its own grey scale
        (particles above it for ``bright``, below it for ``dark``). Default: automatic.
    min_area_px : float
        Size floor: smaller particles (after filling holes) are removed.
    split : bool
        Split touching particles by a distance-transform watershed.
    split_depth, denoise_px, block_px
        Split sensitivity (log-distance units), Gaussian denoising sigma, flattening block.
    method : {"auto", "half-contrast", "regions"}
        Automatic threshold method. ``auto``: edge-bounded regions when the particle
        class of the regions covers at least ``DENSE`` of the field, otherwise the
        half-contrast threshold (module notes).

    Returns
    -------
    ParticleSegmentation
    """
    from ._regions import CONTINUITY_MARGIN, SIGNIFICANT, classify_regions

    if phase not in ("bright", "dark", "auto"):
        raise OptionError(f"--phase must be 'bright', 'dark' or 'auto', got {phase!r}.")
    if method not in ("auto", "half-contrast", "regions"):
        raise OptionError(f"--method must be 'auto', 'half-contrast' or 'regions', "
                          f"got {method!r}.")
    if threshold is not None and not 0.0 < threshold < 1.0:
        raise OptionError(
            f"--threshold {threshold!r} is outside (0, 1); give a grey level of the "
            "flattened image between 0 and 1, or leave it out for the automatic threshold."
        )
    # the block median is the matrix level whichever phase the particles are
    flat0 = flatten_background(np.asarray(image, dtype=np.float32), block_px=block_px)
    # two-class reading of edge-bounded regions (on a reduced copy of a large image)
    small = _reduced(flat0)
    scale = flat0.shape[0] / small.shape[0]
    rc = classify_regions(small, gradient_px=max(1.0, 1.5 / scale))
    requested = phase
    if phase == "auto":
        phase = "bright" if not rc.matrix_is_bright() else "dark"
    particle_cls = rc.bright if phase == "bright" else ~rc.bright
    region_fraction = float(particle_cls.mean())
    particle_cont = rc.bright_continuity if phase == "bright" else rc.dark_continuity
    matrix_cont = rc.dark_continuity if phase == "bright" else rc.bright_continuity
    flat = 1.0 - flat0 if phase == "dark" else flat0
    if denoise_px > 0:
        flat = ndi.gaussian_filter(flat, denoise_px)
        lo, hi = float(flat.min()), float(flat.max())
        flat = (flat - lo) / max(hi - lo, 1e-12)
    if method == "auto":
        # dense two-phase structure whose particle class is not the continuous one
        dense = (region_fraction >= DENSE and rc.significance >= SIGNIFICANT
                 and particle_cont < matrix_cont + CONTINUITY_MARGIN)
        method = "regions" if dense else "half-contrast"
    if method == "regions" and threshold is None:
        t_auto, particle = None, None
        matrix, noise = _matrix_mode(flat)
        opposite = 0.0  # no single matrix level to be on the other side of
    else:
        t_auto, matrix, particle, noise = half_contrast_threshold(flat)
        # features clearly on the other side of the matrix level (a wrong --phase shows)
        opposite = float(np.mean(flat < matrix - 6.0 * noise))
    t: float | None
    if threshold is not None:
        t = 1.0 - threshold if phase == "dark" else float(threshold)
        method_txt = "manual"
        mask = np.zeros(flat.shape, bool) if t is None else _clean(
            flat > t, min_area_px, fill_holes_below=None)
    elif method == "regions":
        full = rc if scale == 1 else classify_regions(flat0)
        pmask = full.bright if phase == "bright" else ~full.bright
        t = _region_cut(full.labels, flat, pmask)
        matrix = _interior_median(flat, ~pmask) or matrix
        particle = _interior_median(flat, pmask) if pmask.any() else None
        method_txt = ("edge-bounded regions (gradient watershed, Otsu split of region "
                      "means)")
        # in a dense structure an enclosed piece of matrix is common: fill pinholes only
        mask = _clean(pmask, min_area_px, fill_holes_below=min_area_px)
    else:
        t = t_auto
        method_txt = "half-contrast (matrix mode / particle-interior midpoint)"
        mask = np.zeros(flat.shape, bool) if t is None else _clean(
            flat > t, min_area_px, fill_holes_below=None)
    rim_depth = 0.0
    if threshold is None and mask.any():
        mask, rim_depth = rim_refine(flat, mask)
        if rim_depth:
            mask = _clean(mask, min_area_px, fill_holes_below=(
                None if method == "half-contrast" else min_area_px))
    if split and mask.any():
        labels = _split(mask, min_area_px, split_depth)
    else:
        labels, _ = ndi.label(mask, structure=np.ones((3, 3)))
    labels = labels.astype(np.int32)
    lines = split_lines(labels)
    n_comp = ndi.label(mask, structure=np.ones((3, 3)))[1]
    n_split = int(labels.max()) - int(n_comp)

    def back(v):
        return None if v is None else float(1.0 - v if phase == "dark" else v)

    reported_t = back(t)
    out_flat = 1.0 - flat if phase == "dark" else flat
    options = {"phase": phase, "phase_requested": requested, "threshold": reported_t,
               "threshold_method": method_txt, "method": method if threshold is None
               else "manual", "min_area_px": float(min_area_px), "split": bool(split),
               "split_depth": split_depth, "denoise_px": denoise_px, "block_px": block_px,
               "edge_rim_depth": rim_depth}
    return ParticleSegmentation(
        mask=mask, labels=labels, split_lines=lines, flattened=out_flat.astype(np.float32),
        threshold=reported_t, threshold_method=method_txt,
        matrix_level=back(matrix), particle_level=back(particle),
        noise_sd=noise, opposite_fraction=opposite, min_area_px=float(min_area_px),
        n_split=max(n_split, 0), phase=phase, region_fraction=region_fraction,
        particle_continuity=particle_cont, matrix_continuity=matrix_cont,
        region_separability=rc.separability, region_significance=rc.significance,
        options=options,
    )


def split_lines(labels: np.ndarray) -> np.ndarray:
    """Pixels of a particle that touch a different particle (4-neighbours)."""
    out = np.zeros(labels.shape, bool)
    a, b = labels[:, :-1], labels[:, 1:]
    d = (a != b) & (a > 0) & (b > 0)
    out[:, :-1] |= d
    out[:, 1:] |= d
    a, b = labels[:-1], labels[1:]
    d = (a != b) & (a > 0) & (b > 0)
    out[:-1] |= d
    out[1:] |= d
    return out
