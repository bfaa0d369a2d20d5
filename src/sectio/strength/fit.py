"""Fit Hall–Petch constants σ₀ and k to measured grain sizes and yield stresses.

The fit is a straight line σ = σ₀ + k·x with x = d^(−½) (d in m, so k is in MPa·m^½).

``method="ols"``
    ordinary least squares; standard errors from the residual variance, Student-t
    intervals with n − 2 degrees of freedom, 95 % confidence and prediction bands
    (Draper & Smith, *Applied Regression Analysis*, 3rd ed. 1998, ch. 1–3).
``method="york"`` (errors in variables)
    the grain size has its own standard uncertainty u(d); it enters as
    u(x) = ½·d^(−3/2)·u(d) (first order). The line is the York, Evensen, Martínez &
    Delgado (2004, Am. J. Phys. 72:367) maximum-likelihood straight line for errors in both
    coordinates, which is the orthogonal-distance solution (Boggs & Rogers 1990) of the
    weighted problem. When the yield stresses carry no uncertainty of their own, u(σ) is
    chosen so that the reduced χ² equals 1 (scatter not explained by u(d)); the parameter
    errors are then scaled by √(χ²/(n − 2)) as in ODRPACK.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputError, OptionError
from .hall_petch import get_convention


class FitDataError(InputError, ValueError):
    """The data given to a Hall–Petch fit cannot be fitted (too few, non-positive, ...)."""


FIT_CAUTION = (
    "Hall–Petch constants fitted to the given specimens only; strengths predicted with them "
    "are model estimates, not measured properties: no substitute for tensile testing to the "
    "governing standard (e.g. ASTM E8/E8M, ISO 6892-1) nor a design allowable; defer to "
    "applicable codes and licensed engineering judgement."
)


@dataclass(frozen=True)
class HallPetchFit:
    """Result of a Hall–Petch fit (k in MPa·m^½, x = d^(−½) in m^(−½))."""

    method: str
    n: int
    sigma0_mpa: float
    sigma0_se_mpa: float
    sigma0_ci95_mpa: tuple[float, float]
    k_mpa_sqrt_m: float
    k_se_mpa_sqrt_m: float
    k_ci95_mpa_sqrt_m: tuple[float, float]
    covariance: tuple[tuple[float, float], tuple[float, float]]
    r_squared: float
    residual_sd_mpa: float
    dof: int
    grain_size_convention: str
    grain_size_um: tuple[float, ...]
    grain_size_sd_um: tuple[float, ...] | None
    yield_mpa: tuple[float, ...]
    yield_sd_mpa: tuple[float, ...] | None
    yield_sd_estimated: bool

    @property
    def x(self) -> np.ndarray:
        """Abscissae d^(−½) in m^(−½)."""
        return 1.0 / np.sqrt(np.asarray(self.grain_size_um) * 1e-6)

    @property
    def residuals_mpa(self) -> np.ndarray:
        return np.asarray(self.yield_mpa) - (self.sigma0_mpa + self.k_mpa_sqrt_m * self.x)

    def predict_mpa(self, grain_size_um):
        """Fitted σ at grain sizes d (µm)."""
        x = 1.0 / np.sqrt(np.asarray(grain_size_um, float) * 1e-6)
        return self.sigma0_mpa + self.k_mpa_sqrt_m * x

    def bands_mpa(self, x_per_sqrt_m) -> tuple[np.ndarray, np.ndarray]:
        """Half-widths of the 95 % confidence band (mean line) and prediction band at x.

        Confidence: t·√(Var σ₀ + x²·Var k + 2x·Cov); prediction adds the residual variance
        s² (a new specimen's scatter) under the square root.
        """
        from scipy import stats

        x = np.asarray(x_per_sqrt_m, dtype=float)
        (vaa, vab), (_, vbb) = self.covariance
        var_line = vaa + x * x * vbb + 2.0 * x * vab
        t = stats.t.ppf(0.975, self.dof)
        conf = t * np.sqrt(var_line)
        pred = t * np.sqrt(var_line + self.residual_sd_mpa**2)
        return conf, pred

    def to_dict(self) -> dict:
        """The ``sectio/hall-petch-fit@1`` document."""
        return {
            "schema": "sectio/hall-petch-fit@1",
            "caution": FIT_CAUTION,
            "method": self.method,
            "method_source": _METHOD_SOURCE[self.method],
            "n": self.n,
            "dof": self.dof,
            "sigma0_mpa": {
                "value": self.sigma0_mpa,
                "se": self.sigma0_se_mpa,
                "ci95": list(self.sigma0_ci95_mpa),
            },
            "k_mpa_sqrt_m": {
                "value": self.k_mpa_sqrt_m,
                "se": self.k_se_mpa_sqrt_m,
                "ci95": list(self.k_ci95_mpa_sqrt_m),
            },
            "covariance": [list(row) for row in self.covariance],
            "r_squared": self.r_squared,
            "residual_sd_mpa": self.residual_sd_mpa,
            "grain_size_convention": self.grain_size_convention,
            "grain_size_range_um": [min(self.grain_size_um), max(self.grain_size_um)],
            "data": {
                "grain_size_um": list(self.grain_size_um),
                "grain_size_sd_um": None
                if self.grain_size_sd_um is None
                else list(self.grain_size_sd_um),
                "yield_mpa": list(self.yield_mpa),
                "yield_sd_mpa": None if self.yield_sd_mpa is None else list(self.yield_sd_mpa),
                "yield_sd_estimated": self.yield_sd_estimated,
                "residuals_mpa": [float(r) for r in self.residuals_mpa],
            },
        }


_METHOD_SOURCE = {
    "ols": "ordinary least squares, Student-t intervals (Draper & Smith 1998)",
    "york": "errors in variables: York et al. 2004 Am. J. Phys. 72:367 straight line, "
    "equivalent to orthogonal distance regression (Boggs & Rogers 1990)",
}


def _check(grain_size_um, yield_mpa, grain_size_sd_um, yield_sd_mpa):
    d = np.asarray(grain_size_um, dtype=float)
    y = np.asarray(yield_mpa, dtype=float)
    if d.ndim != 1 or d.shape != y.shape:
        raise FitDataError("grain_size_um and yield_mpa must be 1-D and of equal length.")
    if d.size < 3:
        raise FitDataError(
            f"A Hall–Petch fit needs at least 3 specimens, got {d.size}; add more rows."
        )
    if not (np.all(np.isfinite(d)) and np.all(d > 0) and np.all(np.isfinite(y))):
        raise FitDataError(
            "Every grain size must be a positive number and every yield stress "
            "a number; fix the data rows."
        )
    if np.ptp(d) <= 0:
        raise FitDataError(
            "All grain sizes are equal; a Hall–Petch slope needs several grain sizes."
        )
    sd = None
    for name, arr in (("grain_size_sd_um", grain_size_sd_um), ("yield_sd_mpa", yield_sd_mpa)):
        if arr is not None:
            a = np.asarray(arr, dtype=float)
            if a.shape != d.shape or not np.all(np.isfinite(a)) or np.any(a < 0):
                raise FitDataError(f"{name} must hold one non-negative number per row.")
            if name == "grain_size_sd_um":
                sd = a
    return d, y, sd


def york_line(x, y, sx, sy, *, tol: float = 1e-12, max_iter: int = 500):
    """York et al. (2004) best straight line y = a + b·x for uncorrelated errors in x and y.

    Returns ``(a, b, sa, sb, cov_ab, chi2)`` with absolute (unscaled) standard errors.
    """
    x, y, sx, sy = (np.asarray(v, dtype=float) for v in (x, y, sx, sy))
    b = np.polyfit(x, y, 1)[0]
    for _ in range(max_iter):
        w = 1.0 / (sy**2 + b * b * sx**2)
        xb, yb = np.sum(w * x) / w.sum(), np.sum(w * y) / w.sum()
        u, v = x - xb, y - yb
        beta = w * (u * sy**2 + b * v * sx**2)
        b_new = np.sum(w * beta * v) / np.sum(w * beta * u)
        done = abs(b_new - b) <= tol * max(abs(b), 1e-300)
        b = b_new
        if done:
            break
    w = 1.0 / (sy**2 + b * b * sx**2)
    xb, yb = np.sum(w * x) / w.sum(), np.sum(w * y) / w.sum()
    u, v = x - xb, y - yb
    beta = w * (u * sy**2 + b * v * sx**2)
    a = yb - b * xb
    xa = xb + beta
    xa_bar = np.sum(w * xa) / w.sum()
    var_b = 1.0 / np.sum(w * (xa - xa_bar) ** 2)
    var_a = 1.0 / w.sum() + xa_bar**2 * var_b
    cov = -xa_bar * var_b
    chi2 = float(np.sum(w * (y - a - b * x) ** 2))
    return float(a), float(b), math.sqrt(var_a), math.sqrt(var_b), float(cov), chi2


def fit_hall_petch(
    grain_size_um,
    yield_mpa,
    *,
    grain_size_sd_um=None,
    yield_sd_mpa=None,
    method: str = "ols",
    grain_size_convention: str = "mean_lineal_intercept",
) -> HallPetchFit:
    """Fit σ = σ₀ + k·d^(−½) to specimens' grain sizes (µm) and yield stresses (MPa).

    Parameters
    ----------
    grain_size_um, yield_mpa : (N,) array_like
        One row per specimen, grain size in ``grain_size_convention``.
    grain_size_sd_um : (N,) array_like, optional
        Standard uncertainty of each grain size; required for ``method="york"``.
    yield_sd_mpa : (N,) array_like, optional
        Standard uncertainty of each yield stress (York only); estimated if absent.
    method : {"ols", "york"}
        Ordinary least squares, or errors in variables (York 2004 / ODR).
    grain_size_convention : str
        What the grain sizes are (recorded, and k belongs to it).

    Returns
    -------
    HallPetchFit
    """
    from scipy import optimize, stats

    get_convention(grain_size_convention)
    if method not in _METHOD_SOURCE:
        raise OptionError(f"Unknown fit method {method!r}; use ols or york.")
    d, y, d_sd = _check(grain_size_um, yield_mpa, grain_size_sd_um, yield_sd_mpa)
    n = d.size
    dof = n - 2
    x = 1.0 / np.sqrt(d * 1e-6)
    y_sd_out = None
    estimated = False
    if method == "ols":
        xm = x.mean()
        sxx = np.sum((x - xm) ** 2)
        b = np.sum((x - xm) * (y - y.mean())) / sxx
        a = y.mean() - b * xm
        resid = y - a - b * x
        s2 = float(np.sum(resid**2) / dof) if dof > 0 else 0.0
        var_b = s2 / sxx
        var_a = s2 * (1.0 / n + xm * xm / sxx)
        cov = -xm * s2 / sxx
    else:
        if d_sd is None or not np.any(d_sd > 0):
            raise FitDataError(
                "The errors-in-variables fit needs a grain_size_sd_um column "
                "with positive values; add it or use the ols method."
            )
        sx = 0.5 * (d * 1e-6) ** -1.5 * (d_sd * 1e-6)
        if yield_sd_mpa is not None:
            sy = np.asarray(yield_sd_mpa, dtype=float)
        else:
            estimated = True

            def excess(s):
                return york_line(x, y, sx, np.full(n, s))[5] / dof - 1.0

            scale = float(np.std(y)) or 1.0
            lo = 1e-9 * scale
            if excess(lo) <= 0:
                s_y = lo  # grain-size uncertainty alone explains the scatter
            else:
                s_y = optimize.brentq(excess, lo, 10.0 * scale + np.ptp(y), xtol=1e-12 * scale)
            sy = np.full(n, s_y)
        if np.any(sy <= 0) and np.any(sx <= 0):
            raise FitDataError(
                "Each row needs a positive grain_size_sd_um or yield_sd_mpa for "
                "the errors-in-variables fit."
            )
        a, b, sa, sb, cov_abs, chi2 = york_line(x, y, sx, sy)
        factor = chi2 / dof if dof > 0 else 1.0
        var_a, var_b, cov = sa * sa * factor, sb * sb * factor, cov_abs * factor
        resid = y - a - b * x
        s2 = float(np.sum(resid**2) / dof) if dof > 0 else 0.0
        y_sd_out = tuple(float(v) for v in sy)
    ss_tot = float(np.sum((y - y.mean()) ** 2))
    r2 = 1.0 - float(np.sum(resid**2)) / ss_tot if ss_tot > 0 else 1.0
    t = float(stats.t.ppf(0.975, dof)) if dof > 0 else float("inf")
    sa, sb = math.sqrt(var_a), math.sqrt(var_b)
    return HallPetchFit(
        method=method,
        n=n,
        sigma0_mpa=float(a),
        sigma0_se_mpa=sa,
        sigma0_ci95_mpa=(float(a - t * sa), float(a + t * sa)),
        k_mpa_sqrt_m=float(b),
        k_se_mpa_sqrt_m=sb,
        k_ci95_mpa_sqrt_m=(float(b - t * sb), float(b + t * sb)),
        covariance=((float(var_a), float(cov)), (float(cov), float(var_b))),
        r_squared=float(r2),
        residual_sd_mpa=math.sqrt(s2),
        dof=dof,
        grain_size_convention=grain_size_convention,
        grain_size_um=tuple(float(v) for v in d),
        grain_size_sd_um=None if d_sd is None else tuple(float(v) for v in d_sd),
        yield_mpa=tuple(float(v) for v in y),
        yield_sd_mpa=y_sd_out,
        yield_sd_estimated=estimated,
    )
