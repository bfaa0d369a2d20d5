"""Monte Carlo propagation against first-order (GUM) propagation and exact distributions."""

from dataclasses import replace

import numpy as np
import pytest
from scipy import stats
from uncertainties import ufloat, umath

from sectio.errors import OptionError
from sectio.strength import (
    Quantity,
    UncertainInput,
    estimate_from_summaries,
    first_order_sd,
    get_material,
    propagate,
)


def _hp_model(v):
    gb = v["k"] / np.sqrt(v["d_um"] * 1e-6)
    return {"gb": gb, "total": v["s0"] + gb}


HP_INPUTS = [UncertainInput("s0", 70.0, 5.0, "test"),
             UncertainInput("k", 0.55, 0.02, "test"),
             UncertainInput("d_um", 20.0, 0.4, "test")]


def test_first_order_matches_uncertainties_package():
    # First-order propagation checked with the `uncertainties` package (linear error theory).
    s0, k, d = ufloat(70.0, 5.0), ufloat(0.55, 0.02), ufloat(20.0, 0.4)
    expected = s0 + k / umath.sqrt(d * 1e-6)
    got = first_order_sd(lambda v: _hp_model(v)["total"], HP_INPUTS)
    assert got == pytest.approx(expected.std_dev, rel=1e-6)


def test_mc_interval_matches_first_order_within_2pct_of_width():
    # Near-linear Hall–Petch case: MC 2.5/97.5 percentiles vs mean ± 1.96·u (uncertainties).
    s0, k, d = ufloat(70.0, 5.0), ufloat(0.55, 0.02), ufloat(20.0, 0.4)
    fo = s0 + k / umath.sqrt(d * 1e-6)
    z = stats.norm.ppf(0.975)
    lo_fo, hi_fo = fo.nominal_value - z * fo.std_dev, fo.nominal_value + z * fo.std_dev
    res = propagate(_hp_model, HP_INPUTS, draws=20000, seed=3)
    lo, hi = res.summary("total")["ci95"]
    width = hi_fo - lo_fo
    assert abs(lo - lo_fo) < 0.02 * width
    assert abs(hi - hi_fo) < 0.02 * width


def test_variance_shares_match_first_order_shares():
    # GUM shares c_i²u_i²/Σ for the same model, by hand: c_s0 = 1, c_k = d^-1/2,
    # c_d = -k/2·d^-3/2 (d in m).
    d_m = 20e-6
    parts = {"s0": 5.0 ** 2, "k": (0.02 / np.sqrt(d_m)) ** 2,
             "d_um": (0.55 / 2 * d_m ** -1.5 * 0.4e-6) ** 2}
    total = sum(parts.values())
    res = propagate(_hp_model, HP_INPUTS, draws=20000, seed=1)
    for name, var in parts.items():
        assert res.variance_share[name] == pytest.approx(var / total, abs=0.02)
    assert sum(res.variance_share.values()) == pytest.approx(1.0)


def test_student_t_quantile():
    # A mean over 5 fields: t(4) scaled by se; 97.5 % point = value + se·t.ppf(0.975, 4).
    inp = [UncertainInput("x", 10.0, 0.5, "test", dof=4.0)]
    res = propagate(lambda v: {"total": v["x"]}, inp, draws=40000, seed=0)
    lo, hi = res.summary("total")["ci95"]
    half = 0.5 * stats.t.ppf(0.975, 4)
    assert hi - 10.0 == pytest.approx(half, rel=0.03)
    assert 10.0 - lo == pytest.approx(half, rel=0.03)


def test_seeded_and_deterministic():
    a = propagate(_hp_model, HP_INPUTS, draws=5000, seed=7)
    b = propagate(_hp_model, HP_INPUTS, draws=5000, seed=7)
    c = propagate(_hp_model, HP_INPUTS, draws=5000, seed=8)
    assert np.array_equal(a.outputs["total"], b.outputs["total"])
    assert not np.array_equal(a.outputs["total"], c.outputs["total"])


def test_positive_inputs_truncated():
    # Normal(1, 1) truncated at zero: P(Z < -1) = 0.1587 of the draws are redrawn.
    res = propagate(lambda v: {"total": v["x"]}, [UncertainInput("x", 1.0, 1.0, "t")],
                    draws=20000, seed=0)
    assert res.outputs["total"].min() > 0
    assert res.truncated_fraction["x"] == pytest.approx(stats.norm.cdf(-1), abs=0.01)


def test_too_few_draws():
    with pytest.raises(OptionError, match=r"--draws 10 is outside the allowed range \[1000, "):
        propagate(_hp_model, HP_INPUTS, draws=10)
    with pytest.raises(OptionError, match=r"--draws 1000000000 is outside the allowed range"):
        propagate(_hp_model, HP_INPUTS, draws=10**9)
    with pytest.raises(OptionError, match=r"--seed -1 is outside the allowed range \[0, "):
        propagate(_hp_model, HP_INPUTS, seed=-1)


