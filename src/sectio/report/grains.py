"""Pictures and files for grain-size results: overlay PNG, grains.json, grains.csv."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ._io import atomic_write_bytes

# Colours (RGB) of our overlays: boundaries amber, test lines sky blue, crossings magenta.
BOUNDARY_RGB = (255, 170, 0)
LINE_RGB = (90, 180, 255)
CROSSING_RGB = (255, 0, 200)
TWIN_RGB = (0, 200, 120)  # twin boundaries: green


def boundary_pixels(labels: np.ndarray) -> np.ndarray:
    """Pixels where the label changes to the right or below (a 1-pixel boundary trace)."""
    b = np.zeros(labels.shape, bool)
    b[:, :-1] |= labels[:, :-1] != labels[:, 1:]
    b[:-1, :] |= labels[:-1, :] != labels[1:, :]
    return b


def _line_pixels(shape, angle: float, spacing: int, max_lines: int):
    """Pixel coordinates of a subset of the systematic test lines of one direction."""
    h, w = shape
    a = int(round(angle)) % 180
    lines = []
    if a == 0:
        idx = np.arange(0, h, spacing)
        for r in idx[:: max(1, len(idx) // max_lines)]:
            lines.append((np.full(w, r), np.arange(w)))
    elif a == 90:
        idx = np.arange(0, w, spacing)
        for c in idx[:: max(1, len(idx) // max_lines)]:
            lines.append((np.arange(h), np.full(h, c)))
    else:
        # Diagonals with i - j = d (135° in image terms runs down-right) or anti-diagonals.
        ds = np.arange(-(w - 1), h, spacing)
        ds = ds[(ds % spacing) == 0]
        for d in ds[:: max(1, len(ds) // max_lines)]:
            i = np.arange(max(0, d), min(h, w + d))
            j = i - d
            if a == 45:
                j = w - 1 - j
            if i.size > 1:
                lines.append((i, j))
    return lines


def grain_overlay(field, *, max_lines_per_direction: int = 12) -> np.ndarray:
    """RGB uint8 overlay: micrograph in grey, boundaries, a subset of test lines, crossings."""
    from ..stereology import circle_centres

    img = field.micrograph.image
    labels = field.labels
    grey = (np.clip(img, 0, 1) * 255).astype(np.uint8)
    rgb = np.repeat(grey[..., None], 3, axis=2).astype(np.float32)
    # Test lines: translucent.
    lines_mask = np.zeros(labels.shape, bool)
    cross = np.zeros(labels.shape, bool)
    opts = field.options
    for ang in opts.angles_deg:
        for ii, jj in _line_pixels(
            labels.shape, ang, opts.line_spacing_px, max_lines_per_direction
        ):
            lines_mask[ii, jj] = True
            v = labels[ii, jj]
            ch = np.nonzero(v[1:] != v[:-1])[0]
            cross[ii[ch], jj[ch]] = True
    radius = opts.circle_radius_fraction * min(labels.shape) / 2.0
    t = np.linspace(0, 2 * np.pi, max(16, int(2 * np.pi * radius / 0.5)), endpoint=False)
    for cy, cx in circle_centres(labels.shape, radius):
        yy = np.clip(np.round(cy + radius * np.sin(t)).astype(int), 0, labels.shape[0] - 1)
        xx = np.clip(np.round(cx + radius * np.cos(t)).astype(int), 0, labels.shape[1] - 1)
        lines_mask[yy, xx] = True
        v = labels[yy, xx]
        ch = np.nonzero(v != np.roll(v, 1))[0]
        cross[yy[ch], xx[ch]] = True
    rgb[lines_mask] = 0.45 * rgb[lines_mask] + 0.55 * np.array(LINE_RGB, np.float32)
    regions = getattr(field, "region_labels", None)
    pairs = np.asarray(getattr(field.segmentation, "twin_pairs", ()), np.int64).reshape(-1, 2)
    if regions is not None and len(pairs):
        from ..segment.twins import twin_boundary_mask

        rgb[twin_boundary_mask(regions, pairs)] = TWIN_RGB
    b = boundary_pixels(labels)
    if regions is not None and len(pairs) and field.options.twins == "include":
        b &= ~twin_boundary_mask(regions, pairs)
    rgb[b] = BOUNDARY_RGB
    from scipy import ndimage as ndi

    dots = ndi.binary_dilation(cross, structure=np.ones((3, 3)), iterations=1)
    rgb[dots] = CROSSING_RGB
    return rgb.astype(np.uint8)


def overlay_png_bytes(field) -> bytes:
    """Overlay with micron marker and caption strip (numbers and colour key) as PNG bytes."""
    from ._overlay import overlay_png

    rgb = field.overlay()
    d = field.to_dict()
    caption = [
        f"{Path(d['image']).name}   pixel {d['pixel_size_um']:.4g} µm ({d['pixel_size_source']})",
        f"mean lineal intercept {d['mean_intercept_um']:.3g} µm ({d['intercept_count']} crossings)",
        f"G(intercept) {d['astm_g_intercept']:.1f}   G(planimetric) "
        f"{d['astm_g_planimetric']:.1f}   {d['grain_count']} grains",
        f"G uses the {d['astm_g_uses']}; with twins {d['mean_intercept_with_twins_um']:.3g} um, "
        f"twin boundaries {100 * d['twin_boundary_fraction']:.0f} % of boundary length",
        ("DUPLEX: " + "; ".join(f"{100 * m['area_fraction']:.0f} % at G "
                                f"{m['astm_g_planimetric']:.1f}" for m in d["duplex_test"]["modes"])
         + f"   largest grain ALA G {d['astm_g_largest_grain_ala']:.1f}") if d["duplex"] else
        f"one grain size (not duplex)   largest grain ALA G {d['astm_g_largest_grain_ala']:.1f}",
        "amber: boundaries  green: twin boundaries  blue: test lines (subset)  magenta: crossings",
    ]
    return overlay_png(rgb, d["pixel_size_um"], caption)


def write_overlay(field, path) -> Path:
    """Write :func:`overlay_png_bytes` of a grain field to ``path`` atomically."""
    return atomic_write_bytes(path, overlay_png_bytes(field))
