"""End-to-end yield estimates from summary dicts (Hall–Petch + Orowan + superposition)."""

import json
import math

import pytest

from sectio.errors import ExtrapolationWarning, OptionError
from sectio.strength import (
    CAUTION,
    SummaryError,
    estimate_from_summaries,
    hall_petch_mpa,
    load_materials,
    orowan_ashby_mpa,
    orowan_classic_mpa,
    orowan_line_tension_mpa,
    superpose,
)

GRAINS = {"n_fields": 10, "mean_intercept_um": 12.0, "mean_intercept_ci95_um": [11.0, 13.0],
          "astm_g": 9.4}
PARTICLES = {"n_fields": 10, "area_fraction": 0.002, "area_fraction_ci95": [0.0017, 0.0023],
             "mean_ecd_um": 0.008, "mean_ecd_ci95_um": [0.007, 0.009],
             "particles_per_um2": 20.0, "particles_per_um2_ci95": [17.0, 23.0]}
STEEL = load_materials()["steel-ferritic-lowc"]
DRAWS = 4000


def est(grains=GRAINS, particles=None, **kw):
    kw.setdefault("draws", DRAWS)
    return estimate_from_summaries(grains, particles, material=kw.pop("material",
                                                                      "steel-ferritic-lowc"), **kw)


def test_hall_petch_only_central_value_is_the_formula():
    e = est()
    expected = hall_petch_mpa(12.0, sigma0_mpa=70.0, k_mpa_sqrt_m=0.55)  # Hall 1951; Petch 1953
    assert e.yield_mpa["at_central_inputs"] == pytest.approx(expected, rel=1e-12)
    assert abs(e.median_mpa - expected) < 0.02 * expected  # near-linear, median ≈ central
    lo, hi = e.yield_ci95_mpa
    assert lo < e.median_mpa < hi
    d = e.to_dict()
    hp = d["inputs"]["hall_petch"]
    assert hp["grain_size_convention"] == "mean_lineal_intercept"
    assert hp["grain_size_um"] == 12.0 and hp["sigma0_mpa"] == 70.0


def test_convention_switch_does_not_change_the_estimate():
    # REFERENCES §10 #10: d = 1.5·ℓ̄ with k·√1.5 gives the same σ; output records which d.
    a, b = est(seed=4), est(seed=4, grain_size_convention="sphere_diameter")
    assert b.median_mpa == pytest.approx(a.median_mpa, rel=1e-12)
    hp = b.to_dict()["inputs"]["hall_petch"]
    assert hp["grain_size_um"] == pytest.approx(18.0)
    assert hp["grain_size_conversion"]["factor_to_mean_intercept"] == 1.5
    assert "Gerlt" in hp["grain_size_conversion"]["source"]
    assert hp["k_mpa_sqrt_m"] == pytest.approx(0.55 * math.sqrt(1.5))


def test_material_with_diameter_convention_converts_the_intercept(tmp_path):
    # k fitted on D = 1.5·ℓ̄: the measured ℓ̄ is converted, σ = σ0 + k·(1.5ℓ̄)^-½.
    path = tmp_path / "m.toml"
    path.write_text('[d-steel]\nbase = "steel-ferritic-lowc"\n'
                    'grain_size_convention = "sphere_diameter"\n', encoding="utf-8")
    e = estimate_from_summaries(GRAINS, None, material="d-steel", materials_file=path,
                                draws=DRAWS)
    expected = hall_petch_mpa(1.5 * 12.0, sigma0_mpa=70.0, k_mpa_sqrt_m=0.55)
    assert e.yield_mpa["at_central_inputs"] == pytest.approx(expected, rel=1e-12)
    assert e.inputs["hall_petch"]["grain_size_um"] == pytest.approx(18.0)