def test_estimate_hp_only_agrees_with_first_order():
    # The full prediction path (grains summary -> YieldEstimate) against `uncertainties`.
    cu = get_material("cu-pure")
    normal_cu = replace(cu, sigma0_mpa=Quantity(25.0, 5.0, "test"),
                        k_mpa_sqrt_m=Quantity(0.13, 0.02, "test"), sigma0_k_correlation=0.0)
    est = estimate_from_summaries(
        {"n_fields": 400, "mean_intercept_um": 20.0, "mean_intercept_se_um": 0.4},
        None, material=normal_cu, seed=0, draws=20000)
    dof = 399.0
    s0, k = ufloat(25.0, 5.0), ufloat(0.13, 0.02)  # normal, independent constants
    d = ufloat(20.0, 0.4 * np.sqrt(dof / (dof - 2)))
    fo = s0 + k / umath.sqrt(d * 1e-6)
    z = stats.norm.ppf(0.975)
    lo, hi = est.yield_ci95_mpa
    width = 2 * z * fo.std_dev
    assert abs(lo - (fo.nominal_value - z * fo.std_dev)) < 0.02 * width
    assert abs(hi - (fo.nominal_value + z * fo.std_dev)) < 0.02 * width
    assert est.monte_carlo["first_order_sd_mpa"] == pytest.approx(fo.std_dev, rel=1e-5)


def _correlated_fit():
    # Six specimens on a Hall–Petch line with scatter: σ0 and k of an OLS fit are strongly
    # anti-correlated (all x = d^-1/2 lie far from 0).
    from sectio.strength import fit_hall_petch

    d = np.array([8.0, 12.0, 18.0, 27.0, 40.0, 60.0])
    y = 70.0 + 0.55 / np.sqrt(d * 1e-6) + np.array([4.0, -6.0, 3.0, 5.0, -4.0, -2.0])
    return fit_hall_petch(d, y)


def test_fit_covariance_enters_the_monte_carlo():
    # Reference: first-order propagation with the fit covariance by the `uncertainties`
    # package (correlated_values); the MC 95 % width must be within 5 % of 2·1.96·u.
    from uncertainties import correlated_values

    fit = _correlated_fit()
    doc = fit.to_dict()
    rho = doc["covariance"][0][1] / np.sqrt(doc["covariance"][0][0] * doc["covariance"][1][1])
    assert rho < -0.9
    summary = {"n_fields": 10, "mean_intercept_um": 20.0, "mean_intercept_se_um": 0.5}
    est = estimate_from_summaries(summary, None, material="steel-ferritic-lowc",
                                  hall_petch_fit=doc, draws=40000, seed=5)
    s0, k = correlated_values([fit.sigma0_mpa, fit.k_mpa_sqrt_m], np.array(doc["covariance"]))
    dof = 9.0
    d = ufloat(20.0, 0.5 * np.sqrt(dof / (dof - 2)))
    fo = s0 + k / umath.sqrt(d * 1e-6)
    lo, hi = est.yield_ci95_mpa
    width_fo = 2 * stats.norm.ppf(0.975) * fo.std_dev
    assert abs((hi - lo) - width_fo) < 0.05 * width_fo
    assert est.monte_carlo["first_order_sd_mpa"] == pytest.approx(fo.std_dev, rel=1e-4)
    assert est.monte_carlo["correlations"][0]["r"] == pytest.approx(rho)
    # Drawing σ0 and k independently (the old behaviour) would give a far wider interval.
    s0_i, k_i = ufloat(fit.sigma0_mpa, fit.sigma0_se_mpa), ufloat(fit.k_mpa_sqrt_m,
                                                                  fit.k_se_mpa_sqrt_m)
    assert (s0_i + k_i / umath.sqrt(d * 1e-6)).std_dev > 1.5 * fo.std_dev


def test_correlated_draws_have_the_given_correlation():
    inp = [UncertainInput("a", 10.0, 1.0, "t"), UncertainInput("b", 5.0, 0.5, "t"),
           UncertainInput("c", 1.0, 0.1, "t", lognormal=True)]
    res = propagate(lambda v: {"total": v["a"] + v["b"], "a": v["a"], "b": v["b"]}, inp,
                    draws=40000, seed=1, correlations={("a", "b"): -0.8})
    r = np.corrcoef(res.outputs["a"], res.outputs["b"])[0, 1]
    assert r == pytest.approx(-0.8, abs=0.01)
    # Var(a + b) = 1 + 0.25 + 2·(−0.8)·0.5 = 0.45
    assert np.var(res.outputs["total"]) == pytest.approx(0.45, rel=0.03)
    with pytest.raises(OptionError, match="lie in"):
        propagate(lambda v: {"total": v["a"]}, inp, correlations={("a", "b"): 1.5})
    with pytest.raises(OptionError, match="name two different inputs"):
        propagate(lambda v: {"total": v["a"]}, inp, correlations={("a", "z"): 0.5})
    with pytest.raises(OptionError, match="only normal or log-normal"):
        propagate(lambda v: {"total": v["t"]}, [UncertainInput("t", 1.0, 0.1, "t", dof=3.0),
                                                inp[0]], correlations={("t", "a"): 0.5})


def test_missing_terms_are_said():
    grains = {"n_fields": 10, "mean_intercept_um": 20.0, "mean_intercept_se_um": 0.5}
    parts = {"n_fields": 10, "area_fraction": 0.01, "area_fraction_se": 0.001,
             "mean_ecd_um": 0.05, "mean_ecd_se_um": 0.002}
    only_particles = estimate_from_summaries(None, parts, material="steel-ferritic-lowc",
                                             draws=2000)
    doc = only_particles.to_dict()
    assert doc["inputs"]["terms"]["missing"] == ["grain_boundary"]
    assert "no_grain_boundary_term" in doc["flags"]
    assert any("grain-boundary term" in a for a in doc["assumptions"])
    only_grains = estimate_from_summaries(grains, None, material="cu-pure", draws=2000)
    assert only_grains.to_dict()["inputs"]["terms"] == {
        "included": ["sigma0", "grain_boundary"], "missing": ["particle"]}
    assert any("Orowan" in a for a in only_grains.assumptions)
