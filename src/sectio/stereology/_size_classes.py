"""Two size classes in one particle population (e.g. coarse secondary and fine tertiary γ′).

The log equivalent circle diameters are fitted with one and with two normal components
(EM, Dempster, Laird & Rubin 1977); two classes are reported when the Bayesian
information criterion (Schwarz 1978) prefers two components by more than 10 (common
practice: "very strong" evidence, Kass & Raftery 1995) and the components are separated
by Ashman's D = √2·|μ1 − μ2| / √(σ1² + σ2²) > 2 (Ashman, Bird & Zepf 1994), and the
mixture density has a valley (below half its lower peak) between the two modes, so that
a skewed single population, or one with a tail of merged particles, is not cut in two.
The cut between the classes is the diameter where the two weighted component densities
are equal.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["SizeClasses", "size_classes"]

MIN_PARTICLES = 40
BIC_MARGIN = 10.0
ASHMAN_D = 2.0
VALLEY = 0.5


@dataclass(frozen=True)
class SizeClasses:
    """Result of :func:`size_classes`: the cut and the fitted components."""

    cut_um: float
    fine_median_um: float
    coarse_median_um: float
    fine_share: float  # share of particles in the fine component
    ashman_d: float
    bic_gain: float


def _em2(x, w, iters=200):
    q = np.quantile(x, [0.25, 0.75])
    mu = q.astype(float)
    sd = np.full(2, max(np.std(x), 1e-6) / 2)
    pi = np.array([0.5, 0.5])
    for _ in range(iters):
        dens = pi / sd * np.exp(-0.5 * ((x[:, None] - mu) / sd) ** 2)
        tot = np.maximum(dens.sum(1, keepdims=True), 1e-300)
        r = dens / tot * w[:, None]
        nk = r.sum(0)
        if np.any(nk <= 1e-9):
            return None
        mu = (r * x[:, None]).sum(0) / nk
        sd = np.sqrt(np.maximum((r * (x[:, None] - mu) ** 2).sum(0) / nk, 1e-12))
        sd = np.maximum(sd, 1e-3)
        pi = nk / nk.sum()
    ll = float(np.sum(w * np.log(np.maximum(tot[:, 0], 1e-300) / np.sqrt(2 * np.pi))))
    return mu, sd, pi, ll


def size_classes(ecd_um, weights=None) -> SizeClasses | None:
    """Two size classes of the particles, or None when one population fits as well."""
    d = np.asarray(ecd_um, float)
    w = np.ones_like(d) if weights is None else np.asarray(weights, float)
    ok = (d > 0) & (w > 0)
    d, w = d[ok], w[ok]
    if d.size < MIN_PARTICLES:
        return None
    x = np.log(d)
    w = w * (d.size / w.sum())  # weights summing to the particle count
    n = float(w.sum())
    mu1 = np.sum(w * x) / n
    sd1 = max(np.sqrt(np.sum(w * (x - mu1) ** 2) / n), 1e-3)
    ll1 = float(np.sum(w * (-0.5 * ((x - mu1) / sd1) ** 2 - np.log(sd1 * np.sqrt(2 * np.pi)))))
    fit = _em2(x, w)
    if fit is None:
        return None
    mu, sd, pi, ll2 = fit
    gain = (-2 * ll1 + 2 * np.log(n)) - (-2 * ll2 + 5 * np.log(n))
    ash = float(np.sqrt(2) * abs(mu[0] - mu[1]) / np.sqrt(sd[0] ** 2 + sd[1] ** 2))
    if gain <= BIC_MARGIN or ash <= ASHMAN_D:
        return None
    lo, hi = (0, 1) if mu[0] < mu[1] else (1, 0)
    grid = np.linspace(mu[lo], mu[hi], 2001)
    f_lo = pi[lo] / sd[lo] * np.exp(-0.5 * ((grid - mu[lo]) / sd[lo]) ** 2)
    f_hi = pi[hi] / sd[hi] * np.exp(-0.5 * ((grid - mu[hi]) / sd[hi]) ** 2)
    gap = np.abs(np.log(f_lo + 1e-300) - np.log(f_hi + 1e-300))
    cut = float(np.exp(grid[int(np.argmin(gap))]))
    # a real valley between the classes: the mixture density falls below half of its
    # lower peak on the way from one mode to the other (a skewed tail has no valley)
    mix = f_lo + f_hi
    if mix.min() > VALLEY * min(mix[0], mix[-1]):
        return None
    return SizeClasses(cut, float(np.exp(mu[lo])), float(np.exp(mu[hi])), float(pi[lo]),
                       ash, float(gain))


def size_class_table(ecd_um, area_um2_each, edge, weights, *, field_area_um2: float,
                     floor_um: float, n_classes: int = 10) -> dict:
    """Two size classes of one field's particles, each with its fraction, count, mean
    ECD and unfolded sphere size, or ``{"detected": False}`` for one population.

    ``ecd_um``, ``area_um2_each``, ``edge``, ``weights`` are per particle (all particles,
    edge-cut ones included); the cut comes from the whole particles. The area fraction
    of a class counts all its particles (edge-cut ones assigned by their visible ECD).
    """
    from ._unfolding import unfold_sections

    ecd = np.asarray(ecd_um, float)
    whole = ~np.asarray(edge, bool)
    sc = size_classes(ecd[whole], np.asarray(weights, float)[whole])
    if sc is None:
        return {"detected": False, "method": "log-normal mixture, BIC and Ashman's D"}
    out: dict = {"detected": True, "method": "log-normal mixture, BIC and Ashman's D",
           "cut_ecd_um": sc.cut_um, "ashman_d": sc.ashman_d, "bic_gain": sc.bic_gain,
           "classes": []}
    for name, sel in (("fine", ecd < sc.cut_um), ("coarse", ecd >= sc.cut_um)):
        w_sel = sel & whole
        wts = np.asarray(weights, float)[w_sel]
        unf = None
        if w_sel.sum() >= 1:
            unf = unfold_sections(ecd[w_sel], area_um2=field_area_um2, weights=wts,
                                  n_classes=n_classes,
                                  min_diameter_um=floor_um if name == "fine" else 0.0)
        out["classes"].append({
            "name": name,
            "particles_counted": int(w_sel.sum()),
            "particles_per_um2": float(wts.sum() / field_area_um2),
            "area_fraction": float(np.sum(np.asarray(area_um2_each)[sel]) / field_area_um2),
            "mean_ecd_um": float(np.sum(ecd[w_sel] * wts) / wts.sum()) if wts.sum() > 0
            else None,
            "mean_sphere_diameter_um": None if unf is None else unf.mean_sphere_diameter_um,
            "spheres_per_um3": None if unf is None else unf.number_per_um3,
        })
    return out
