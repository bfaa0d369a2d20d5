"""Schwartz–Saltykov unfolding against Wicksell's exact results and Monte Carlo truth."""

from __future__ import annotations

import numpy as np
import pytest

from sectio.stereology._unfolding import (
    foil_volume_fraction,
    saltykov_matrix,
    unfold_sections,
)


def _sections(rng, diameters, half_depth):
    """Plane sections z = 0 of spheres with centres uniform in |z| < half_depth."""
    z = rng.uniform(-half_depth, half_depth, diameters.size)
    hit = np.abs(z) < diameters / 2
    return 2 * np.sqrt((diameters[hit] / 2) ** 2 - z[hit] ** 2)


def test_monodisperse_class_recovered():
    # REFERENCES §3.5 test idea: monodisperse spheres -> >= 90 % of N_V in the true class;
    # total N_V = N_A / D (Cruz-Orive 1980: N_A = N_V·D).
    rng = np.random.default_rng(1)
    n, depth = 4000, 1.0
    d = _sections(rng, np.full(n, 1.0), depth)
    area = 1.0
    nv_true = n / (2 * depth * area)
    k = 10
    # classes of width 1/9.5: D = 1 sits at the middle of the top class
    u = unfold_sections(d, area_um2=area, n_classes=k, max_diameter_um=k / (k - 0.5))
    assert u.spheres_per_um3[-1] / u.number_per_um3 >= 0.9
    assert u.number_per_um3 == pytest.approx(nv_true, rel=0.06)
    assert u.number_per_um3 == pytest.approx(d.size / area / 1.0, rel=0.06)
    assert u.mean_sphere_diameter_um == pytest.approx(1.0, rel=0.03)


def test_wicksell_mean_section_diameter():
    # Wicksell 1925: mean section diameter of monodisperse spheres = (pi/4)·D.
    d = _sections(np.random.default_rng(2), np.full(200_000, 2.0), 1.0)
    assert d.mean() == pytest.approx(np.pi / 4 * 2.0, rel=0.005)


def test_kernel_rows_sum_to_diameter():
    # Every sphere of diameter D leaves N_V·D sections per unit area (Cruz-Orive 1980):
    # the column sums of K are the mean diameters of the classes.
    k, w = 8, 0.25
    K = saltykov_matrix(k, w)
    mids = (np.arange(k) + 0.5) * w
    assert np.allclose(K.sum(axis=0), mids, rtol=2e-3)
    assert np.allclose(np.tril(K, -1), 0)
    Kf = saltykov_matrix(k, w, foil_thickness_um=0.3)
    assert np.allclose(Kf - K, 0.3 * np.eye(k))


def test_nnls_equals_back_substitution_for_exact_data():
    k, w = 10, 0.1
    K = saltykov_matrix(k, w)
    nv = np.array([0, 0, 1, 3, 6, 8, 6, 3, 1, 0.5])
    na = K @ nv
    # make sections with these class counts: one section per unit count, at class mids
    mids = (np.arange(k) + 0.5) * w
    d = np.repeat(mids, np.round(na * 1e4).astype(int))
    u = unfold_sections(d, area_um2=1e4, n_classes=k, max_diameter_um=1.0)
    assert np.allclose(u.spheres_per_um3, nv, atol=2e-3)
    assert np.allclose(u.raw_spheres_per_um3, nv, atol=2e-3)
    assert u.negative_share < 1e-3


def test_lognormal_population_mean_diameter_and_number():
    rng = np.random.default_rng(3)
    D = 0.4 * np.exp(0.25 * rng.standard_normal(400_000))
    d = _sections(rng, D, 1.0)
    nv_true = D.size / 2.0
    u = unfold_sections(d, area_um2=1.0, n_classes=12)
    assert u.mean_sphere_diameter_um == pytest.approx(D.mean(), rel=0.03)
    assert u.number_per_um3 == pytest.approx(nv_true, rel=0.03)
    # the size floor leaves the small classes out of the fit but keeps the rest
    floor = 0.1
    uf = unfold_sections(d[d >= floor], area_um2=1.0, n_classes=12, min_diameter_um=floor)
    assert np.all(uf.spheres_per_um3[: uf.first_fitted_class] == 0)
    assert uf.mean_sphere_diameter_um == pytest.approx(D.mean(), rel=0.04)


def test_negative_classes_are_reported_and_removed():
    # A few sections only: back-substitution turns negative; NNLS keeps N_V >= 0.
    rng = np.random.default_rng(4)
    d = _sections(rng, 0.4 * np.exp(0.3 * rng.standard_normal(300)), 0.5)
    u = unfold_sections(d, area_um2=1.0, n_classes=15)
    assert np.any(u.raw_spheres_per_um3 < 0)
    assert u.negative_share > 0
    assert np.all(u.spheres_per_um3 >= 0)


def test_foil_correction_monodisperse():
    # Thin foil of thickness t, spheres of diameter D: N_A = N_V (t + D) and
    # V_V = A_A · 2D / (3t + 2D) (projected images; Underwood 1970, from memory; derived).
    rng = np.random.default_rng(5)
    D, t, nv = 0.1, 0.2, 2000.0
    lo, hi = -D / 2, t + D / 2
    n = rng.poisson(nv * (hi - lo))
    z = rng.uniform(lo, hi, n)
    dz = np.where(z < 0, -z, np.where(z > t, z - t, 0.0))
    proj = 2 * np.sqrt(np.clip(D**2 / 4 - dz**2, 0, None))
    proj = proj[proj > 0]
    assert proj.size / (nv * (t + D)) == pytest.approx(1.0, rel=0.05)
    k = 8
    u = unfold_sections(proj, area_um2=1.0, n_classes=k, max_diameter_um=D * k / (k - 0.5),
                        foil_thickness_um=t)
    assert u.number_per_um3 == pytest.approx(nv, rel=0.08)
    assert u.mean_sphere_diameter_um == pytest.approx(D, rel=0.05)
    # projected area fraction of these (non-overlapping in projection) discs per unit area
    a_a = np.sum(np.pi / 4 * proj**2)
    v_v = foil_volume_fraction(a_a, foil_thickness_um=t, mean_d2_um2=D**2, mean_d3_um3=D**3)
    assert v_v == pytest.approx(nv * np.pi / 6 * D**3, rel=0.06)


def test_unfolded_mean_sphere_diameter_from_image(hard_section):
    # Target: unfolded mean sphere diameter within 10 % of the 3-D population's mean
    # when >= 300 particles are measured (synthetic truth, sectio.synth.particles).
    sec, field = hard_section
    assert field.particles_counted >= 300
    truth = sec.population.mean_diameter_um
    assert field.unfolding.mean_sphere_diameter_um == pytest.approx(truth, rel=0.10)
