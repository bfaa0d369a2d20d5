"""Speed of ``measure_particles`` on the shared real SEM images (512 x 512), beside the
plain scikit-image way (Gaussian denoise, Otsu threshold, label, regionprops) in the same
run, and the area-fraction error of both against the hand-painted masks.

Source of the images: benchmark segmentation data of nasa/pretrained-microscopy-models
(MIT licence; ../shared/real/superalloy-sem/). Run on an idle machine:

    python benchmarks/bench_particles_real.py [--repeat 3]
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np

REAL = Path("/work/shared/real/superalloy-sem")


def plain_skimage(img):
    from skimage.filters import gaussian, threshold_otsu
    from skimage.measure import label, regionprops_table

    g = gaussian(img, 1.0)
    mask = g < threshold_otsu(g)  # γ′ darker than γ in these images
    regionprops_table(label(mask), properties=("area", "equivalent_diameter_area",
                                               "feret_diameter_max", "centroid"))
    return mask


def main() -> None:
    from PIL import Image

    from sectio.micrograph import from_array
    from sectio.particles import measure_particles

    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    print(f"{'image':<24} {'sectio s':>8} {'otsu s':>7} {'ratio':>6} {'sectio err':>10} "
          f"{'otsu err':>8}  (points of area fraction vs painted)")
    for p in sorted(REAL.glob("*.png")):
        if p.stem.endswith("_mask"):
            continue
        img = np.asarray(Image.open(p).convert("L"))
        truth = float(np.mean(np.asarray(Image.open(p.with_name(p.stem + "_mask.png"))) > 0))
        mg = from_array(img, pixel_size_um=0.01)
        measure_particles(mg, phase="auto")  # warm-up (imports)
        t_s = t_o = float("inf")
        for _ in range(args.repeat):
            t0 = time.perf_counter()
            f = measure_particles(mg, phase="auto")
            t1 = time.perf_counter()
            m = plain_skimage(img.astype(float) / 255)
            t2 = time.perf_counter()
            t_s, t_o = min(t_s, t1 - t0), min(t_o, t2 - t1)
        print(f"{p.stem[:24]:<24} {t_s:8.3f} {t_o:7.3f} {t_s / t_o:6.1f} "
              f"{100 * (f.area_fraction - truth):+10.1f} {100 * (m.mean() - truth):+8.1f}")


if __name__ == "__main__":
    main()
