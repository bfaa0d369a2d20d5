"""Speed and memory of the particle pipeline: seconds per megapixel at 1, 4 and 16 MP.

Synthetic sections (Boolean model of spheres, V_V = 0.12, median sphere diameter 8.5 px)
give about 2000 particle sections per megapixel. For each size the script times
``measure_particles`` (segmentation + all measurements + unfolding) and then repeats it
under tracemalloc for the peak of Python/numpy allocations; the process's peak resident
size (resource.getrusage) is printed at the end.

    python benchmarks/bench_particles.py [--sizes 1 4 16] [--repeat 1]
"""

from __future__ import annotations

import argparse
import resource
import time
import tracemalloc

from sectio.micrograph import from_array
from sectio.particles import measure_particles, summarize_particles
from sectio.synth.particles import section_image, sphere_population

PX_UM = 0.02


def make(mp: int, seed: int):
    side = int(round((mp * 1024 * 1024) ** 0.5))
    pop = sphere_population(size_um=(side * PX_UM, side * PX_UM), volume_fraction=0.12,
                            median_radius_um=0.085, sigma_ln=0.25, overlap=True, rng=seed)
    sec = section_image(pop, pixel_size_um=PX_UM, rng=seed)
    return from_array(sec.image, pixel_size_um=PX_UM), sec


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--sizes", type=int, nargs="+", default=[1, 4, 16])
    ap.add_argument("--repeat", type=int, default=1)
    args = ap.parse_args()
    print(f"{'MP':>4} {'pixels':>12} {'particles':>9} {'per MP':>7} {'s':>7} {'s/MP':>6} "
          f"{'peak MB':>8}  A_A meas / exact")
    for mp in args.sizes:
        mg, sec = make(mp, seed=mp)
        best = float("inf")
        for _ in range(args.repeat):
            t0 = time.perf_counter()
            field = measure_particles(mg)
            best = min(best, time.perf_counter() - t0)
        tracemalloc.start()
        measure_particles(mg)
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        npx = mg.image.size
        print(f"{mp:4d} {npx:12d} {field.particle_count:9d} "
              f"{field.particle_count / (npx / 2**20):7.0f} {best:7.2f} "
              f"{best / (npx / 2**20):6.2f} {peak / 2**20:8.0f}  "
              f"{field.area_fraction:.4f} / {sec.area_fraction:.4f}")
    t0 = time.perf_counter()
    summarize_particles([field])
    print(f"summary with bootstrap of the unfolding (200 resamples): "
          f"{time.perf_counter() - t0:.2f} s")
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"peak resident set size of the whole run: {rss:.0f} MB")


if __name__ == "__main__":
    main()
