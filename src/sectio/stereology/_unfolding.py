"""Unfolding section diameters of spheres into sphere diameters (Schwartz–Saltykov).

A sphere of diameter D cut by a random plane leaves a disc whose diameter d has the
density d / (D·√(D² − d²)) on [0, D] (Wicksell 1925), and spheres with N_V per unit volume
give N_A = N_V·D sections per unit area (Cruz-Orive 1980). With k equal diameter classes
of width Δ, the sections per unit area in class i are

    N_A(i) = Σ_{j ≥ i} K(i, j) · N_V(j),
    K(i, j) = mean over D in class j of [√(D² − (iΔ − Δ)²) − √(D² − (iΔ)²)],

(a square root of a negative number counted as 0). Schwartz (1934) and Saltykov (1958)
take every sphere of class j at the top of the class; here K is averaged over diameters
spread evenly through the class, which removes most of the half-class bias of the mean,
except in the **top class**: its upper edge is the largest section seen, the best
estimate of the largest sphere, and its spheres are taken at that edge (Saltykov's rule).
A narrow population puts nearly all spheres there; spreading them through the class
would leave sections near the top unexplained and invent small spheres for them (with 10
classes, equal spheres read N_V +15 % and the mean diameter −5 % that way; at the edge
both are exact). Checked against the analytic section-size distribution of equal spheres
and of log-normal populations (Wicksell 1925) in tests/validation/test_unfolding_wicksell.py.
The triangular system is ill-conditioned: sampling noise in the large classes is
amplified into the small ones and back-substitution can give negative class counts.

**Negative classes**: the reported distribution is the non-negative least-squares
solution (Lawson & Hanson 1974, ``scipy.optimize.nnls``) of the same system, which equals
the back-substitution whenever that is non-negative, and otherwise is the closest
non-negative distribution to the data; the raw back-substitution is reported too, with the
share of its total that was negative, so the user can judge the noise.

**Size floor**: classes wholly below the smallest measurable section are left out of the
fit (their counts are censored, not zero) and no spheres are estimated for them.

**Thin foils** (projected images, foil thickness t): a sphere is seen if it meets the foil;
those with centres inside project their full diameter, the others (within D/2 of a
surface) project a cap section. Then N_A(i) = Σ_j [K(i, j) + t·I(i, j)]·N_V(j), with
I(i, j) the share of class-j diameters falling in class i (the identity for equal
classes), and the volume fraction follows from the projected area fraction as
V_V = A_A · 2E[D³] / (3t·E[D²] + 2E[D³]) (Underwood 1970, *Quantitative Stereology*,
projected images — from memory; derived here for non-overlapping spheres).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Unfolding", "saltykov_matrix", "unfold_sections", "foil_volume_fraction"]


def saltykov_matrix(k: int, width_um: float, *, foil_thickness_um: float = 0.0,
                    n_sub: int = 64, top_at_edge: bool = False) -> np.ndarray:
    """Class-averaged Schwartz–Saltykov kernel K (k × k, upper triangular), in µm.

    ``K[i, j]`` is the number of sections per unit area in section class i per unit N_V
    of spheres in class j; with ``foil_thickness_um`` > 0 the projection term t·I is added.
    ``top_at_edge``: the spheres of the top class sit at its upper edge (module notes).
    """
    d = width_um
    edges = np.arange(k + 1) * d
    K = np.zeros((k, k))
    for j in range(k):
        D = edges[j] + (np.arange(n_sub) + 0.5) / n_sub * d  # diameters spread in class
        if top_at_edge and j == k - 1:
            D = np.array([edges[k]])
        for i in range(j + 1):
            lo, hi = edges[i], edges[i + 1]
            a = np.sqrt(np.clip(D**2 - lo**2, 0, None))
            b = np.sqrt(np.clip(D**2 - hi**2, 0, None))
            K[i, j] = float(np.mean(a - b))
        if foil_thickness_um > 0:
            K[j, j] += foil_thickness_um
    return K


@dataclass(frozen=True)
class Unfolding:
    """Sphere-diameter distribution from section diameters (number per µm³ per class)."""

    edges_um: np.ndarray
    sections_per_um2: np.ndarray  # per section class
    spheres_per_um3: np.ndarray  # non-negative (NNLS) estimate per sphere class
    raw_spheres_per_um3: np.ndarray  # back-substitution, may hold negatives
    negative_share: float  # |sum of negative raw classes| / sum of |raw|
    first_fitted_class: int
    foil_thickness_um: float
    top_at_edge: bool = True

    @property
    def class_diameters_um(self) -> np.ndarray:
        """Diameter each class stands for: its middle; the top class its upper edge."""
        rep = self.mids_um.copy()
        if self.top_at_edge:
            rep[-1] = self.edges_um[-1]
        return rep

    @property
    def number_per_um3(self) -> float:
        return float(self.spheres_per_um3.sum())

    @property
    def mids_um(self) -> np.ndarray:
        return 0.5 * (self.edges_um[1:] + self.edges_um[:-1])

    @property
    def mean_sphere_diameter_um(self) -> float | None:
        n = self.spheres_per_um3.sum()
        return float(np.sum(self.spheres_per_um3 * self.class_diameters_um) / n) if n > 0 \
            else None

    def moment_um(self, p: int) -> float | None:
        """E[D^p] of the unfolded distribution (diameters spread evenly in each class)."""
        n = self.spheres_per_um3.sum()
        if n <= 0:
            return None
        lo, hi = self.edges_um[:-1], self.edges_um[1:]
        m = (hi ** (p + 1) - lo ** (p + 1)) / ((p + 1) * (hi - lo))
        if self.top_at_edge:
            m[-1] = hi[-1] ** p
        return float(np.sum(self.spheres_per_um3 * m) / n)

    def to_dict(self) -> dict:
        return {
            "method": "Schwartz-Saltykov, class-averaged kernel (top class at its upper "
                      "edge), non-negative least squares",
            "class_diameters_um": self.class_diameters_um.tolist(),
            "class_edges_um": self.edges_um.tolist(),
            "sections_per_um2": self.sections_per_um2.tolist(),
            "spheres_per_um3": self.spheres_per_um3.tolist(),
            "back_substitution_spheres_per_um3": self.raw_spheres_per_um3.tolist(),
            "negative_share": self.negative_share,
            "first_fitted_class": self.first_fitted_class,
            "number_per_um3": self.number_per_um3,
            "mean_sphere_diameter_um": self.mean_sphere_diameter_um,
            "foil_thickness_um": self.foil_thickness_um or None,
        }


def unfold_sections(diameters_um, *, area_um2: float, weights=None, n_classes: int = 10,
                    max_diameter_um: float | None = None, min_diameter_um: float = 0.0,
                    foil_thickness_um: float = 0.0) -> Unfolding:
    """Schwartz–Saltykov unfolding of section (or projected) diameters.

    Parameters
    ----------
    diameters_um : array
        Equivalent circle diameters of the sections.
    area_um2 : float
        Total field area the sections were counted on.
    weights : array, optional
        Edge weights (Miles–Lantuéjoul); default 1.
    n_classes : int
        Number of equal diameter classes from 0 to ``max_diameter_um`` (default: the
        largest diameter, rounded up by 0.1 %, and then the spheres of the top class sit
        at its upper edge).
    min_diameter_um : float
        Size floor of the measurement; classes wholly below it are not fitted.
    foil_thickness_um : float
        Foil thickness for projected thin-foil images (0 = plane section).

    Returns
    -------
    Unfolding

    References
    ----------
    .. [1] Saltykov, S.A. (1958) *Stereometric Metallography*, 2nd ed., Moscow.
    .. [2] Wicksell, S.D. (1925) The corpuscle problem. *Biometrika* 17, 84–99.
    """
    from scipy.optimize import nnls

    d = np.asarray(diameters_um, float)
    w = np.ones_like(d) if weights is None else np.asarray(weights, float)
    ok = np.isfinite(d) & (d > 0) & (w > 0) & np.isfinite(w)
    d, w = d[ok], w[ok]
    k = int(n_classes)
    top = float(max_diameter_um or (d.max() * 1.001 if d.size else 1.0))
    width = top / k
    edges = np.arange(k + 1) * width
    na, _ = np.histogram(np.clip(d, 0, top * (1 - 1e-12)), bins=edges, weights=w)
    na = na / area_um2
    # the top edge is the largest section only when it was taken from the data
    at_edge = max_diameter_um is None and d.size > 0
    K = saltykov_matrix(k, width, foil_thickness_um=foil_thickness_um, top_at_edge=at_edge)
    first = int(np.searchsorted(edges[1:], min_diameter_um, side="right"))
    first = min(first, k - 1)
    raw = np.zeros(k)
    for j in range(k - 1, first - 1, -1):  # back-substitution from the largest class
        raw[j] = (na[j] - K[j, j + 1:] @ raw[j + 1:]) / K[j, j]
    nv = np.zeros(k)
    if d.size:
        sol, _ = nnls(K[first:, first:], na[first:])
        nv[first:] = sol
    neg = float(-raw[raw < 0].sum() / np.abs(raw).sum()) if np.abs(raw).sum() > 0 else 0.0
    return Unfolding(edges, na, nv, raw, neg, first, float(foil_thickness_um), at_edge)


def foil_volume_fraction(area_fraction: float, *, foil_thickness_um: float,
                         mean_d2_um2: float, mean_d3_um3: float) -> float:
    """Volume fraction from the projected area fraction of spheres in a foil.

    V_V = A_A · 2E[D³] / (3t·E[D²] + 2E[D³]) for non-overlapping projections.
    """
    t = foil_thickness_um
    return area_fraction * 2 * mean_d3_um3 / (3 * t * mean_d2_um2 + 2 * mean_d3_um3)
