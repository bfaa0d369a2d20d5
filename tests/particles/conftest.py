"""Shared synthetic sections for the particle tests (made once per session)."""

from __future__ import annotations

import pytest

from sectio.micrograph import from_array
from sectio.particles import measure_particles
from sectio.synth.particles import section_image, sphere_population

PX_UM = 0.02  # 20 nm pixels: a field of 1024 px is 20.48 µm


def make_section(*, overlap: bool, seed: int, size_px: int = 1024, fraction: float = 0.10,
                 median_radius_um: float = 0.2, phase: str = "bright", **render):
    pop = sphere_population(size_um=(size_px * PX_UM, size_px * PX_UM),
                            volume_fraction=fraction, median_radius_um=median_radius_um,
                            sigma_ln=0.25, overlap=overlap, touching=0.35, rng=seed)
    # noise, blur and a background gradient (defaults of section_image: 0.03, 1 px, 25 %)
    return section_image(pop, pixel_size_um=PX_UM, phase=phase, rng=seed + 1000, **render)


@pytest.fixture(scope="session")
def hard_section():
    """Non-overlapping spheres, many touching pairs in the section."""
    sec = make_section(overlap=False, seed=11)
    field = measure_particles(from_array(sec.image, pixel_size_um=PX_UM, path="hard.tif"))
    return sec, field


@pytest.fixture(scope="session")
def boolean_section():
    """Boolean model of spheres (overlapping)."""
    sec = make_section(overlap=True, seed=12)
    field = measure_particles(from_array(sec.image, pixel_size_um=PX_UM, path="bool.tif"))
    return sec, field
