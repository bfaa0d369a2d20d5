"""Trend fits: checked against scipy and against synthetic series with known rate constants."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import optimize, stats

from sectio.errors import DegenerateDataWarning, OptionError
from sectio.study import fit_line, fit_lsw, fit_parabolic_growth


def test_ols_matches_scipy_linregress():
    rng = np.random.default_rng(1)
    x = np.array([1.0, 2, 4, 8, 16, 32])
    y = 3.0 + 0.7 * x + rng.normal(0, 0.5, x.size)
    f = fit_line(x, y)
    ref = stats.linregress(x, y)  # scipy computes the same OLS line independently
    assert f.method == "ols"
    assert f.slope == pytest.approx(ref.slope, rel=1e-12)
    assert f.intercept == pytest.approx(ref.intercept, rel=1e-12)
    assert f.slope_se == pytest.approx(ref.stderr, rel=1e-10)
    assert f.intercept_se == pytest.approx(ref.intercept_stderr, rel=1e-10)
    assert f.r_squared == pytest.approx(ref.rvalue**2, rel=1e-12)
    t = stats.t.ppf(0.975, x.size - 2)
    assert f.slope_ci95 == pytest.approx((ref.slope - t * ref.stderr,
                                          ref.slope + t * ref.stderr), rel=1e-10)


def test_wls_matches_scipy_curve_fit_relative_sigma():
    rng = np.random.default_rng(2)
    x = np.linspace(0, 10, 7)
    se = np.array([0.2, 0.3, 0.5, 0.4, 0.8, 1.0, 0.6])
    y = 1.5 + 2.0 * x + rng.normal(0, se)
    f = fit_line(x, y, y_se=se)
    # scipy.optimize.curve_fit with sigma and absolute_sigma=False scales the covariance by
    # the reduced chi-square, as fit_line documents.
    p, cov = optimize.curve_fit(lambda t, a, b: a + b * t, x, y, sigma=se, absolute_sigma=False)
    assert f.method == "wls"
    assert (f.intercept, f.slope) == pytest.approx(tuple(p), rel=1e-6)  # LM iterates
    assert f.slope_se == pytest.approx(np.sqrt(cov[1, 1]), rel=1e-6)
    assert f.intercept_se == pytest.approx(np.sqrt(cov[0, 0]), rel=1e-6)


def test_lsw_recovers_known_rate_exactly_without_noise():
    # r^3 = r0^3 + K t exactly (LSW law, Lifshitz & Slyozov 1961; Wagner 1961)
    t = np.array([4.0, 16.0, 64.0, 128.0])
    r = (30.0**3 + 11_000.0 * t) ** (1 / 3)
    fit = fit_lsw(t, r, time_unit="h")
    assert fit.rate_nm3_per_unit == pytest.approx(11_000.0, rel=1e-9)
    assert fit.initial_radius_nm == pytest.approx(30.0, rel=1e-6)
    lo, hi = fit.rate_ci95_nm3_per_unit
    assert hi - lo == pytest.approx(0.0, abs=1e-6)


def test_lsw_interval_covers_true_rate_about_95_percent():
    """Synthetic series with known K and noisy radii: the 95 % interval of K should contain
    the true K in about 95 % of repeats (binomial band for 400 repeats: 0.92-0.98)."""
    rng = np.random.default_rng(3)
    t = np.array([2.0, 4, 8, 16, 32, 64])
    k_true, r0 = 8_000.0, 25.0
    y_true = r0**3 + k_true * t
    hits = 0
    n_rep = 400
    for _ in range(n_rep):
        y = y_true + rng.normal(0, 20_000.0, t.size)  # equal noise on r^3: OLS is exact
        fit = fit_lsw(t, np.cbrt(y))
        lo, hi = fit.rate_ci95_nm3_per_unit
        hits += lo <= k_true <= hi
    assert 0.92 <= hits / n_rep <= 0.98


def test_weighted_lsw_uses_propagated_radius_errors():
    t = np.array([4.0, 16.0, 64.0])
    r = np.array([42.0, 60.0, 90.0])
    se_r = np.array([1.0, 1.5, 4.0])
    fit = fit_lsw(t, r, radius_se_nm=se_r)
    # sigma(r^3) = 3 r^2 sigma(r) (first-order propagation); compare with curve_fit.
    p, _ = optimize.curve_fit(lambda x, a, b: a + b * x, t, r**3, sigma=3 * r**2 * se_r)
    assert fit.line.method == "wls"
    assert fit.rate_nm3_per_unit == pytest.approx(p[1], rel=1e-6)


def test_parabolic_growth_known_rate():
    # d^2 - d0^2 = k t (Burke & Turnbull 1952, from memory) with d0 = 10 um, k = 50 um^2/h
    t = np.array([1.0, 2.0, 4.0, 8.0])
    d = np.sqrt(100.0 + 50.0 * t)
    fit = fit_parabolic_growth(t, d, time_unit="h")
    assert fit.rate_um2_per_unit == pytest.approx(50.0, rel=1e-9)
    assert fit.initial_size_um == pytest.approx(10.0, rel=1e-9)
    assert fit.to_dict()["time_unit"] == "h"


def test_two_points_warn_and_give_no_interval():
    with pytest.warns(DegenerateDataWarning, match="two points fix a line"):
        f = fit_line([1.0, 2.0], [3.0, 5.0])
    assert f.slope == pytest.approx(2.0) and f.slope_ci95 is None


def test_fit_line_errors():
    with pytest.raises(OptionError, match="at least two different values"):
        fit_line([1.0, 1.0, 1.0], [1.0, 2.0, 3.0])
    with pytest.raises(OptionError, match="same length"):
        fit_line([1.0, 2.0], [1.0, 2.0, 3.0])


def test_three_point_fit_is_flagged_for_its_one_residual_dof():
    # Three points, two parameters: one residual degree of freedom; R² near 1 means
    # nothing, so the fit carries the flag (and the interval t(0.975, 1) = 12.71).
    from scipy import stats

    from sectio.study._trends import FEW_DOF_FLAG

    f = fit_line([4.0, 16.0, 64.0], [1.0e5, 2.1e5, 7.9e5])
    assert f.dof == 1 and FEW_DOF_FLAG in f.flags
    half = (f.slope_ci95[1] - f.slope_ci95[0]) / 2
    assert half == pytest.approx(stats.t.ppf(0.975, 1) * f.slope_se)
    assert fit_line([1.0, 2.0, 3.0, 4.0], [1.0, 2.2, 2.9, 4.1]).flags == ()
    assert f.to_dict()["flags"] == [FEW_DOF_FLAG]
