"""Size distributions of particle sections: histograms, cumulative curve, quantiles, fit.

All functions take sizes and optional weights (the Miles–Lantuéjoul weights of
:mod:`._particles`), so that distributions are number-weighted and unbiased for edge
effects. Pure functions; no plotting here.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["SizeDistribution", "size_distribution", "weighted_quantile", "lognormal_fit"]


def weighted_quantile(values, q, weights=None) -> np.ndarray:
    """Quantiles of a weighted sample (inverse of the weighted empirical CDF, mid-steps).

    With equal weights this equals ``numpy.quantile(values, q, method="hazen")``.
    """
    v = np.asarray(values, float)
    w = np.ones_like(v) if weights is None else np.asarray(weights, float)
    order = np.argsort(v)
    v, w = v[order], w[order]
    cw = np.cumsum(w)
    pos = (cw - 0.5 * w) / cw[-1]
    return np.interp(np.atleast_1d(q), pos, v)


def lognormal_fit(values, weights=None) -> dict:
    """Maximum-likelihood log-normal fit: ln d ~ Normal(mu, sigma).

    For weights w_i the estimates are the weighted mean and the weighted (1/Σw) standard
    deviation of ln d — the closed-form MLE (Aitchison & Brown 1957, *The Lognormal
    Distribution*). Truncation by the size floor is not modelled.
    """
    d = np.asarray(values, float)
    w = np.ones_like(d) if weights is None else np.asarray(weights, float)
    ok = (d > 0) & (w > 0)
    if ok.sum() < 2:
        return {"mu_ln_um": None, "sigma_ln": None, "median_um": None,
                "geometric_sd": None, "mean_um": None}
    x, w = np.log(d[ok]), w[ok]
    mu = float(np.sum(w * x) / w.sum())
    sigma = float(math.sqrt(np.sum(w * (x - mu) ** 2) / w.sum()))
    return {"mu_ln_um": mu, "sigma_ln": sigma, "median_um": math.exp(mu),
            "geometric_sd": math.exp(sigma), "mean_um": math.exp(mu + sigma**2 / 2)}


def _nice_width(span: float, n: int) -> float:
    raw = span / n
    mag = 10 ** math.floor(math.log10(raw))
    for m in (1, 2, 2.5, 5, 10):
        if m * mag >= raw:
            return m * mag
    return 10 * mag


@dataclass(frozen=True)
class SizeDistribution:
    """Number-weighted distribution of one size measure (µm)."""

    n: int
    weight_total: float
    linear_edges_um: np.ndarray
    linear_counts: np.ndarray  # weighted counts per bin
    log_edges_um: np.ndarray
    log_counts: np.ndarray
    cumulative_um: np.ndarray  # sorted sizes
    cumulative_fraction: np.ndarray  # weighted fraction ≤ size
    d10_um: float | None
    d50_um: float | None
    d90_um: float | None
    lognormal: dict

    def to_dict(self) -> dict:
        return {
            "n": self.n, "d10_um": self.d10_um, "d50_um": self.d50_um, "d90_um": self.d90_um,
            "lognormal": self.lognormal,
            "linear_histogram": {"edges_um": self.linear_edges_um.tolist(),
                                 "counts": self.linear_counts.tolist()},
            "log_histogram": {"edges_um": self.log_edges_um.tolist(),
                              "counts": self.log_counts.tolist()},
        }


def size_distribution(sizes_um, weights=None, *, bins: int = 20,
                      log_bins_per_decade: int = 10) -> SizeDistribution:
    """Histograms (linear and logarithmic bins), cumulative curve, D10/D50/D90, fit.

    Linear bins start at 0 with a "nice" width (1, 2, 2.5, 5 × 10^k) giving about
    ``bins`` bins; logarithmic bins are ``log_bins_per_decade`` per decade aligned to
    powers of ten. D10/D50/D90 are number-weighted quantiles.
    """
    d = np.asarray(sizes_um, float)
    w = np.ones_like(d) if weights is None else np.asarray(weights, float)
    ok = np.isfinite(d) & (d > 0) & np.isfinite(w) & (w > 0)
    d, w = d[ok], w[ok]
    empty = np.zeros(0)
    if d.size == 0:
        return SizeDistribution(0, 0.0, empty, empty, empty, empty, empty, empty,
                                None, None, None, lognormal_fit(d))
    width = _nice_width(float(d.max()), bins)
    lin_edges = np.arange(0.0, d.max() + width, width)
    if lin_edges[-1] <= d.max():
        lin_edges = np.append(lin_edges, lin_edges[-1] + width)
    lin_counts, _ = np.histogram(d, bins=lin_edges, weights=w)
    k = log_bins_per_decade
    lo = math.floor(math.log10(d.min()) * k) / k
    hi = math.ceil(math.log10(d.max()) * k + 1e-9) / k
    if hi <= lo:
        hi = lo + 1.0 / k
    log_edges = 10 ** np.arange(lo, hi + 0.5 / k, 1.0 / k)
    log_counts, _ = np.histogram(d, bins=log_edges, weights=w)
    order = np.argsort(d)
    cum = np.cumsum(w[order]) / w.sum()
    q = weighted_quantile(d, [0.1, 0.5, 0.9], w)
    return SizeDistribution(int(d.size), float(w.sum()), lin_edges, lin_counts, log_edges,
                            log_counts, d[order], cum, float(q[0]), float(q[1]), float(q[2]),
                            lognormal_fit(d, w))
