"""Trends of a study series: grain growth and particle coarsening against the trial variable.

* Particle coarsening (Ostwald ripening) by the Lifshitz–Slyozov–Wagner law
  r̄³ − r̄0³ = K·t (Lifshitz & Slyozov 1961; Wagner 1961): a straight line of y = r̄³
  against t, slope K.
* Normal grain growth by the parabolic law d² − d0² = k·t (Burke & Turnbull 1952, from
  memory): a straight line of y = d² against t, slope k.

Both fits are least squares of a line, ordinary or weighted by 1/σ_y² when every point
has a standard error (σ_y from the point's own se by first-order propagation,
σ(x^n) = n·x^(n−1)·σ(x)). The slope's 95 % interval uses Student's t with n − 2 degrees of
freedom (a fit with fewer than 2 is flagged ``fewer_than_2_residual_dof``: its R² says
nothing) and, for the weighted fit, the residual scale (as ``scipy.optimize.curve_fit`` with
``absolute_sigma=False``), so scatter beyond the error bars widens the interval. Pure
functions: no I/O.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import DegenerateDataWarning, OptionError
from ..stereology import t_critical

__all__ = ["LineFit", "fit_line", "CoarseningFit", "fit_lsw", "GrainGrowthFit",
           "fit_parabolic_growth"]


@dataclass(frozen=True)
class LineFit:
    """y = intercept + slope·x by (weighted) least squares."""

    slope: float
    intercept: float
    slope_se: float | None
    intercept_se: float | None
    slope_ci95: tuple[float, float] | None
    intercept_ci95: tuple[float, float] | None
    n: int
    dof: int
    r_squared: float | None
    method: str  # "ols" or "wls"
    flags: tuple[str, ...] = ()

    def to_dict(self) -> dict:
        return {k: (list(v) if isinstance(v, tuple) else v) for k, v in self.__dict__.items()}


#: Flag of a line fitted with fewer than two residual degrees of freedom (n ≤ 3 points for
#: two parameters): the points nearly fix the line, R² is close to 1 whatever the data and
#: the slope interval rests on one degree of freedom (t(0.975, 1) = 12.7).
FEW_DOF_FLAG = "fewer_than_2_residual_dof"


def fit_line(x, y, *, y_se=None) -> LineFit:
    """Straight-line least squares with standard errors and 95 % intervals (Student t).

    Parameters
    ----------
    x, y : (n,) array_like
    y_se : (n,) array_like, optional
        Standard errors of y; all positive gives a weighted fit (weights 1/se²) whose
        covariance is scaled by the reduced χ².

    Returns
    -------
    LineFit

    Notes
    -----
    Normal equations of the weighted line (e.g. Press et al., *Numerical Recipes*, 3rd ed.,
    §15.2): slope = (S·Sxy − Sx·Sy)/Δ, Δ = S·Sxx − Sx²; var(slope) = S/Δ · χ²/(n − 2).

    Examples
    --------
    >>> f = fit_line([0, 1, 2, 3], [1.0, 3.1, 4.9, 7.0])
    >>> round(f.slope, 2), round(f.intercept, 2)
    (1.98, 1.03)
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    if x.shape != y.shape or x.ndim != 1:
        raise OptionError("fit_line needs x and y of the same length.")
    n = x.size
    if n < 2 or np.ptp(x) == 0:
        raise OptionError("a trend line needs at least two different values of the trial "
                          "variable.")
    w = np.ones(n)
    method = "ols"
    if y_se is not None:
        se = np.asarray(y_se, float)
        if se.shape == x.shape and np.all(np.isfinite(se)) and np.all(se > 0):
            w = 1.0 / se**2
            method = "wls"
    s, sx, sy = w.sum(), (w * x).sum(), (w * y).sum()
    sxx, sxy = (w * x * x).sum(), (w * x * y).sum()
    delta = s * sxx - sx**2
    slope = (s * sxy - sx * sy) / delta
    icpt = (sxx * sy - sx * sxy) / delta
    resid = y - (icpt + slope * x)
    dof = n - 2
    ybar = sy / s
    ss_tot = float((w * (y - ybar) ** 2).sum())
    r2 = 1.0 - float((w * resid**2).sum()) / ss_tot if ss_tot > 0 else None
    if dof < 1:
        import warnings

        warnings.warn("two points fix a line exactly: no interval for the trend slope.",
                      DegenerateDataWarning, stacklevel=2)
        return LineFit(float(slope), float(icpt), None, None, None, None, n, dof, r2, method,
                       (FEW_DOF_FLAG,))
    chi2_red = float((w * resid**2).sum()) / dof
    slope_se = float(np.sqrt(s / delta * chi2_red))
    icpt_se = float(np.sqrt(sxx / delta * chi2_red))
    t = t_critical(dof)
    flags = (FEW_DOF_FLAG,) if dof < 2 else ()
    return LineFit(float(slope), float(icpt), slope_se, icpt_se,
                   (float(slope - t * slope_se), float(slope + t * slope_se)),
                   (float(icpt - t * icpt_se), float(icpt + t * icpt_se)), n, dof, r2, method,
                   flags)


