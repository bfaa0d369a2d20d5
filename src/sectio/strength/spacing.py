"""Particle spacing in the glide plane, from measured planar quantities or from spheres.

Every function returns a length in nm and has a ``*_FORMULA`` text recorded in outputs so
that a reader knows which spacing was used. Lengths of arguments are in nm as well;
functions are vectorised (numpy arrays broadcast).

References
----------
.. [1] A. J. Ardell, Metall. Trans. A 16 (1985) 2131 (square-lattice planar spacing).
.. [2] J. F. Nie, B. C. Muddle, J. Phase Equilib. 19 (1998) 543 (triangular lattice).
.. [3] S. D. Wicksell, Biometrika 17 (1925) 84 (sections of spheres: mean planar radius
       (π/4)·r, rms planar radius √(2/3)·r).
.. [4] R. L. Fullman, Trans. AIME 197 (1953) 447 (3D mean free path).
"""

from __future__ import annotations

import numpy as np

SQUARE_CC_FORMULA = "centre-to-centre, square lattice: L = N_A^(-1/2) (Ardell 1985)"
SQUARE_EDGE_PLANAR_FORMULA = (
    "edge-to-edge, square lattice from measured planar data: "
    "λ = N_A^(-1/2) − d_planar (d_planar = mean section diameter)"
)
SPHERES_CC_FORMULA = "centre-to-centre, square lattice, spheres: L = r·√(2π/(3f)) (Ardell 1985)"
SPHERES_EDGE_MEAN_FORMULA = (
    "edge-to-edge, square lattice, spheres, mean planar diameter: λ = r·(√(2π/(3f)) − π/2)"
)
SPHERES_EDGE_RMS_FORMULA = (
    "edge-to-edge, square lattice, spheres, rms planar diameter: "
    "λ = 2r̄·(√(π/(4f)) − 1), r̄ = √(2/3)·r"
)
TRIANGULAR_CC_FORMULA = "centre-to-centre, triangular lattice: L = 1.0746·N_A^(-1/2) (Nie & Muddle)"
FULLMAN_FORMULA = "3D mean free path: λ = 4(1 − f)·r/(3f) (Fullman 1953; not a glide-plane spacing)"

# Keys for the spacing choice; each maps to its formula text.
SPACING_FORMULAS = {
    "planar_edge": SQUARE_EDGE_PLANAR_FORMULA,
    "planar_centre": SQUARE_CC_FORMULA,
    "spheres_edge_rms": SPHERES_EDGE_RMS_FORMULA,
    "spheres_edge_mean": SPHERES_EDGE_MEAN_FORMULA,
    "spheres_centre": SPHERES_CC_FORMULA,
}


def sections_per_area_from_spheres(radius_nm, volume_fraction):
    """Number of sphere sections per unit area, N_A = N_V·2r = 3f/(2πr²), in nm⁻²."""
    r = np.asarray(radius_nm, dtype=float)
    return 3.0 * np.asarray(volume_fraction, dtype=float) / (2.0 * np.pi * r * r)


def centre_spacing_planar_nm(sections_per_nm2):
    """Square-lattice centre-to-centre spacing L = N_A^(−½) (nm), from N_A in nm⁻²."""
    return 1.0 / np.sqrt(np.asarray(sections_per_nm2, dtype=float))


def edge_spacing_planar_nm(sections_per_nm2, mean_section_diameter_nm):
    """Edge-to-edge spacing λ = N_A^(−½) − d̄_planar (nm), from measured planar data."""
    return centre_spacing_planar_nm(sections_per_nm2) - np.asarray(mean_section_diameter_nm)


def triangular_centre_spacing_nm(sections_per_nm2):
    """Triangular-lattice centre-to-centre spacing 1.0746·N_A^(−½) (nm)."""
    # 1.0746 = (2/√3)^½: one lattice point per (√3/2)·L² of area (derived).
    return np.sqrt(2.0 / np.sqrt(3.0)) * centre_spacing_planar_nm(sections_per_nm2)


def centre_spacing_spheres_nm(radius_nm, volume_fraction):
    """Square-lattice centre-to-centre spacing of sphere sections, r·√(2π/(3f)) (nm)."""
    f = np.asarray(volume_fraction, dtype=float)
    return np.asarray(radius_nm, dtype=float) * np.sqrt(2.0 * np.pi / (3.0 * f))


def edge_spacing_spheres_mean_nm(radius_nm, volume_fraction):
    """Edge-to-edge spacing with the mean planar diameter, r·(√(2π/(3f)) − π/2) (nm)."""
    r = np.asarray(radius_nm, dtype=float)
    return centre_spacing_spheres_nm(r, volume_fraction) - r * np.pi / 2.0


def edge_spacing_spheres_rms_nm(radius_nm, volume_fraction):
    """Edge-to-edge spacing with the rms planar diameter, 2r̄·(√(π/(4f)) − 1) (nm)."""
    r_bar = np.sqrt(2.0 / 3.0) * np.asarray(radius_nm, dtype=float)
    f = np.asarray(volume_fraction, dtype=float)
    return 2.0 * r_bar * (np.sqrt(np.pi / (4.0 * f)) - 1.0)


def fullman_mean_free_path_nm(radius_nm, volume_fraction):
    """3D mean free path between spheres, 4(1 − f)·r/(3f) (nm) (Fullman 1953)."""
    f = np.asarray(volume_fraction, dtype=float)
    return 4.0 * (1.0 - f) * np.asarray(radius_nm, dtype=float) / (3.0 * f)
