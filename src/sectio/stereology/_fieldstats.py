"""Field-to-field statistics as ASTM E112, E1382, E562 and E1245 prescribe.

For n fields with per-field values x_i: mean, sample standard deviation s (n - 1), a
two-sided 95 % confidence half-width t(0.975, n - 1)·s/√n and the percent relative
accuracy %RA = 100·CI/mean. With a single field the same recipe is applied to
sub-regions of that field and the result is labelled as such.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np

from ..errors import DegenerateDataWarning

#: Unit suffixes recognised when building ``*_ci95*`` keys (``mean_intercept_um`` ->
#: ``mean_intercept_ci95_um``).
UNIT_SUFFIXES = ("_um2", "_um", "_nm", "_mm2", "_mm", "_pct", "_mpa")


def split_unit(name: str) -> tuple[str, str]:
    """Split ``'mean_intercept_um'`` into ``('mean_intercept', '_um')``."""
    for suffix in sorted(UNIT_SUFFIXES, key=len, reverse=True):
        # Densities ("particles_per_um2") keep their unit in the stem: particles_per_um2_ci95.
        if name.endswith(suffix) and not name.endswith("_per" + suffix):
            return name[: -len(suffix)], suffix
    return name, ""


def stat_key(name: str, stat: str) -> str:
    """Key for a statistic, the unit kept last: ``stat_key('mean_ecd_um', 'ci95')``."""
    stem, unit = split_unit(name)
    return f"{stem}_{stat}{unit}"


def t_critical(dof: int, confidence: float = 0.95) -> float:
    """Two-sided Student t critical value: the inverse of the t distribution function
    (``scipy.special.stdtrit``, the routine behind ``scipy.stats.t.ppf``; importing
    scipy.stats alone costs about half a second)."""
    from scipy.special import stdtrit

    return float(stdtrit(dof, 0.5 + confidence / 2.0))


@dataclass(frozen=True)
class FieldStats:
    """Mean, spread and confidence interval of one quantity over fields (or sub-regions)."""

    n: int
    mean: float
    sd: float
    se: float
    t: float
    ci95: tuple[float, float]
    relative_accuracy_pct: float
    basis: str  # "fields" or "sub-regions of one field"
    confidence_level: float = 0.95

    @property
    def half_width(self) -> float:
        return (self.ci95[1] - self.ci95[0]) / 2.0

    def fields_for_accuracy(self, target_pct: float = 10.0, max_fields: int = 10_000) -> int | None:
        """Smallest n with t(n-1)·s/(√n·mean) <= target (same s, same mean); None if unknown."""
        if not (self.mean and np.isfinite(self.sd)) or self.n < 2:
            return None
        if self.sd == 0:
            return 2
        cv = self.sd / abs(self.mean)
        for n in range(2, max_fields + 1):
            if 100.0 * t_critical(n - 1, self.confidence_level) * cv / math.sqrt(n) <= target_pct:
                return n
        return None


def field_statistics(values, *, confidence: float = 0.95, basis: str = "fields") -> FieldStats:
    """Mean, s, Student-t CI and % relative accuracy of per-field values.

    Parameters
    ----------
    values : sequence of float
        One value per field (non-finite values are dropped).
    confidence : float
        Two-sided confidence level.
    basis : str
        What the values are: ``"fields"`` or ``"sub-regions of one field"``.

    Returns
    -------
    FieldStats

    Notes
    -----
    CI = t(0.975, n − 1)·s/√n and %RA = 100·CI/x̄, the recipe of ASTM E112 and E562.

    References
    ----------
    .. [1] ASTM E112, Standard Test Methods for Determining Average Grain Size (§ statistics).
    .. [2] ASTM E562, Standard Test Method for Determining Volume Fraction by Systematic
       Manual Point Count.

    Examples
    --------
    >>> s = field_statistics([10.2, 9.6, 10.5, 9.9, 10.8])
    >>> round(s.mean, 2), round(s.half_width, 3), round(s.relative_accuracy_pct, 2)
    (10.2, 0.589, 5.77)
    """
    x = np.asarray([v for v in values if v is not None], dtype=float)
    x = x[np.isfinite(x)]
    n = int(x.size)
    if n == 0:
        nan = float("nan")
        return FieldStats(0, nan, nan, nan, nan, (nan, nan), nan, basis, confidence)
    mean = float(x.mean())
    if n == 1:
        warnings.warn(
            "Only one value: no confidence interval can be given; measure more fields.",
            DegenerateDataWarning,
            stacklevel=2,
        )
        nan = float("nan")
        return FieldStats(1, mean, nan, nan, nan, (nan, nan), nan, basis, confidence)
    sd = float(x.std(ddof=1))
    se = sd / math.sqrt(n)
    t = t_critical(n - 1, confidence)
    hw = t * se
    ra = 100.0 * hw / abs(mean) if mean != 0 else float("inf")
    return FieldStats(n, mean, sd, se, t, (mean - hw, mean + hw), ra, basis, confidence)


def stats_to_dict(name: str, s: FieldStats, *, target_pct: float = 10.0) -> dict:
    """JSON-ready keys for one quantity.

    ``stats_to_dict('mean_intercept_um', s)`` gives ``mean_intercept_um`` (the mean),
    ``mean_intercept_sd_um``, ``mean_intercept_se_um``, ``mean_intercept_ci95_um``,
    ``mean_intercept_relative_accuracy_pct`` and ``mean_intercept_fields_for_10pct``.
    The lower end of the interval is cut at zero (all our quantities are non-negative).
    """

    def f(v):
        return None if v is None or not np.isfinite(v) else float(v)

    stem, _ = split_unit(name)
    return {
        name: f(s.mean),
        stat_key(name, "sd"): f(s.sd),
        stat_key(name, "se"): f(s.se),
        # Every quantity summarised here is non-negative: a Student-t interval that
        # reaches below zero (few, scattered fields) is cut at zero (common practice).
        stat_key(name, "ci95"): [None if f(s.ci95[0]) is None else max(0.0, f(s.ci95[0])),
                                 f(s.ci95[1])],
        f"{stem}_relative_accuracy_pct": f(s.relative_accuracy_pct),
        f"{stem}_fields_for_{target_pct:g}pct": s.fields_for_accuracy(target_pct),
    }
