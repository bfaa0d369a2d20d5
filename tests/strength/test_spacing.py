"""Planar particle spacings (REFERENCES §5.1, r = 5 nm, f = 0.01)."""

import math

import numpy as np
import pytest

from sectio.strength import (
    centre_spacing_planar_nm,
    centre_spacing_spheres_nm,
    edge_spacing_planar_nm,
    edge_spacing_spheres_mean_nm,
    edge_spacing_spheres_rms_nm,
    fullman_mean_free_path_nm,
    sections_per_area_from_spheres,
    triangular_centre_spacing_nm,
)

R, F = 5.0, 0.01


def test_reference_table_5_1():
    # REFERENCES §5.1 (derived; Ardell 1985, Nie & Muddle, Wicksell, Fullman 1953).
    n_a = sections_per_area_from_spheres(R, F)
    assert n_a == pytest.approx(1.910e-4, rel=1e-3)
    assert centre_spacing_spheres_nm(R, F) == pytest.approx(72.36, abs=0.01)
    assert centre_spacing_spheres_nm(R, F) == pytest.approx(1.4472 * R / math.sqrt(F), rel=1e-4)
    assert triangular_centre_spacing_nm(n_a) == pytest.approx(77.76, abs=0.01)
    assert triangular_centre_spacing_nm(n_a) == pytest.approx(0.7776 * 2 * R / math.sqrt(F),
                                                              rel=1e-4)
    assert edge_spacing_spheres_mean_nm(R, F) == pytest.approx(64.51, abs=0.01)
    assert edge_spacing_spheres_rms_nm(R, F) == pytest.approx(64.20, abs=0.01)
    assert fullman_mean_free_path_nm(R, F) == pytest.approx(660.0, abs=0.5)


def test_planar_and_sphere_routes_agree():
    # N_A from spheres fed to the planar formula gives the same square-lattice spacing.
    n_a = sections_per_area_from_spheres(R, F)
    assert centre_spacing_planar_nm(n_a) == pytest.approx(centre_spacing_spheres_nm(R, F))
    # Edge-to-edge with the mean planar diameter (π/4)·2r equals the sphere "mean" form.
    assert edge_spacing_planar_nm(n_a, math.pi / 4 * 2 * R) == pytest.approx(
        edge_spacing_spheres_mean_nm(R, F))


def test_vectorised():
    out = centre_spacing_spheres_nm(np.array([5.0, 10.0]), 0.01)
    assert out == pytest.approx([72.36, 144.72], abs=0.02)  # scales with r at fixed f
