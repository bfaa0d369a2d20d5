"""Area (= volume) fractions of several grey-level phases, with an E562 point count beside.

By the Delesse principle the area fraction of a phase on a random plane section is an
unbiased estimate of its volume fraction (A_A = V_V). Steps for one field:

1. **Regions** — the field is cut into edge-bounded regions, the watershed of the
   gradient magnitude (:func:`sectio.segment._regions.edge_regions`); region borders sit
   on the gradient crests, i.e. at the half-height of every blurred step, so a blurred
   step between the darkest and the brightest phase does not leave a thin band of the
   middle grey level behind (which a per-pixel threshold does).
2. **Levels** — the region means, weighted by region area, are split into N classes by
   the multi-level Otsu criterion (Otsu 1979; Liao, Chen & Chung 2001), computed by
   :func:`skimage.filters.threshold_multiotsu` on the area-weighted histogram of region
   means. ``method="pixels"`` applies the same routine to the (denoised) pixels instead.
3. **Fractions** — the share of pixels of each class (area fraction), and a systematic
   point count (ASTM E562): a square grid of about ``grid_points`` points with one random
   offset; points on a phase boundary score ½ (E562 §10), read here as points whose 3 × 3
   neighbourhood holds two phases.

Phases are numbered from the darkest (1) to the brightest (N).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import ndimage as ndi

from .errors import OptionError

__all__ = ["PhaseField", "segment_phases", "measure_phases", "point_count_phases",
           "summarize_phases", "PALETTE"]

#: Overlay colours, darkest phase first (distinct under common colour-vision deficiencies:
#: the Okabe–Ito set, common practice).
PALETTE = [(0, 114, 178), (230, 159, 0), (0, 158, 115), (204, 121, 167), (240, 228, 66),
           (86, 180, 233), (213, 94, 0)]
#: Smallest gap between neighbouring phase levels, in standard errors of a region mean
#: (pixels: of a pixel) under the field's pixel noise, below which the split is not a
#: real grey-level difference (the same rule as the two-class regions of particles).
SIGNIFICANT = 6.0
#: A phase below this share is probably not there (fewer phases than asked).
NEARLY_EMPTY = 0.005


@dataclass(frozen=True)
class PhaseField:
    """Phases of one field (pixel units; ``classes`` holds 0 .. N-1, darkest first)."""

    image: str
    pixel_size_um: float
    classes: np.ndarray
    grey: np.ndarray  # the image measured, float in [0, 1]
    thresholds: list[float]
    levels: list[float]  # median grey of each phase
    area_fractions: list[float]
    point_fractions: list[float]
    point_scores: list[float]
    point_total: int
    separability: float
    significance: float
    method: str
    names: list[str]
    flags: list[str] = field(default_factory=list)

    @property
    def n_phases(self) -> int:
        return len(self.area_fractions)

    def to_dict(self) -> dict:
        phases = []
        for k in range(self.n_phases):
            p = self.point_fractions[k]
            phases.append({
                "phase": k + 1, "name": self.names[k], "grey_level": self.levels[k],
                "area_fraction": self.area_fractions[k], "point_fraction": p,
                "point_score": self.point_scores[k], "point_total": self.point_total,
                # E562: one field's points are close to binomial (from memory)
                "point_fraction_se": math.sqrt(p * (1 - p) / self.point_total)
                if self.point_total else None,
            })
        return {"image": self.image, "pixel_size_um": self.pixel_size_um,
                "method": self.method, "thresholds": self.thresholds,
                "separability": self.separability,
                "significance": self.significance, "phases": phases,
                "flags": list(self.flags), "probably_wrong": bool(self.flags)}


def _multiotsu(values: np.ndarray, weights: np.ndarray | None, n: int) -> list[float]:
    from skimage.filters import threshold_multiotsu

    v = np.asarray(values, float)
    counts, edges = np.histogram(v, bins=256, range=(float(v.min()), float(v.max()) + 1e-9),
                                 weights=weights)
    centres = 0.5 * (edges[:-1] + edges[1:])
    try:
        return [float(t) for t in threshold_multiotsu(classes=n, hist=(counts, centres))]
    except ValueError as exc:  # fewer grey levels than classes
        raise OptionError(f"--phases {n}: the image has too few distinct grey levels for "
                          f"{n} phases; ask for fewer phases.") from exc


def _separability(values, weights, thresholds) -> float:
    v = np.asarray(values, float)
    w = np.ones_like(v) if weights is None else np.asarray(weights, float)
    k = np.digitize(v, thresholds)
    mean = np.average(v, weights=w)
    total = np.sum(w * (v - mean) ** 2)
    between = sum(w[k == c].sum() * (np.average(v[k == c], weights=w[k == c]) - mean) ** 2
                  for c in np.unique(k))
    return float(between / total) if total > 0 else 0.0


def segment_phases(grey: np.ndarray, n_phases: int, *, method: str = "regions",
                   denoise_px: float = 1.0):
    """Class image (0 .. N-1, darkest first), thresholds, separability of a grey image."""
    from .segment._regions import edge_regions

    if n_phases < 2:
        raise OptionError(f"--phases {n_phases}: give 2 or more phases.")
    img = np.asarray(grey, np.float32)
    g = ndi.gaussian_filter(img, denoise_px) if denoise_px > 0 else img
    if method == "regions":
        labels = edge_regions(img)
        flat = labels.ravel()
        area = np.bincount(flat)
        mean = np.bincount(flat, g.ravel()) / np.maximum(area, 1)
        used = area > 0
        if int(used.sum()) <= n_phases:
            labels, flat, method = None, None, "pixels"  # no structure: fall back
        else:
            thr = _multiotsu(mean[used], area[used], n_phases)
            eta = _separability(mean[used], area[used], thr)
            classes = np.digitize(mean, thr)[labels].astype(np.uint8)
            se = _noise(img) / math.sqrt(max(float(np.median(area[used])), 1.0))
    if method == "pixels":
        sample = g.ravel()[:: max(1, g.size // 2**20)]
        thr = _multiotsu(sample, None, n_phases)
        eta = _separability(sample, None, thr)
        classes = np.digitize(g, thr).astype(np.uint8)
        # a Gaussian filter of s.d. σ px leaves white noise × 1/(2σ√π)
        se = _noise(img) / (2 * denoise_px * math.sqrt(math.pi)) if denoise_px > 0 \
            else _noise(img)
    elif method != "regions":
        raise OptionError(f"--method {method!r}: choose regions or pixels.")
    lv = [float(np.mean(g[classes == k])) for k in range(n_phases) if np.any(classes == k)]
    gap = float(np.min(np.diff(lv))) if len(lv) == n_phases else 0.0
    return classes, thr, eta, (gap / se if se > 0 else float("inf")), method


def _noise(img: np.ndarray) -> float:
    """Pixel noise s.d.: MAD of the residual from the 3 × 3 mean (white noise: × √(9/8))."""
    resid = img - ndi.uniform_filter(img, 3)
    return 1.4826 * float(np.median(np.abs(resid - np.median(resid)))) * 1.0607


def point_count_phases(classes: np.ndarray, n_phases: int, *, grid_points: int = 100,
                       rng=None) -> tuple[list[float], list[float], int]:
    """Systematic point count (ASTM E562) of every phase on one field.

    A square-cell grid of about ``grid_points`` points with one random offset (design-
    unbiased). A point whose 3 × 3 neighbourhood holds more than one phase is on a
    boundary and scores ½ to each of the two phases there (E562: points on a boundary
    count ½). Returns ``(point_fractions, scores, n_points)``.
    """
    h, w = classes.shape
    step = math.sqrt(h * w / float(grid_points))
    off_r, off_c = np.random.default_rng(rng).random(2) * step
    rows = np.arange(off_r, h, step).astype(int)
    cols = np.arange(off_c, w, step).astype(int)
    here = classes[np.ix_(rows, cols)].ravel()
    lo = ndi.minimum_filter(classes, 3, mode="nearest")[np.ix_(rows, cols)].ravel()
    hi = ndi.maximum_filter(classes, 3, mode="nearest")[np.ix_(rows, cols)].ravel()
    scores = np.zeros(n_phases)
    inside = lo == hi
    np.add.at(scores, here[inside], 1.0)
    edge = ~inside
    other = np.where(here[edge] == lo[edge], hi[edge], lo[edge])
    np.add.at(scores, here[edge], 0.5)
    np.add.at(scores, other, 0.5)
    n = int(here.size)
    return [float(s / n) for s in scores], [float(s) for s in scores], n


def measure_phases(micrograph, n_phases: int, *, method: str = "regions",
                   grid_points: int = 100, names=None, seed: int = 0) -> PhaseField:
    """Phases of one :class:`~sectio.micrograph.Micrograph` (see the module text)."""
    grey = np.asarray(micrograph.image, np.float32)
    names = list(names) if names else [f"phase {k + 1}" for k in range(n_phases)]
    if len(names) != n_phases:
        raise OptionError(f"--names gives {len(names)} names for {n_phases} phases; give one "
                          "name per phase, darkest first, separated by commas.")
    classes, thr, eta, sig, used = segment_phases(grey, n_phases, method=method)
    counts = np.bincount(classes.ravel(), minlength=n_phases)[:n_phases]
    area = (counts / classes.size).tolist()
    levels = [float(np.median(grey[classes == k])) if counts[k] else float("nan")
              for k in range(n_phases)]
    pf, scores, total = point_count_phases(classes, n_phases, grid_points=grid_points,
                                           rng=seed)
    flags = []
    if sig < SIGNIFICANT:
        flags.append(f"weak contrast: two neighbouring phase levels differ by only {sig:.1f} "
                     f"standard errors (< {SIGNIFICANT:g}); fewer phases than asked, or the "
                     "phases do not differ in grey level")
    for k in range(n_phases):
        if area[k] < NEARLY_EMPTY:
            flags.append(f"{names[k]} nearly empty ({100 * area[k]:.2f} %): probably fewer "
                         "phases than asked")
    return PhaseField(str(getattr(micrograph, "path", None) or "array"),
                      float(micrograph.pixel_size_um), classes, grey, thr, levels,
                      [float(a) for a in area], pf, scores, total, eta, sig, used, names,
                      flags)


def _subregion_values(f: PhaseField, k: int, n: int = 3) -> list[float]:
    h, w = f.classes.shape
    out = []
    for rows in np.array_split(np.arange(h), n):
        for cols in np.array_split(np.arange(w), n):
            block = f.classes[rows[0]:rows[-1] + 1, cols[0]:cols[-1] + 1]
            out.append(float(np.mean(block == k)))
    return out


def summarize_phases(fields: list[PhaseField]) -> dict:
    """Field-to-field mean, s and Student-t 95 % CI of each phase's area and point fraction.

    With one field the area-fraction interval comes from its 3 × 3 sub-regions and the
    point-count interval from the binomial s.e. of its points; ``basis`` says which.
    """
    import warnings

    from .errors import DegenerateDataWarning
    from .stereology._fieldstats import field_statistics, stats_to_dict

    if not fields:
        return {"n_fields": 0, "basis": "none", "phases": []}
    n_ph = fields[0].n_phases
    one = len(fields) == 1
    basis = "sub-regions of one field" if one else "fields"
    phases = []
    for k in range(n_ph):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", DegenerateDataWarning)
            a_vals = _subregion_values(fields[0], k) if one else \
                [f.area_fractions[k] for f in fields]
            entry = {"phase": k + 1, "name": fields[0].names[k]}
            a = stats_to_dict("area_fraction", field_statistics(a_vals, basis=basis))
            if one:
                a["area_fraction"] = fields[0].area_fractions[k]
            entry.update(a)
            if one:
                p, n = fields[0].point_fractions[k], fields[0].point_total
                hw = 1.96 * math.sqrt(p * (1 - p) / n) if n else float("nan")
                entry.update({"point_fraction": p, "point_fraction_ci95":
                              [max(0.0, p - hw), min(1.0, p + hw)],
                              "point_fraction_basis": "binomial, one field's points"})
            else:
                entry.update(stats_to_dict("point_fraction", field_statistics(
                    [f.point_fractions[k] for f in fields])))
                entry["point_fraction_basis"] = "fields"
        phases.append(entry)
    return {"n_fields": len(fields), "basis": basis, "phases": phases,
            "flagged_fields": [f.image for f in fields if f.flags]}


def overlay_rgb(f: PhaseField, alpha: float = 0.45) -> np.ndarray:
    """The grey image tinted with each phase's colour (darkest phase: PALETTE[0])."""
    g = np.clip(f.grey, 0, 1)
    g = (g - g.min()) / max(float(np.ptp(g)), 1e-9)
    base = np.repeat((g * 255)[..., None], 3, axis=2)
    colours = np.array([PALETTE[k % len(PALETTE)] for k in range(f.n_phases)], float)
    out = (1 - alpha) * base + alpha * colours[f.classes]
    edge = ndi.maximum_filter(f.classes, 3) != ndi.minimum_filter(f.classes, 3)
    out[edge] = 0.5 * out[edge]  # phase boundaries drawn a little darker
    return out.astype(np.uint8)


