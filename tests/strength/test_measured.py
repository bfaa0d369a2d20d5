"""Reading grains/particles summaries, with the se-from-CI fallback (Student t)."""

import pytest
from scipy import stats

from sectio.errors import DegenerateDataWarning
from sectio.strength import SummaryError, grain_intercept_um, particle_measurements


def test_se_given():
    mv = grain_intercept_um({"n_fields": 5, "mean_intercept_um": 10.2, "mean_intercept_se_um": 0.2})
    assert (mv.value, mv.se, mv.dof) == (10.2, 0.2, 4.0)


def test_se_from_ci_uses_t():
    # REFERENCES §1.6: 5-field example, mean 10.20, CI ±0.589 with t(0.975, 4) = 2.776.
    mv = grain_intercept_um({"n_fields": 5, "mean_intercept_um": 10.20,
                             "mean_intercept_ci95_um": [10.20 - 0.589, 10.20 + 0.589]})
    assert mv.se == pytest.approx(0.589 / stats.t.ppf(0.975, 4), rel=1e-12)
    assert mv.se == pytest.approx(0.2122, abs=1e-3)
    assert "t(0.975, 4)" in mv.source


def test_explicit_dof_wins():
    mv = grain_intercept_um({"n_fields": 5, "dof": 9, "mean_intercept_um": 10.0,
                             "mean_intercept_ci95_um": [9.0, 11.0]})
    assert mv.dof == 9.0
    assert mv.se == pytest.approx(1.0 / stats.t.ppf(0.975, 9))


def test_single_field_warns_and_has_no_uncertainty():
    with pytest.warns(DegenerateDataWarning, match="single field"):
        mv = grain_intercept_um({"n_fields": 1, "mean_intercept_um": 10.0})
    assert mv.se == 0.0 and mv.dof is None


def test_particles_units():
    p = particle_measurements({"n_fields": 4, "area_fraction": 0.01, "area_fraction_se": 0.001,
                               "mean_ecd_um": 0.02, "mean_ecd_se_um": 0.002,
                               "particles_per_um2": 30.0, "particles_per_um2_se": 3.0,
                               "mean_sphere_diameter_um": 0.025})
    assert p.mean_section_diameter_nm.value == pytest.approx(20.0)
    assert p.mean_section_diameter_nm.se == pytest.approx(2.0)
    assert p.sections_per_nm2.value == pytest.approx(3.0e-5)
    assert p.sphere_diameter_nm.value == pytest.approx(25.0)
    assert p.sphere_diameter_nm.se == 0.0


@pytest.mark.parametrize(
    ("summary", "match"),
    [({"n_fields": 3}, "no 'mean_intercept_um'"),
     ({"n_fields": 3, "mean_intercept_um": "abc"}, "is not a number"),
     ({"n_fields": 3, "mean_intercept_um": -2.0}, "must be positive"),
     ({"n_fields": 3, "mean_intercept_um": 2.0, "mean_intercept_se_um": -1},
      "non-negative number")],
)
def test_grain_errors(summary, match):
    with pytest.raises(SummaryError, match=match):
        grain_intercept_um(summary)


def test_fraction_must_be_below_one():
    with pytest.raises(SummaryError, match="'area_fraction' must be between 0 and 1"):
        particle_measurements({"n_fields": 3, "area_fraction": 1.5, "mean_ecd_um": 0.1})
