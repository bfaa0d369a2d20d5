"""Speed of a 20 000-draw yield prediction (target: well under one second).

Run:  .venv/bin/python benchmarks/bench_strength.py
Prints the best and median wall time of several repeats for a Hall–Petch-only estimate and
for Hall–Petch + Orowan + forest dislocations with root-sum-square superposition (the full
path: summary parsing, materials lookup, Monte Carlo, variance shares, first-order check).
"""

from __future__ import annotations

import statistics
import time

from sectio.strength import estimate_from_summaries, load_materials

GRAINS = {"n_fields": 10, "mean_intercept_um": 12.0, "mean_intercept_ci95_um": [11.0, 13.0]}
PARTICLES = {"n_fields": 10, "area_fraction": 0.002, "area_fraction_ci95": [0.0017, 0.0023],
             "mean_ecd_um": 0.008, "mean_ecd_ci95_um": [0.007, 0.009],
             "particles_per_um2": 20.0, "particles_per_um2_ci95": [17.0, 23.0]}


def bench(label: str, repeats: int = 7, **kwargs) -> None:
    material = load_materials()["steel-ferritic-lowc"]
    times = []
    for seed in range(repeats):
        t0 = time.perf_counter()
        est = estimate_from_summaries(material=material, seed=seed, draws=20_000, **kwargs)
        times.append(time.perf_counter() - t0)
    lo, hi = est.yield_ci95_mpa
    print(f"{label:<44} best {min(times) * 1e3:7.1f} ms  median "
          f"{statistics.median(times) * 1e3:7.1f} ms  (median {est.median_mpa:.1f} MPa, "
          f"95 % {lo:.1f}-{hi:.1f})")


if __name__ == "__main__":
    t0 = time.perf_counter()
    load_materials()
    print(f"{'load shipped materials (first call)':<44} {(time.perf_counter() - t0) * 1e3:7.1f} ms")
    bench("Hall–Petch only, 20 000 draws", grains_summary=GRAINS, particles_summary=None)
    bench("HP + Orowan (line tension), 20 000 draws", grains_summary=GRAINS,
          particles_summary=PARTICLES)
    bench("HP + Orowan + dislocations (rss), 20 000", grains_summary=GRAINS,
          particles_summary=PARTICLES, superposition="rss",
          dislocation_density_per_m2=(1e14, 2e13))
