"""Schwartz–Saltykov unfolding against the analytic section-size distribution of spheres.

Wicksell (1925, *Biometrika* 17:84): a sphere of diameter D cut by a uniform random plane
leaves a disc of diameter d with CDF F(d) = 1 − √(1 − (d/D)²); N_V spheres per unit
volume leave N_V·D sections per unit area (Cruz-Orive 1980, *J. Microsc.* 120:15).
Sections are placed at the quantiles of that law (a noise-free sample), so the unfolding
is checked for its bias alone. Target of issue 9: N_V and the mean sphere diameter within
5 % for a narrow (equal-sphere) population with the default classes.
"""

from __future__ import annotations

import numpy as np
import pytest

from sectio.stereology import unfold_sections


def _sections(diameters, nv, *, per_sphere=4000):
    """Section diameters and weights (per unit area) of spheres ``diameters`` at ``nv``."""
    u = (np.arange(per_sphere) + 0.5) / per_sphere
    d, w = [], []
    for D, n in zip(np.atleast_1d(diameters), np.atleast_1d(nv), strict=True):
        d.append(D * np.sqrt(1.0 - (1.0 - u) ** 2))  # inverse of Wicksell's CDF
        w.append(np.full(per_sphere, n * D / per_sphere))
    return np.concatenate(d), np.concatenate(w)


@pytest.mark.parametrize("n_classes", [8, 10, 12, 15])
def test_equal_spheres_recovered(n_classes):
    d, w = _sections([2.0], [50.0])
    u = unfold_sections(d, area_um2=1.0, weights=w, n_classes=n_classes)
    assert u.number_per_um3 == pytest.approx(50.0, rel=0.05)
    assert u.mean_sphere_diameter_um == pytest.approx(2.0, rel=0.05)
    # REFERENCES §3.5: >= 90 % of N_V in the true class
    assert u.spheres_per_um3[-1] / u.number_per_um3 >= 0.9


@pytest.mark.parametrize("sigma_ln", [0.1, 0.25, 0.4])
def test_lognormal_population_recovered(sigma_ln):
    # log-normal diameters (median 1 µm) on a fine grid to ±3.5 s.d.
    x = np.linspace(-3.5, 3.5, 141)
    D = np.exp(sigma_ln * x)
    nv = np.exp(-0.5 * x**2)
    nv *= 100.0 / nv.sum()
    d, w = _sections(D, nv, per_sphere=600)
    u = unfold_sections(d, area_um2=1.0, weights=w, n_classes=10)
    assert u.number_per_um3 == pytest.approx(100.0, rel=0.05)
    assert u.mean_sphere_diameter_um == pytest.approx(np.sum(nv * D) / 100.0, rel=0.03)


def test_equal_spheres_through_the_image_pipeline():
    # narrow population rendered and measured (exact truth from sectio.synth.particles):
    # pixel noise of the section diameters and the size floor on top of the unfolding
    from sectio.micrograph import from_array
    from sectio.particles import measure_particles
    from sectio.synth.particles import section_image, sphere_population

    px = 0.02
    pop = sphere_population(size_um=(1024 * px, 1024 * px), volume_fraction=0.08,
                            median_radius_um=0.25, sigma_ln=0.01, overlap=False,
                            touching=0.0, rng=5)
    sec = section_image(pop, pixel_size_um=px, rng=6)
    f = measure_particles(from_array(sec.image, pixel_size_um=px))
    u = f.unfolding
    assert u.mean_sphere_diameter_um == pytest.approx(pop.mean_diameter_um, rel=0.05)
    assert u.number_per_um3 == pytest.approx(pop.number_per_um3, rel=0.10)
