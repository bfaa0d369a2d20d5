"""Orowan forms against the worked numbers of REFERENCES §5.2 (±0.5 %)."""

import math

import numpy as np
import pytest

from sectio.strength import (
    edge_spacing_spheres_rms_nm,
    orowan_ashby_gladman_mpa,
    orowan_ashby_mpa,
    orowan_classic_mpa,
    orowan_line_tension_mpa,
    taylor_dislocation_mpa,
)

AL = dict(taylor_factor=3.06, shear_modulus_gpa=26.1, burgers_nm=0.286)
FE = dict(taylor_factor=2.75, shear_modulus_gpa=80.0, burgers_nm=0.248)


# Form A, Orowan 1948: REFERENCES §5.2 table.
@pytest.mark.parametrize(("consts", "spacing", "expected"),
                         [(AL, 100.0, 228.0), (AL, 50.0, 457.0), (FE, 200.0, 273.0)])
def test_classic(consts, spacing, expected):
    assert orowan_classic_mpa(spacing_nm=spacing, **consts) == pytest.approx(expected, rel=0.005)


# Form B, Ashby–Orowan (Gladman 1997): REFERENCES §5.2 table, 0.538 form and 5.9 form.
@pytest.mark.parametrize(("f", "x_nm", "form_0538", "form_59"),
                         [(0.001, 5.0, 156.0, 112.0), (0.002, 10.0, 143.0, 97.3),
                          (0.001, 10.0, 101.0, 68.8)])
def test_ashby_orowan(f, x_nm, form_0538, form_59):
    got = orowan_ashby_mpa(volume_fraction=f, particle_diameter_nm=x_nm, shear_modulus_gpa=80.0,
                           burgers_nm=0.248)
    assert got == pytest.approx(form_0538, rel=0.005)
    assert orowan_ashby_gladman_mpa(volume_fraction=f, particle_diameter_nm=x_nm) == (
        pytest.approx(form_59, rel=0.005))


# Form C, BKS-type line tension (Seidman, Marquis & Dunand 2002): REFERENCES §5.2 table,
# with r̄ = √(2/3)·r and λ = 2r̄(√(π/(4f)) − 1).
@pytest.mark.parametrize(
    ("consts", "nu", "r", "f", "lam", "expected"),
    [(AL, 0.345, 5.0, 0.01, 64.2, 188.0), (AL, 0.345, 5.0, 0.03, 33.6, 358.0),
     (AL, 0.345, 10.0, 0.05, 48.4, 300.0),
     (dict(FE), 0.29, 2.5, 0.001, 110.0, 209.0), (dict(FE), 0.29, 5.0, 0.002, 154.0, 188.0)])
def test_line_tension(consts, nu, r, f, lam, expected):
    spacing = edge_spacing_spheres_rms_nm(r, f)
    assert spacing == pytest.approx(lam, rel=0.005)
    got = orowan_line_tension_mpa(poisson_ratio=nu, planar_radius_nm=math.sqrt(2 / 3) * r,
                                  spacing_nm=spacing, **consts)
    assert got == pytest.approx(expected, rel=0.005)


def test_scaling_checks():
    # REFERENCES §5.2 scaling: form B ∝ √f at fixed X; Δσ·X/ln(X/2b) constant at fixed f.
    kw = dict(shear_modulus_gpa=80.0, burgers_nm=0.248)
    a = orowan_ashby_mpa(volume_fraction=0.001, particle_diameter_nm=8.0, **kw)
    b = orowan_ashby_mpa(volume_fraction=0.004, particle_diameter_nm=8.0, **kw)
    assert b / a == pytest.approx(2.0, rel=1e-12)
    xs = np.array([5.0, 10.0, 20.0])
    s = orowan_ashby_mpa(volume_fraction=0.002, particle_diameter_nm=xs, **kw)
    inv = s * xs / np.log(xs / (2 * 0.248))
    assert np.ptp(inv) == pytest.approx(0.0, abs=1e-9)
    # Form C is not exactly ∝ √f (the −1 in λ).
    c = [orowan_line_tension_mpa(poisson_ratio=0.345, planar_radius_nm=math.sqrt(2 / 3) * 5,
                                 spacing_nm=edge_spacing_spheres_rms_nm(5.0, f), **AL)
         for f in (0.01, 0.04)]
    assert c[1] / c[0] > 2.0 + 0.05


def test_two_ashby_versions_differ():
    # REFERENCES §5.2: the 0.538 and 5.9 versions are ≈ 1.4× apart at 5 nm.
    a = orowan_ashby_mpa(volume_fraction=0.001, particle_diameter_nm=5.0,
                         shear_modulus_gpa=80.0, burgers_nm=0.248)
    b = orowan_ashby_gladman_mpa(volume_fraction=0.001, particle_diameter_nm=5.0)
    assert a / b == pytest.approx(1.4, abs=0.05)


def test_taylor_dislocation_term():
    # M·α·G·b·√ρ (Taylor 1934) by hand: 3.06·0.3·26.1e3 MPa·0.286e-9 m·1e7 m^-1 = 68.52 MPa.
    got = taylor_dislocation_mpa(taylor_factor=3.06, alpha=0.3, shear_modulus_gpa=26.1,
                                 burgers_nm=0.286, dislocation_density_per_m2=1e14)
    assert got == pytest.approx(3.06 * 0.3 * 26.1e3 * 0.286e-9 * 1e7, rel=1e-12)
    assert got == pytest.approx(68.52, abs=0.01)
