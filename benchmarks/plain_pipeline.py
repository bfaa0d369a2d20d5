"""The plain scikit-image way of doing the same jobs, for the speed ratios of bench_speed.py.

What a careful user would write with scikit-image alone, producing the same kinds of
output as ``sectio grains`` / ``sectio particles --figures overlays``: a label map, the
per-object table (CSV), the summary numbers (JSON) and an overlay PNG.

* grains: Gaussian smoothing, Otsu threshold of the dark boundaries, skeleton, labels of
  the grains between skeleton lines, regionprops (area, centroid), boundary crossings on
  every 4th row and column, the overlay by ``mark_boundaries``;
* particles: Gaussian smoothing, Otsu threshold, holes filled, small objects removed,
  touching particles split by the distance-transform watershed from ``peak_local_max``
  seeds, regionprops (area, equivalent diameter, Feret diameter, centroid), the overlay.

    python benchmarks/plain_pipeline.py grains|particles IMAGE OUT_DIR
"""

from __future__ import annotations

import csv
import json
import sys
from pathlib import Path

import numpy as np


def _read(path):
    from skimage import io

    img = io.imread(path).astype(float)
    return (img - img.min()) / max(np.ptp(img), 1e-12)


def _save(out: Path, img, labels, table: dict, summary: dict) -> None:
    from skimage import io
    from skimage.segmentation import mark_boundaries

    out.mkdir(parents=True, exist_ok=True)
    rgb = (mark_boundaries(img, labels) * 255).astype(np.uint8)
    io.imsave(out / "overlay.png", rgb, check_contrast=False)
    keys = list(table)
    with open(out / "table.csv", "w", newline="") as f:
        w = csv.writer(f)
        w.writerow(keys)
        w.writerows(zip(*(table[k] for k in keys), strict=True))
    (out / "summary.json").write_text(json.dumps(summary))


def grains(path, out: Path, save: bool = True) -> dict:
    from skimage import filters, measure, morphology

    img = _read(path)
    sm = filters.gaussian(img, 1.0)
    boundaries = sm < filters.threshold_otsu(sm)
    skel = morphology.skeletonize(boundaries)
    labels = measure.label(~skel, connectivity=1)
    props = measure.regionprops_table(labels, properties=("label", "area", "centroid"))
    rows, cols = labels[::4], labels[:, ::4]
    crossings = np.count_nonzero(rows[:, 1:] != rows[:, :-1]) + np.count_nonzero(
        cols[1:] != cols[:-1])
    length = rows.shape[0] * (rows.shape[1] - 1) + (cols.shape[0] - 1) * cols.shape[1]
    summary = {"grains": int(labels.max()), "mean_intercept_px": length / max(crossings, 1)}
    if save:
        _save(out, img, labels, props, summary)
    return summary


def particles(path, out: Path, save: bool = True) -> dict:
    from scipy import ndimage as ndi
    from skimage import feature, filters, measure, morphology, segmentation

    img = _read(path)
    sm = filters.gaussian(img, 1.0)
    mask = ndi.binary_fill_holes(sm > filters.threshold_otsu(sm))
    mask = morphology.remove_small_objects(mask, max_size=6)
    dist = ndi.distance_transform_edt(mask)
    comp = measure.label(mask)
    peaks = feature.peak_local_max(dist, min_distance=3, labels=comp, exclude_border=False)
    markers = np.zeros(mask.shape, np.int32)
    markers[tuple(peaks.T)] = np.arange(1, len(peaks) + 1)
    labels = segmentation.watershed(-dist, markers, mask=mask)
    props = measure.regionprops_table(labels, properties=(
        "label", "area", "equivalent_diameter_area", "feret_diameter_max", "centroid"))
    summary = {"particles": int(labels.max()), "area_fraction": float(mask.mean())}
    if save:
        _save(out, img, labels, props, summary)
    return summary


if __name__ == "__main__":
    kind, image, out_dir = sys.argv[1:4]
    print(json.dumps({"grains": grains, "particles": particles}[kind](image, Path(out_dir))))
