"""Small synthetic studies for the study tests (256-px fields, made once per session).

Grain fields: hard-core Voronoi structures from sectio.synth at 0.5 µm pixels, the mean
intercept set by the number of grains (2-D Poisson–Voronoi: ℓ̄ = 0.785/√λ, the relation
make_samples.py uses). Particle fields: sections of log-normal sphere populations at
10 nm pixels whose radii follow the LSW law r³ = r0³ + K·t with known K.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from sectio.synth._render import write_calibrated_tiff
from sectio.synth.grains import synthetic_grains
from sectio.synth.particles import section_image, sphere_population

SIZE = 256
R0_NM, K_NM3_H = 30.0, 11_000.0


def _grain_image(path: Path, intercept_um: float, seed: int) -> None:
    l_px = intercept_um / 0.5
    n = int(round(SIZE * SIZE * (0.785 / l_px) ** 2))
    img, _ = synthetic_grains((SIZE, SIZE), n, rng=seed, kind="hardcore")
    write_calibrated_tiff(path, img, 0.5, description="synthetic grains")


def _particle_image(path: Path, hours: float, seed: int) -> None:
    r_nm = (R0_NM**3 + K_NM3_H * hours) ** (1 / 3)
    pop = sphere_population(size_um=(SIZE * 0.01, SIZE * 0.01), volume_fraction=0.06,
                            median_radius_um=r_nm / 1000, sigma_ln=0.2, rng=seed)
    sec = section_image(pop, pixel_size_um=0.01, rng=seed + 1)
    write_calibrated_tiff(path, sec.image, 0.01, description="synthetic particles")


STUDY_TOML = """\
[study]
title = "Test study"
seed = 0
draws = 2000
bootstrap = 50

[specimens.S-600]
images = ["g600_*.tif"]
material = "steel-ferritic-lowc"
series = "anneal"
trial = { name = "annealing temperature", value = 600, unit = "°C" }

[specimens.S-700]
images = ["g700_*.tif"]
material = "steel-ferritic-lowc"
series = "anneal"
trial = { name = "annealing temperature", value = 700, unit = "°C" }

[specimens.P-4h]
images = ["p004_*.tif"]
measure = ["particles"]
material = "al-age-hardening"
series = "ageing"
trial = { name = "ageing time", value = 4, unit = "h" }
"""


@pytest.fixture(scope="session")
def image_dir(tmp_path_factory) -> Path:
    d = tmp_path_factory.mktemp("study_images")
    for i, (temp, l_um) in enumerate(((600, 6.0), (700, 9.0))):
        for f in (1, 2):
            _grain_image(d / f"g{temp}_f{f}.tif", l_um, seed=100 + 10 * i + f)
    for f in (1, 2):
        _particle_image(d / f"p004_f{f}.tif", 4.0, seed=200 + f)
    return d


@pytest.fixture()
def study_dir(image_dir, tmp_path) -> Path:
    """A fresh folder holding the images and study.toml (so a test may add or spoil files)."""
    d = tmp_path / "study"
    shutil.copytree(image_dir, d)
    (d / "study.toml").write_text(STUDY_TOML, encoding="utf-8")
    return d


def run_cli(*args, timeout=120, **kw) -> subprocess.CompletedProcess:
    """Run ``sectio`` in a fresh interpreter (as a user would)."""
    code = "import sys; from sectio.cli import main; sys.exit(main())"
    env = {**os.environ, "PYTHONWARNINGS": "ignore"}
    return subprocess.run([sys.executable, "-c", code, *map(str, args)], capture_output=True,
                          text=True, timeout=timeout, env=env, **kw)


def json_files(out: Path) -> dict[str, bytes]:
    """study.json and every per-specimen JSON (the deterministic results) by relative name."""
    files = [out / "study.json"] + sorted(out.glob("*/grains.json")) \
        + sorted(out.glob("*/particles.json")) + sorted(out.glob("*/strength.json"))
    return {p.relative_to(out).as_posix(): p.read_bytes() for p in files}