def overlay_png(f: PhaseField) -> bytes:
    """PNG of the tinted overlay, micron marker and a legend with a colour swatch per phase."""
    import io

    from PIL import Image, ImageDraw

    from .report._overlay import caption_strip, draw_micron_marker

    rgb = draw_micron_marker(overlay_rgb(f), f.pixel_size_um)
    w = rgb.shape[1]
    lines = [f"{f.image.rsplit('/', 1)[-1]}  ·  {f.pixel_size_um:.4g} µm/px  ·  "
             f"{f.n_phases} phases ({f.method}), separability {f.separability:.2f}"]
    for k in range(f.n_phases):
        lines.append(f"          {f.names[k]}: area {100 * f.area_fractions[k]:.1f} %, "
                     f"point count {100 * f.point_fractions[k]:.1f} % "
                     f"({f.point_total} points)")
    lines += [f"FLAG: {t}" for t in f.flags]
    strip = caption_strip(w, lines)
    im = Image.fromarray(np.ascontiguousarray(strip))
    d = ImageDraw.Draw(im)
    line_h = (strip.shape[0] - 8) / len(lines)
    for k in range(f.n_phases):
        y = 4 + (k + 1) * line_h
        s = max(6, int(line_h * 0.6))
        d.rectangle([8, y + 1, 8 + s, y + s], fill=PALETTE[k % len(PALETTE)])
    out = np.vstack([rgb, np.asarray(im)])
    buf = io.BytesIO()
    Image.fromarray(out).save(buf, format="PNG", compress_level=1)
    return buf.getvalue()
