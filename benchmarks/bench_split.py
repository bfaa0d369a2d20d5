"""Touching-particle split rate on synthetic pairs and clusters with exact truth, and
over-splitting of single elongated particles.

Each test image holds one object on a matrix, rendered like ``section_image`` (blur 1 px,
noise 0.03, 8 bit): two discs in contact (radii 5-20 px, any ratio up to 3:1, any
orientation), three discs in a chain, or one ellipse (aspect 1.5-3). A pair counts as
split when the segmentation gives exactly two particles, each overlapping one disc by
more than 80 %; a single ellipse is over-split when it gives more than one particle.

    python benchmarks/bench_split.py [--n 200]
"""

from __future__ import annotations

import argparse

import numpy as np

from sectio.segment.particles import segment_particles


def render(mask, rng):
    from scipy import ndimage as ndi

    img = 0.3 + 0.45 * mask.astype(float)
    img = ndi.gaussian_filter(img, 1.0) + rng.normal(0, 0.03, mask.shape)
    return np.round(np.clip(img, 0, 1) * 255).astype(np.uint8)


def discs(centres, radii, shape):
    yy, xx = np.mgrid[: shape[0], : shape[1]]
    return [((yy - c[0]) ** 2 + (xx - c[1]) ** 2) < r**2 for c, r in zip(centres, radii,
                                                                         strict=True)]


def trial_pair(rng, n_discs=2, size=128):
    radii = [rng.uniform(5, 20)]
    centres = [np.array([size / 2, size / 2])]
    for _ in range(n_discs - 1):
        r = rng.uniform(max(5, radii[-1] / 3), min(20, radii[-1] * 3))
        a = rng.uniform(0, 2 * np.pi)
        centres.append(centres[-1] + (radii[-1] + r) * np.array([np.sin(a), np.cos(a)]))
        radii.append(r)
    shift = size / 2 - np.mean(centres, axis=0)
    centres = [c + shift for c in centres]
    ds = discs(centres, radii, (size, size))
    seg = segment_particles(render(np.any(ds, axis=0), rng), phase="bright")
    lab = seg.labels
    if lab.max() != n_discs:
        return False
    for d in ds:
        ids, counts = np.unique(lab[d], return_counts=True)
        if counts[ids > 0].max(initial=0) < 0.8 * d.sum():
            return False
    return True


def trial_ellipse(rng, size=128):
    a = rng.uniform(8, 25)
    b = a / rng.uniform(1.5, 3.0)
    t = rng.uniform(0, np.pi)
    yy, xx = np.mgrid[:size, :size] - size / 2
    u = xx * np.cos(t) + yy * np.sin(t)
    v = -xx * np.sin(t) + yy * np.cos(t)
    mask = (u / a) ** 2 + (v / b) ** 2 < 1
    seg = segment_particles(render(mask, rng), phase="bright")
    return int(seg.labels.max()) > 1


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--n", type=int, default=200)
    args = ap.parse_args()
    rng = np.random.default_rng(0)
    pairs = sum(trial_pair(rng) for _ in range(args.n))
    chains = sum(trial_pair(rng, 3) for _ in range(args.n // 2))
    over = sum(trial_ellipse(rng) for _ in range(args.n))
    print(f"touching pairs split correctly: {pairs}/{args.n} ({100 * pairs / args.n:.0f} %)")
    print(f"chains of three split correctly: {chains}/{args.n // 2} "
          f"({200 * chains / args.n:.0f} %)")
    print(f"single ellipses (aspect 1.5-3) over-split: {over}/{args.n} "
          f"({100 * over / args.n:.0f} %)")


if __name__ == "__main__":
    main()
