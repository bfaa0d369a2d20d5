"""Orowan bypass of non-shearable particles, and the Taylor forest-dislocation term.

Units: shear modulus in GPa, Burgers vector, particle sizes and spacings in nm; stresses in
MPa. All functions are vectorised. Orowan applies only to particles that dislocations must
bow around; small coherent precipitates are usually sheared and Orowan then over-predicts
(Ardell 1985; Gladman 1999).

Forms (REFERENCES §5.2):

``classic``
    Δσ = M·G·b/L (Orowan 1948).
``ashby_orowan``
    Δσ = (0.538·G·b·√f / X)·ln(X / 2b), X the mean planar intercept diameter
    (Gladman 1997, 1999; constants from memory).
``ashby_orowan_gladman``
    Δσ = (5.9·√f / x)·ln(x / 2.5·10⁻⁴), x in µm — the numerical version found in the same
    literature; not equivalent to ``ashby_orowan`` (≈ 1.4× apart at 5 nm).
``line_tension``
    Δσ = M·[0.4·G·b / (π·√(1 − ν))]·ln(2r̄/b)/λ (Bacon, Kocks & Scattergood 1973 type,
    as written by Seidman, Marquis & Dunand 2002).

References
----------
.. [1] E. Orowan, Symposium on Internal Stresses in Metals and Alloys, Inst. Metals, 1948.
.. [2] T. Gladman, *The Physical Metallurgy of Microalloyed Steels*, Inst. Materials, 1997;
       T. Gladman, Mater. Sci. Technol. 15 (1999) 30.
.. [3] D. J. Bacon, U. F. Kocks, R. O. Scattergood, Phil. Mag. 28 (1973) 1241.
.. [4] D. N. Seidman, E. A. Marquis, D. C. Dunand, Acta Mater. 50 (2002) 4021.
.. [5] G. I. Taylor, Proc. R. Soc. A 145 (1934) 362 (σ = M·α·G·b·√ρ).
"""

from __future__ import annotations

import numpy as np

# The first form is the default of the command line and of StrengthOptions.
OROWAN_FORMS = {
    "line_tension": (
        "Δσ = M·0.4·G·b/(π·√(1−ν))·ln(2r̄/b)/λ (Bacon–Kocks–Scattergood 1973 type, "
        "Seidman, Marquis & Dunand 2002)"
    ),
    "classic": "Δσ = M·G·b/L (Orowan 1948)",
    "ashby_orowan": "Δσ = (0.538·G·b·√f/X)·ln(X/2b) (Ashby–Orowan, Gladman 1997)",
    "ashby_orowan_gladman": "Δσ[MPa] = (5.9·√f/x)·ln(x/2.5e-4), x in µm (Gladman 1997)",
}

TAYLOR_FORMULA = "Δσ = M·α·G·b·√ρ (Taylor 1934)"


def _mpa(shear_modulus_gpa):
    return np.asarray(shear_modulus_gpa, dtype=float) * 1e3


def orowan_classic_mpa(*, taylor_factor, shear_modulus_gpa, burgers_nm, spacing_nm):
    """Original Orowan stress Δσ = M·G·b/L in MPa.

    Examples
    --------
    >>> round(float(orowan_classic_mpa(taylor_factor=3.06, shear_modulus_gpa=26.1,
    ...                                burgers_nm=0.286, spacing_nm=100.0)))
    228
    """
    return taylor_factor * _mpa(shear_modulus_gpa) * burgers_nm / np.asarray(spacing_nm, float)


def orowan_ashby_mpa(*, volume_fraction, particle_diameter_nm, shear_modulus_gpa, burgers_nm):
    """Ashby–Orowan stress (0.538·G·b·√f/X)·ln(X/2b) in MPa (Gladman 1997).

    ``particle_diameter_nm`` is X, the mean planar intercept diameter of the particles.

    Examples
    --------
    >>> round(float(orowan_ashby_mpa(volume_fraction=0.001, particle_diameter_nm=5.0,
    ...                              shear_modulus_gpa=80.0, burgers_nm=0.248)))
    156
    """
    x = np.asarray(particle_diameter_nm, dtype=float)
    f = np.asarray(volume_fraction, dtype=float)
    return (
        0.538
        * _mpa(shear_modulus_gpa)
        * burgers_nm
        * np.sqrt(f)
        / x
        * np.log(x / (2.0 * np.asarray(burgers_nm, float)))
    )


def orowan_ashby_gladman_mpa(*, volume_fraction, particle_diameter_nm):
    """Numerical Ashby–Orowan version (5.9·√f/x)·ln(x/2.5·10⁻⁴), x in µm, result in MPa.

    The constants carry ferrite's G and b; it is meant for microalloyed steels only.

    Examples
    --------
    >>> round(float(orowan_ashby_gladman_mpa(volume_fraction=0.001, particle_diameter_nm=5.0)))
    112
    """
    x_um = np.asarray(particle_diameter_nm, dtype=float) * 1e-3
    f = np.asarray(volume_fraction, dtype=float)
    return 5.9 * np.sqrt(f) / x_um * np.log(x_um / 2.5e-4)


def orowan_line_tension_mpa(
    *, taylor_factor, shear_modulus_gpa, burgers_nm, poisson_ratio, planar_radius_nm, spacing_nm
):
    """Orowan stress with the logarithmic line-tension term, in MPa.

    Δσ = M·[0.4·G·b/(π·√(1 − ν))]·ln(2r̄/b)/λ, with r̄ the mean planar particle radius and
    λ the edge-to-edge spacing in the glide plane (both nm).

    Examples
    --------
    >>> import math
    >>> r_bar = math.sqrt(2 / 3) * 5.0
    >>> lam = 2 * r_bar * (math.sqrt(math.pi / (4 * 0.01)) - 1)
    >>> round(float(orowan_line_tension_mpa(taylor_factor=3.06, shear_modulus_gpa=26.1,
    ...     burgers_nm=0.286, poisson_ratio=0.345, planar_radius_nm=r_bar, spacing_nm=lam)))
    188
    """
    b = np.asarray(burgers_nm, dtype=float)
    prefactor = 0.4 * _mpa(shear_modulus_gpa) * b / (np.pi * np.sqrt(1.0 - poisson_ratio))
    return (
        taylor_factor
        * prefactor
        * np.log(2.0 * np.asarray(planar_radius_nm, float) / b)
        / np.asarray(spacing_nm, float)
    )


def taylor_dislocation_mpa(
    *, taylor_factor, alpha, shear_modulus_gpa, burgers_nm, dislocation_density_per_m2
):
    """Forest-dislocation strengthening M·α·G·b·√ρ in MPa (Taylor 1934).

    Examples
    --------
    >>> round(float(taylor_dislocation_mpa(taylor_factor=3.06, alpha=0.3,
    ...     shear_modulus_gpa=26.1, burgers_nm=0.286, dislocation_density_per_m2=1e14)), 1)
    68.5
    """
    b_m = np.asarray(burgers_nm, dtype=float) * 1e-9
    return (
        taylor_factor
        * alpha
        * _mpa(shear_modulus_gpa)
        * b_m
        * np.sqrt(np.asarray(dislocation_density_per_m2, dtype=float))
    )