@pytest.mark.parametrize("form", ["classic", "line_tension", "ashby_orowan"])
def test_orowan_term_from_planar_measurements(form):
    e = est(particles=PARTICLES, orowan_form=form)
    n_a_nm2, d_nm = 20.0e-6, 8.0
    lam = 1 / math.sqrt(n_a_nm2) - d_nm  # edge-to-edge, square lattice (Ardell 1985)
    g, b, m, nu = 81.0, 0.248, 2.75, 0.293  # shipped steel-ferritic-lowc
    expected = {
        "classic": orowan_classic_mpa(taylor_factor=m, shear_modulus_gpa=g, burgers_nm=b,
                                      spacing_nm=lam),
        "line_tension": orowan_line_tension_mpa(taylor_factor=m, shear_modulus_gpa=g,
                                                burgers_nm=b, poisson_ratio=nu,
                                                planar_radius_nm=d_nm / 2, spacing_nm=lam),
        "ashby_orowan": orowan_ashby_mpa(volume_fraction=0.002, particle_diameter_nm=d_nm,
                                         shear_modulus_gpa=g, burgers_nm=b),
    }[form]
    orow = e.contributions_mpa["orowan"]["at_central_inputs"]
    assert orow == pytest.approx(float(expected), rel=1e-12)
    rec = e.to_dict()["inputs"]["orowan"]
    assert rec["form"] == form
    if form != "ashby_orowan":
        assert rec["spacing_nm"] == pytest.approx(lam)
        assert "N_A^(-1/2) − d_planar" in rec["spacing_formula"]
    hp = hall_petch_mpa(12.0, sigma0_mpa=70.0, k_mpa_sqrt_m=0.55)
    assert e.yield_mpa["at_central_inputs"] == pytest.approx(hp + orow, rel=1e-12)


def test_spheres_geometry_matches_reference_line_tension():
    # Spheres r = 5 nm (from mean section diameter (π/4)·10 nm), f = 0.002, ferrite ν 0.29:
    # compare with the line-tension formula fed the §5.1 rms spacing.
    parts = dict(PARTICLES, mean_ecd_um=math.pi / 4 * 0.010)
    parts.pop("particles_per_um2")
    e = est(particles=parts, orowan_form="line_tension")
    rec = e.inputs["orowan"]
    assert rec["spacing"] == "spheres_edge_rms"
    assert rec["spacing_nm"] == pytest.approx(2 * math.sqrt(2 / 3) * 5 * (
        math.sqrt(math.pi / (4 * 0.002)) - 1), rel=1e-12)
    assert rec["spacing_nm"] == pytest.approx(154.0, rel=0.005)  # REFERENCES §5.2 table


def test_superposition_rss_of_obstacles():
    # §7 common hybrid: σ0 + σ_gb + √(σ_ppt² + σ_dis²).
    e = est(particles=PARTICLES, superposition="rss", dislocation_density_per_m2=(1e14, 0.0))
    c = e.contributions_mpa
    expected = (c["sigma0"]["at_central_inputs"] + c["grain_boundary"]["at_central_inputs"]
                + superpose([c["orowan"]["at_central_inputs"],
                             c["dislocation"]["at_central_inputs"]], rule="rss"))
    assert e.yield_mpa["at_central_inputs"] == pytest.approx(expected, rel=1e-12)
    assert c["dislocation"]["at_central_inputs"] == pytest.approx(
        2.75 * 0.3 * 81.0e3 * 0.248e-9 * 1e7, rel=1e-12)  # M·α·G·b·√ρ by hand
    assert c["superposition"]["rule"] == "rss"
    assert c["superposition"]["combined_terms"] == ["orowan", "dislocation"]


def test_power_superposition_over_all_strengthening():
    e = est(particles=PARTICLES, superposition="power", exponent=1.8, scope="all_strengthening")
    c = e.contributions_mpa
    expected = 70.0 + superpose([c["grain_boundary"]["at_central_inputs"],
                                 c["orowan"]["at_central_inputs"]], rule="power", exponent=1.8)
    assert e.yield_mpa["at_central_inputs"] == pytest.approx(expected, rel=1e-12)


def test_friction_and_solid_solution_replace_sigma0():
    e = est(friction_mpa=(50.0, 5.0), solid_solution_mpa=(40.0, 4.0))
    c = e.contributions_mpa
    assert c["friction"]["at_central_inputs"] == 50.0
    assert c["solid_solution"]["at_central_inputs"] == 40.0
    assert "sigma0" not in c
    assert e.yield_mpa["at_central_inputs"] == pytest.approx(
        hall_petch_mpa(12.0, sigma0_mpa=90.0, k_mpa_sqrt_m=0.55), rel=1e-12)