@dataclass(frozen=True)
class CoarseningFit:
    """LSW coarsening r̄³ − r̄0³ = K·t of one series (radii in nm, time in ``time_unit``)."""

    rate_nm3_per_unit: float
    rate_ci95_nm3_per_unit: tuple[float, float] | None
    initial_radius_cubed_nm3: float
    initial_radius_nm: float | None
    time_unit: str
    line: LineFit
    law: str = "LSW: r³ − r0³ = K·t (Lifshitz & Slyozov 1961; Wagner 1961)"

    def to_dict(self) -> dict:
        return {"law": self.law, "time_unit": self.time_unit,
                "rate_nm3_per_unit": self.rate_nm3_per_unit,
                "rate_ci95_nm3_per_unit": (None if self.rate_ci95_nm3_per_unit is None
                                           else list(self.rate_ci95_nm3_per_unit)),
                "initial_radius_cubed_nm3": self.initial_radius_cubed_nm3,
                "initial_radius_nm": self.initial_radius_nm, "fit": self.line.to_dict()}


def fit_lsw(time, mean_radius_nm, *, radius_se_nm=None, time_unit: str = "h") -> CoarseningFit:
    """Fit the LSW coarsening law r̄³ = r̄0³ + K·t to mean radii against time.

    Parameters
    ----------
    time : (n,) array_like
        Ageing times (any unit; named by ``time_unit``).
    mean_radius_nm : (n,) array_like
        Mean particle radius at each time, nm.
    radius_se_nm : (n,) array_like, optional
        Standard errors of the mean radii; weights the fit (σ(r³) = 3r²σ(r)).

    Returns
    -------
    CoarseningFit
        K in nm³ per time unit with its 95 % interval (Student t, n − 2 dof).

    References
    ----------
    .. [1] Lifshitz, I. M. & Slyozov, V. V. (1961) J. Phys. Chem. Solids 19, 35–50.
    .. [2] Wagner, C. (1961) Z. Elektrochem. 65, 581–591.
    """
    r = np.asarray(mean_radius_nm, float)
    se = None if radius_se_nm is None else 3.0 * r**2 * np.asarray(radius_se_nm, float)
    line = fit_line(time, r**3, y_se=se)
    r0c = line.intercept
    return CoarseningFit(line.slope, line.slope_ci95, r0c,
                         float(r0c ** (1 / 3)) if r0c > 0 else None, time_unit, line)


@dataclass(frozen=True)
class GrainGrowthFit:
    """Parabolic grain growth d² − d0² = k·t (d in µm, time in ``time_unit``)."""

    rate_um2_per_unit: float
    rate_ci95_um2_per_unit: tuple[float, float] | None
    initial_size_squared_um2: float
    initial_size_um: float | None
    time_unit: str
    line: LineFit
    law: str = "parabolic growth: d² − d0² = k·t (Burke & Turnbull 1952)"

    def to_dict(self) -> dict:
        return {"law": self.law, "time_unit": self.time_unit,
                "rate_um2_per_unit": self.rate_um2_per_unit,
                "rate_ci95_um2_per_unit": (None if self.rate_ci95_um2_per_unit is None
                                           else list(self.rate_ci95_um2_per_unit)),
                "initial_size_squared_um2": self.initial_size_squared_um2,
                "initial_size_um": self.initial_size_um, "fit": self.line.to_dict()}


def fit_parabolic_growth(time, size_um, *, size_se_um=None,
                         time_unit: str = "h") -> GrainGrowthFit:
    """Fit d² = d0² + k·t to grain sizes (e.g. mean lineal intercepts) against time.

    References
    ----------
    .. [1] Burke, J. E. & Turnbull, D. (1952) Prog. Metal Phys. 3, 220–292 (from memory).
    """
    d = np.asarray(size_um, float)
    se = None if size_se_um is None else 2.0 * d * np.asarray(size_se_um, float)
    line = fit_line(time, d**2, y_se=se)
    d0s = line.intercept
    return GrainGrowthFit(line.slope, line.slope_ci95, d0s,
                          float(np.sqrt(d0s)) if d0s > 0 else None, time_unit, line)
