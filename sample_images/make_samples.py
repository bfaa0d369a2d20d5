"""Regenerate the demo micrographs in sample_images/ (run: make samples).

Invented scenario for the demo only: Harrow Forge Ltd trials two materials.

* Low-carbon steel coupon "LC-1", annealed 1 h at 650, 700 and 750 °C, nital etch,
  light microscope, 0.5 µm pixels; three fields per temperature
  (``steel_T650_f1.tif`` ...). Grain size grows with temperature.
* Age-hardening aluminium alloy "AH-2", aged at 175 °C for 4, 16 and 64 h, SEM
  back-scatter, 10 nm pixels, two fields per time (``alloy_t016h_f1.tif`` ...); each SEM
  image carries a 48-pixel info strip with a 1 µm scale bar. Particles coarsen with
  r³ − r0³ = K·t (Lifshitz–Slyozov–Wagner), r0 = 30 nm, K = 11 000 nm³/h.

Every image is written as a calibrated, deflate-compressed TIFF and is made by
``sectio.synth`` with a fixed seed, so this script reproduces the folder byte for byte.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import tifffile

from sectio.synth.grains import synthetic_grains
from sectio.synth.particles import add_info_strip, section_image, sphere_population

HERE = Path(__file__).resolve().parent
SIZE = 512


def write_tiff(path: Path, image: np.ndarray, pixel_size_um: float, description: str) -> None:
    px_per_cm = 1e4 / pixel_size_um
    tifffile.imwrite(path, image, resolution=(px_per_cm, px_per_cm), resolutionunit="CENTIMETER",
                     description=description, compression="zlib", metadata=None)


def steel(seed: int = 7) -> None:
    rng = np.random.default_rng(seed)
    # Annealing temperature (°C) -> target mean lineal intercept (µm) at 0.5 µm pixels.
    for temp_c, intercept_um in ((650, 8.0), (700, 12.0), (750, 19.0)):
        l_px = intercept_um / 0.5
        n = int(round(SIZE * SIZE * (0.785 / l_px) ** 2))  # 2-D Poisson–Voronoi: l = 0.785/√λ
        for f in (1, 2, 3):
            img, _ = synthetic_grains((SIZE, SIZE), n, rng=rng, kind="hardcore",
                                      boundary_width_px=float(rng.uniform(1.6, 2.4)))
            write_tiff(HERE / f"steel_T{temp_c}_f{f}.tif", img, 0.5,
                       f"Harrow Forge LC-1 annealed {temp_c} C field {f} (synthetic)")


def alloy(seed: int = 11) -> None:
    rng = np.random.default_rng(seed)
    px_um = 0.01
    r0_nm, k_nm3_h = 30.0, 11_000.0
    for hours in (4, 16, 64):
        r_nm = (r0_nm**3 + k_nm3_h * hours) ** (1 / 3)
        for f in (1, 2):
            pop = sphere_population(size_um=(SIZE * px_um, SIZE * px_um), volume_fraction=0.05,
                                    median_radius_um=r_nm / 1000, sigma_ln=0.2, rng=rng)
            sec = section_image(pop, pixel_size_um=px_um, rng=rng)
            img = add_info_strip(sec.image, pixel_size_um=px_um, bar_um=1.0, rng=rng)
            write_tiff(HERE / f"alloy_t{hours:03d}h_f{f}.tif", img, px_um,
                       f"Harrow Forge AH-2 aged 175 C {hours} h field {f} (synthetic)")


if __name__ == "__main__":
    steel()
    alloy()
    total = sum(p.stat().st_size for p in HERE.glob("*.tif"))
    print(f"wrote {len(list(HERE.glob('*.tif')))} images, {total / 1e6:.2f} MB")
