"""Duplex (bimodal) grain size and the largest grain of a field.

ASTM E1181 (duplex grain sizes; from memory) asks, for a structure with two distinct
grain sizes, for the area fraction of each and a grain size number per mode instead of
one average. Here the two modes are looked for in the **area-weighted** distribution of
log grain area (a few large grains hold much of the area: a number-weighted histogram
hides them): a two-component normal mixture is fitted by weighted EM and the structure is
called duplex when

* the two components are well apart: Ashman's D = √2·|μ₁ − μ₂| / √(σ₁² + σ₂²) above
  ``min_separation`` (D > 2 is the usual bound for a clean split of two normals; Ashman,
  Bird & Zepf 1994, *Astron. J.* 108:2348, from memory),
* the smaller share holds at least ``min_minor_share`` of the area (E1181 speaks of a
  second size that is a noticeable part of the section; 10 % here),
* and the mean grain areas of the modes differ by at least ``min_area_ratio``.

Each mode's G is the planimetric number from its mean grain area (E112 relation 1d,
REFERENCES.md §1.1). The largest grain of the field gives the ASTM E930 "as large as" (ALA)
number: the planimetric G of a field in which every grain had that area (from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._grainsize import astm_g_from_grains_per_mm2


@dataclass(frozen=True)
class GrainMode:
    """One mode of a grain area distribution."""

    area_fraction: float
    n_grains: int
    mean_area_um2: float
    mean_ecd_um: float
    astm_g_planimetric: float

    def to_dict(self) -> dict:
        return dict(self.__dict__)


@dataclass(frozen=True)
class DuplexResult:
    """Outcome of the bimodality test; ``modes`` fine first (one mode if not duplex)."""

    duplex: bool
    separation: float  # Ashman's D of the fitted components
    minor_share: float  # smaller component's area share
    modes: tuple[GrainMode, ...]

    def to_dict(self) -> dict:
        return {
            "duplex": self.duplex,
            "separation_ashman_d": self.separation,
            "minor_area_share": self.minor_share,
            "modes": [m.to_dict() for m in self.modes],
        }


def _g_of_area_um2(area_um2: float) -> float:
    return float(astm_g_from_grains_per_mm2(1e6 / area_um2)) if area_um2 > 0 else float("nan")


def _mode(areas: np.ndarray, total: float) -> GrainMode:
    mean = float(areas.mean())
    return GrainMode(
        area_fraction=float(areas.sum() / total),
        n_grains=int(areas.size),
        mean_area_um2=mean,
        mean_ecd_um=float(np.mean(np.sqrt(4 * areas / np.pi))),
        astm_g_planimetric=_g_of_area_um2(mean),
    )


def _weighted_em(x: np.ndarray, w: np.ndarray, iters: int = 200):
    """Two-component normal mixture of ``x`` with sample weights ``w`` (EM)."""
    w = w / w.sum()
    order = np.argsort(x)
    cw = np.cumsum(w[order])
    q1, q3 = x[order][np.searchsorted(cw, 0.25)], x[order][np.searchsorted(cw, 0.75)]
    mu = np.array([q1, q3], float)
    var = np.full(2, max(float(np.average((x - np.average(x, weights=w)) ** 2, weights=w)),
                         1e-6))
    pi = np.array([0.5, 0.5])
    floor = 1e-4 + 1e-3 * var[0]
    for _ in range(iters):
        dens = pi / np.sqrt(2 * np.pi * var) * np.exp(-0.5 * (x[:, None] - mu) ** 2 / var)
        resp = dens / np.maximum(dens.sum(1, keepdims=True), 1e-300)
        rw = resp * w[:, None]
        nk = rw.sum(0)
        if np.any(nk < 1e-9):
            break
        new_mu = (rw * x[:, None]).sum(0) / nk
        var = np.maximum((rw * (x[:, None] - new_mu) ** 2).sum(0) / nk, floor)
        pi = nk
        if np.allclose(new_mu, mu, atol=1e-7):
            mu = new_mu
            break
        mu = new_mu
    return pi, mu, var, resp


def duplex_grain_size(
    areas_um2,
    *,
    min_separation: float = 2.0,
    min_minor_share: float = 0.10,
    min_area_ratio: float = 4.0,
    min_grains: int = 20,
) -> DuplexResult:
    """Test a field's grain areas for two grain sizes (ASTM E1181-style duplex report).

    Parameters
    ----------
    areas_um2 : array_like
        Grain areas (µm²), one per grain.
    min_separation : float
        Ashman's D of the two components needed (module notes).
    min_minor_share : float
        Area share the smaller component must hold.
    min_area_ratio : float
        Ratio of the modes' mean grain areas needed (4 ≈ a diameter ratio of 2).
    min_grains : int
        Fewer grains: no test (one mode).

    Returns
    -------
    DuplexResult

    Examples
    --------
    >>> a = np.r_[np.full(200, 100.0), np.full(20, 2500.0)]
    >>> r = duplex_grain_size(a * np.exp(np.random.default_rng(0).normal(0, .2, a.size)))
    >>> r.duplex, [round(m.area_fraction, 1) for m in r.modes]
    (True, [0.3, 0.7])
    """
    a = np.asarray(areas_um2, float)
    a = a[np.isfinite(a) & (a > 0)]
    total = float(a.sum())
    if a.size < min_grains:
        return DuplexResult(False, float("nan"), 0.0, (_mode(a, total),) if a.size else ())
    x = np.log(a)
    pi, mu, var, resp = _weighted_em(x, a)
    d = float(np.sqrt(2.0) * abs(mu[1] - mu[0]) / np.sqrt(var.sum()))
    fine = int(np.argmin(mu))
    in_fine = resp[:, fine] >= 0.5
    minor = float(min(pi))
    parts = [a[in_fine], a[~in_fine]]
    ok = (
        d >= min_separation
        and minor >= min_minor_share
        and all(p.size >= 2 for p in parts)
        and parts[1].mean() >= min_area_ratio * parts[0].mean()
    )
    if not ok:
        return DuplexResult(False, d, minor, (_mode(a, total),))
    return DuplexResult(True, d, minor, tuple(_mode(p, total) for p in parts))


def largest_grain_astm_g(largest_area_um2: float) -> float:
    """ASTM E930 "as large as" (ALA) grain size number of the largest grain observed:
    E112 relation 1d with the largest grain's area in place of the mean grain area
    (from memory). ``G = −3.3219·log10(A / mm²) − 2.954``.

    >>> round(largest_grain_astm_g(1008.0), 2)  # the mean area of G 7 (REFERENCES §1.2)
    7.0
    """
    return _g_of_area_um2(float(largest_area_um2))
