"""Monte Carlo propagation against first-order (GUM) propagation and exact distributions."""

import numpy as np
import pytest
from scipy import stats
from uncertainties import ufloat, umath

from sectio.errors import OptionError
from sectio.strength import UncertainInput, estimate_from_summaries, first_order_sd, propagate


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
    with pytest.raises(OptionError, match="--draws must be at least 1000"):
        propagate(_hp_model, HP_INPUTS, draws=10)


def test_estimate_hp_only_agrees_with_first_order():
    # The full prediction path (grains summary -> YieldEstimate) against `uncertainties`.
    est = estimate_from_summaries(
        {"n_fields": 400, "mean_intercept_um": 20.0, "mean_intercept_se_um": 0.4},
        None, material="cu-pure", seed=0, draws=20000)
    dof = 399.0
    s0, k = ufloat(25.0, 5.0), ufloat(0.13, 0.02)  # shipped cu-pure constants
    d = ufloat(20.0, 0.4 * np.sqrt(dof / (dof - 2)))
    fo = s0 + k / umath.sqrt(d * 1e-6)
    z = stats.norm.ppf(0.975)
    lo, hi = est.yield_ci95_mpa
    width = 2 * z * fo.std_dev
    assert abs(lo - (fo.nominal_value - z * fo.std_dev)) < 0.02 * width
    assert abs(hi - (fo.nominal_value + z * fo.std_dev)) < 0.02 * width
    assert est.monte_carlo["first_order_sd_mpa"] == pytest.approx(fo.std_dev, rel=1e-5)