def test_interval_widens_with_wider_input_ci():
    # REFERENCES §10 #17: CI widens when the inputs' CIs widen.
    narrow = est(seed=1)
    wide = est(dict(GRAINS, mean_intercept_ci95_um=[8.0, 16.0]), seed=1)
    w = [e.yield_ci95_mpa[1] - e.yield_ci95_mpa[0] for e in (narrow, wide)]
    assert w[1] > w[0] * 1.05
    assert wide.variance_share["mean_intercept_um"] > narrow.variance_share["mean_intercept_um"]


def test_caution_and_schema():
    d = est().to_dict()
    assert d["schema"] == "sectio/strength@1"
    assert d["caution"] == CAUTION
    for phrase in ("ASTM E8/E8M", "ISO 6892-1", "not a design allowable", "not a measured"):
        assert phrase in d["caution"]
    for key in ("yield_mpa", "contributions_mpa", "variance_share", "inputs"):
        assert key in d
    assert d["inputs"]["monte_carlo"]["seed"] == 0
    assert d["inputs"]["monte_carlo"]["draws"] == DRAWS


def test_json_is_deterministic():
    a = json.dumps(est(particles=PARTICLES, seed=5).to_dict(), sort_keys=True)
    b = json.dumps(est(particles=PARTICLES, seed=5).to_dict(), sort_keys=True)
    c = json.dumps(est(particles=PARTICLES, seed=6).to_dict(), sort_keys=True)
    assert a == b
    assert a != c


def test_small_grains_warn_and_are_flagged():
    with pytest.warns(ExtrapolationWarning, match="outside the range"):
        e = est(dict(GRAINS, mean_intercept_um=2.0, mean_intercept_ci95_um=[1.9, 2.1]))
    assert "outside_fitted_range" in e.flags
    assert any("outside the range" in w for w in e.warnings)


def test_nanocrystalline_refused():
    g = dict(GRAINS, mean_intercept_um=0.05, mean_intercept_ci95_um=[0.045, 0.055])
    with pytest.raises(OptionError, match="below 0.1 µm"):
        est(g)


def test_shearable_particles_flagged():
    with pytest.warns(ExtrapolationWarning, match="below the shearing size 5 nm"):
        e = est(particles=dict(PARTICLES, mean_ecd_um=0.003, mean_ecd_ci95_um=[0.0028, 0.0032]),
                material="al-age-hardening", grains=dict(GRAINS, mean_intercept_um=40.0,
                                                         mean_intercept_ci95_um=[38, 42]))
    assert "particles_may_be_sheared" in e.flags


def test_overlapping_particles_refused():
    dense = dict(PARTICLES, particles_per_um2=20000.0, particles_per_um2_ci95=[19000, 21000])
    with pytest.raises(OptionError, match="non-positive edge-to-edge spacing"):
        est(particles=dense)


def test_option_errors():
    with pytest.raises(OptionError, match="Unknown strength option"):
        est(colour="red")
    with pytest.raises(OptionError, match="Unknown Orowan form 'magic'"):
        est(particles=PARTICLES, orowan_form="magic")
    with pytest.raises(OptionError, match="Unknown particle spacing 'random'"):
        est(particles=PARTICLES, spacing="random")
    with pytest.raises(OptionError, match="Unknown superposition scope"):
        est(scope="everything")
    no_density = {k: v for k, v in PARTICLES.items() if not k.startswith("particles_per")}
    with pytest.raises(SummaryError, match="no 'particles_per_um2'"):
        est(particles=no_density, spacing="planar_edge")
    with pytest.raises(SummaryError, match="Nothing to estimate from"):
        est(grains=None)


def test_public_api_from_import_sectio():
    import sectio

    assert {"strength", "summarize_grains", "summarize_particles", "estimate_strength"} <= set(
        dir(sectio))
    assert sectio.strength.hall_petch_mpa(20.0, sigma0_mpa=70.0, k_mpa_sqrt_m=0.74) == \
        pytest.approx(235.5, abs=0.1)  # REFERENCES §4.3 worked number
    assert sectio.estimate_strength is sectio.strength.estimate_from_summaries
    for name in sectio.__all__:
        assert getattr(sectio, name) is not None
