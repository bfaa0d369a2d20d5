"""The synthetic sphere sections themselves, against exact probability results."""

from __future__ import annotations

import math

import numpy as np

from sectio.synth.particles import (
    projected_diameters,
    section_image,
    sphere_population,
)


def test_boolean_model_volume_fraction():
    # Boolean model: V_V = 1 - exp(-N_V * mean volume)  (Matheron 1975; Chiu, Stoyan,
    # Kendall & Mecke 2013, from memory; REFERENCES §3.4). The section of a Boolean model
    # of spheres is a Boolean model of discs with the same A_A = V_V.
    pop = sphere_population(size_um=(20.0, 20.0), volume_fraction=0.3, median_radius_um=0.4,
                            sigma_ln=0.2, overlap=True, rng=5)
    nv_v = pop.number_per_um3 * np.mean(4 / 3 * np.pi * pop.radii_um**3)
    assert math.isclose(1 - math.exp(-nv_v), 0.3, abs_tol=0.02)
    sec = section_image(pop, pixel_size_um=0.04, noise=0.0, rng=1)
    # sampling error of A_A over a 20 µm field with ~350 discs: about ±0.02
    assert abs(sec.area_fraction - (1 - math.exp(-nv_v))) < 0.04


def test_wicksell_mean_section_diameter_monodisperse():
    # Monodisperse spheres: mean section diameter = (pi/4) D and N_A = N_V D
    # (Wicksell 1925, Biometrika 17:84; Cruz-Orive 1980; REFERENCES §3.3).
    pop = sphere_population(size_um=(60.0, 60.0), volume_fraction=0.1, median_radius_um=0.5,
                            sigma_ln=0.0, overlap=True, rng=3)
    sec = section_image(pop, pixel_size_um=0.05, noise=0.0, rng=1)
    inside = sec.discs_in_field()
    d = sec.disc_diameters_um()[inside]
    assert d.size > 600  # N_A = N_V D = 0.2 per µm² over 3600 µm²
    assert abs(d.mean() / (np.pi / 4 * 1.0) - 1) < 0.025  # SE of the mean ≈ 0.9 %
    n_a = d.size / (60.0 * 60.0)
    assert abs(n_a / (pop.number_per_um3 * 1.0) - 1) < 0.08  # Poisson SE ≈ 2.5 %


def test_exact_mask_matches_discs():
    pop = sphere_population(size_um=(10.0, 10.0), volume_fraction=0.1, median_radius_um=0.4,
                            overlap=False, rng=2)
    sec = section_image(pop, pixel_size_um=0.02, rng=2)
    drawn = np.sum(np.pi * sec.disc_radii_px[sec.discs_in_field()] ** 2)
    # discs cut by the field edge add and lose area about equally: within 10 %
    assert abs(sec.mask.sum() / drawn - 1) < 0.1
    assert sec.image.dtype == np.uint8


def test_hard_spheres_do_not_overlap():
    from scipy.spatial import cKDTree

    pop = sphere_population(size_um=(8.0, 8.0), volume_fraction=0.15, median_radius_um=0.3,
                            overlap=False, touching=0.5, rng=4)
    tree = cKDTree(pop.centres_um)
    for i, j in tree.query_pairs(2 * pop.radii_um.max()):
        gap = np.linalg.norm(pop.centres_um[i] - pop.centres_um[j])
        assert gap >= pop.radii_um[i] + pop.radii_um[j] - 1e-9


def test_projected_diameters_of_zero_thickness_are_the_sections():
    # A foil of zero thickness is a plane: its "projections" are the Wicksell sections.
    pop = sphere_population(size_um=(10.0, 10.0), volume_fraction=0.1, median_radius_um=0.25,
                            overlap=True, rng=9)
    d = np.sort(projected_diameters(pop, foil_thickness_um=0.0))
    z, r = pop.centres_um[:, 2], pop.radii_um
    hit = np.abs(z) < r
    assert np.allclose(d, np.sort(2 * np.sqrt(r[hit] ** 2 - z[hit] ** 2)))
    thick = projected_diameters(pop, foil_thickness_um=0.1)
    assert thick.size > d.size  # a thicker foil holds more spheres
