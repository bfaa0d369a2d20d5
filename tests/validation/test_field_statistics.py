"""Field-to-field statistics against REFERENCES.md §1.6 (E112/E1382 recipe) and §2 (E562).

The recipe (mean, s with n − 1, CI = t(0.975, n − 1)·s/√n, %RA = 100·CI/mean; G from the
mean intercept and its CI by converting the intercept end points) is stated in REFERENCES
§1.6 (E112/E1382/E562 practice; the G-from-mean rule is "from memory" there). The worked
examples and the t table were computed for that sheet with scipy.stats and agree with
standard printed tables.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from sectio.errors import DegenerateDataWarning
from sectio.grains import summarize_grains
from sectio.stereology import (
    astm_g_from_grains_per_mm2,
    astm_g_from_intercept_um,
    field_statistics,
    stats_to_dict,
    t_critical,
)

# REFERENCES §1.6 Student t, two-sided 95 %, df = n − 1 (3 decimals).
T_TABLE = {
    2: 12.706, 3: 4.303, 4: 3.182, 5: 2.776, 6: 2.571, 8: 2.365, 10: 2.262, 12: 2.201,
    15: 2.145, 20: 2.093, 25: 2.064, 30: 2.045, 50: 2.010, 100: 1.984,
}


@pytest.mark.parametrize("n, t", sorted(T_TABLE.items()))
def test_t_table(n, t):
    # REFERENCES §1.6 t table (values rounded to 3 decimals → ±0.0006)
    assert t_critical(n - 1) == pytest.approx(t, abs=6e-4)


def _field(l_um: float, n_a: float, count: int = 400, grains: int = 120) -> dict:
    """The keys of a field dict that summarize_grains reads."""
    return {
        "mean_intercept_um": l_um,
        "grains_per_mm2": n_a,
        "intercept_count": count,
        "grain_count": grains,
        "subregion_intercepts_um": [l_um] * 9,
    }


FIVE_FIELDS_UM = [10.2, 9.6, 10.5, 9.9, 10.8]  # REFERENCES §1.6 worked example


def test_five_field_example_through_summarize_grains():
    n_a = [4000.0, 4400.0, 3900.0, 4100.0, 4300.0]
    s = summarize_grains([_field(li, na) for li, na in zip(FIVE_FIELDS_UM, n_a, strict=True)])
    # REFERENCES §1.6 worked example: mean 10.20 µm, s 0.474, t 2.776, CI ±0.589 µm,
    # %RA 5.77 %, G(mean) 9.94, G 95 % CI [9.78, 10.11]; tolerance ±1 in the last digit.
    assert s["n_fields"] == 5 and s["ci_basis"] == "fields" and s["dof"] == 4
    assert s["mean_intercept_um"] == pytest.approx(10.20, abs=0.01)
    assert s["mean_intercept_sd_um"] == pytest.approx(0.474, abs=0.001)
    assert s["t_value"] == pytest.approx(2.776, abs=0.001)
    lo, hi = s["mean_intercept_ci95_um"]
    assert (hi - lo) / 2 == pytest.approx(0.589, abs=0.001)
    assert (hi + lo) / 2 == pytest.approx(10.20, abs=1e-9)  # symmetric about the mean
    assert s["relative_accuracy_pct"] == pytest.approx(5.77, abs=0.01)
    assert s["astm_g"] == pytest.approx(9.94, abs=0.01)
    g_lo, g_hi = s["astm_g_ci95"]
    assert g_lo == pytest.approx(9.78, abs=0.01)
    assert g_hi == pytest.approx(10.11, abs=0.01)
    # §1.6: G from the mean intercept (not the mean of per-field G) and the G interval from
    # the intercept interval's end points, the upper ℓ̄ giving the lower G.
    assert s["astm_g"] == pytest.approx(float(astm_g_from_intercept_um(10.20)), abs=1e-12)
    assert g_lo == pytest.approx(float(astm_g_from_intercept_um(hi)), abs=1e-12)
    assert g_hi == pytest.approx(float(astm_g_from_intercept_um(lo)), abs=1e-12)
    # planimetric side: same recipe on N_A, G from the mean N_A (E112 1d)
    assert s["grains_per_mm2"] == pytest.approx(np.mean(n_a))
    assert s["astm_g_planimetric"] == pytest.approx(
        float(astm_g_from_grains_per_mm2(np.mean(n_a))), abs=1e-12
    )
    hw_na = stats.t.ppf(0.975, 4) * np.std(n_a, ddof=1) / math.sqrt(5)  # scipy, §1.6 recipe
    lo_na, hi_na = s["grains_per_mm2_ci95"]
    assert (hi_na - lo_na) / 2 == pytest.approx(hw_na, rel=1e-9)
    assert s["intercept_count_total"] == 5 * 400 and s["grain_count_total"] == 5 * 120


def test_one_field_uses_its_subregions():
    # REFERENCES §1.6 recipe applied to the 3 × 3 sub-regions of one field; the interval is
    # centred on the whole-field value and labelled as coming from sub-regions.
    sub = [9.1, 10.4, 9.8, 10.9, 9.5, 10.1, 10.6, 9.3, 10.0]
    d = _field(10.05, 4100.0)
    d["subregion_intercepts_um"] = sub
    s = summarize_grains([d])
    assert s["n_fields"] == 1 and s["ci_basis"] == "sub-regions of one field"
    hw = stats.t.ppf(0.975, len(sub) - 1) * np.std(sub, ddof=1) / math.sqrt(len(sub))
    lo, hi = s["mean_intercept_ci95_um"]
    assert (hi - lo) / 2 == pytest.approx(hw, rel=1e-9)
    assert (hi + lo) / 2 == pytest.approx(10.05, rel=1e-12)
    assert s["relative_accuracy_pct"] == pytest.approx(100 * hw / 10.05, rel=1e-9)
    assert s["fields_for_10pct_relative_accuracy"] is None  # not a between-field spread


def test_e562_point_count_example():
    # REFERENCES §2 worked example (E562): 100 points per field, hits 12, 9, 11, 10, 13, 8,
    # 11, 10, 12, 9.5 → P̄_P 0.1055, s 0.0154, t 2.262, CI ±0.0110, %RA 10.4
    # (tolerance ±0.0005 on P̄_P, ±0.1 on %RA).
    hits = [12, 9, 11, 10, 13, 8, 11, 10, 12, 9.5]
    s = field_statistics([h / 100 for h in hits])
    assert s.n == 10 and s.basis == "fields"
    assert s.mean == pytest.approx(0.1055, abs=5e-4)
    assert s.sd == pytest.approx(0.0154, abs=1e-4)
    assert s.t == pytest.approx(2.262, abs=1e-3)
    assert s.half_width == pytest.approx(0.0110, abs=1e-4)
    assert s.relative_accuracy_pct == pytest.approx(10.4, abs=0.1)
    assert s.se == pytest.approx(s.sd / math.sqrt(10))


def test_field_statistics_matches_scipy_on_random_data():
    # scipy.stats.t.interval computes the same two-sided Student interval another way.
    rng = np.random.default_rng(7)
    for n in (2, 3, 7, 31):
        x = rng.lognormal(1.0, 0.3, n)
        s = field_statistics(x)
        lo, hi = stats.t.interval(0.95, n - 1, loc=x.mean(), scale=stats.sem(x))
        assert s.ci95 == pytest.approx((lo, hi), rel=1e-10)
        s90 = field_statistics(x, confidence=0.90)
        lo90, hi90 = stats.t.interval(0.90, n - 1, loc=x.mean(), scale=stats.sem(x))
        assert s90.ci95 == pytest.approx((lo90, hi90), rel=1e-10)


def test_nonfinite_values_are_dropped_and_one_value_warns():
    s = field_statistics([10.0, float("nan"), 12.0, None, float("inf")])
    assert s.n == 2 and s.mean == pytest.approx(11.0)
    with pytest.warns(DegenerateDataWarning, match="Only one value"):
        one = field_statistics([5.0])
    assert one.n == 1 and one.mean == 5.0 and math.isnan(one.half_width)
    assert field_statistics([]).n == 0


def _ra(n: int, cv: float) -> float:
    """%RA for n fields at a coefficient of variation cv (REFERENCES §1.6, scipy t)."""
    return 100 * stats.t.ppf(0.975, n - 1) * cv / math.sqrt(n)


def test_fields_for_accuracy_matches_the_definition():
    s = field_statistics(FIVE_FIELDS_UM)
    cv = s.sd / s.mean
    previous = None
    for target in (20.0, 10.0, 5.0, 3.0, 2.0, 1.0):
        n = s.fields_for_accuracy(target)
        assert n is not None and n >= 2
        # smallest n with t(n−1)·s/(√n·mean) ≤ target, by the §1.6 definition
        assert _ra(n, cv) <= target
        if n > 2:
            assert _ra(n - 1, cv) > target
        if previous is not None:
            assert n >= previous  # a tighter target never needs fewer fields
        previous = n
    # this specimen already reaches 5.77 % with 5 fields → 10 % needs at most 5
    assert s.fields_for_accuracy(10.0) <= 5
    assert field_statistics([3.0, 3.0, 3.0]).fields_for_accuracy(10.0) == 2  # no spread
    assert field_statistics([1.0, 100.0]).fields_for_accuracy(0.01, max_fields=50) is None


def test_stats_to_dict_keys_keep_the_unit_last():
    s = field_statistics(FIVE_FIELDS_UM)
    d = stats_to_dict("mean_intercept_um", s)
    # DESIGN.md convention: *_ci95* keys with the unit last; values from the same FieldStats
    assert d["mean_intercept_um"] == pytest.approx(10.2)
    assert d["mean_intercept_ci95_um"] == pytest.approx(list(s.ci95))
    assert d["mean_intercept_sd_um"] == pytest.approx(s.sd)
    assert d["mean_intercept_relative_accuracy_pct"] == pytest.approx(5.77, abs=0.01)
    assert d["mean_intercept_fields_for_10pct"] == s.fields_for_accuracy(10.0)
