"""Hall–Petch relation, units and grain-size conventions (REFERENCES §4.1–4.5)."""

import math

import pytest

from sectio.errors import ExtrapolationWarning, OptionError
from sectio.strength import (
    GRAIN_SIZE_CONVENTIONS,
    convert_k_convention,
    convert_k_units,
    grain_size_flags,
    hall_petch_mpa,
    intercept_to_grain_size_um,
)


# REFERENCES §4.3 worked numbers (formula only, tolerance ±0.1 MPa).
@pytest.mark.parametrize(
    ("sigma0", "k", "d_um", "expected"),
    [
        (70, 0.74, 20, 235.5),  # ferrite
        (70, 0.74, 10, 304.0),
        (70, 0.74, 5, 400.9),
        (25, 0.12, 25, 49.0),  # Cu
        (15, 0.04, 50, 20.7),  # Al
        (20, 0.18, 30, 52.9),  # Ni
        (180, 0.45, 30, 262.2),  # 316L
        (150, 0.40, 20, 239.4),  # CP-Ti
    ],
)
def test_hall_petch_worked_numbers(sigma0, k, d_um, expected):
    assert hall_petch_mpa(d_um, sigma0_mpa=sigma0, k_mpa_sqrt_m=k) == pytest.approx(
        expected, abs=0.1
    )


def test_hall_petch_vectorised():
    out = hall_petch_mpa([20.0, 10.0, 5.0], sigma0_mpa=70.0, k_mpa_sqrt_m=0.74)
    assert out == pytest.approx([235.5, 304.0, 400.9], abs=0.1)  # REFERENCES §4.3


def test_k_unit_conversions():
    # REFERENCES §4.1 (derived): 0.74 MPa·m^½ = 23.40 MPa·mm^½ = 740 MPa·µm^½;
    # Pickering's 17.4 MPa·mm^½ = 0.550 MPa·m^½.
    assert convert_k_units(0.74, "mpa_sqrt_m", "mpa_sqrt_mm") == pytest.approx(23.40, abs=0.005)
    assert convert_k_units(0.74, "mpa_sqrt_m", "mpa_sqrt_um") == pytest.approx(740.0)
    assert convert_k_units(17.4, "mpa_sqrt_mm", "mpa_sqrt_m") == pytest.approx(0.550, abs=5e-4)
    # The mislabelling trap of §4.1: 0.74 read as MPa·mm^½ is a 31.6× smaller slope.
    assert convert_k_units(0.74, "mpa_sqrt_mm", "mpa_sqrt_m") == pytest.approx(0.0234, abs=1e-4)


def test_k_unit_error():
    with pytest.raises(OptionError, match="Unknown Hall–Petch slope unit 'ksi'"):
        convert_k_units(1.0, "ksi", "mpa_sqrt_m")


def test_convention_factors_match_references():
    # REFERENCES §4.2: Gerlt 2018 1.5; Mendelson 1969 1.56; truncated octahedron 1.648;
    # hexagon ECD 1.337; E112 √Ā 1.1225.
    assert GRAIN_SIZE_CONVENTIONS["sphere_diameter"].factor_to_intercept == 1.5
    assert GRAIN_SIZE_CONVENTIONS["mendelson_diameter"].factor_to_intercept == 1.56
    assert GRAIN_SIZE_CONVENTIONS["truncated_octahedron_diameter"].factor_to_intercept == 1.648
    assert GRAIN_SIZE_CONVENTIONS["section_ecd_hexagons"].factor_to_intercept == 1.337
    assert GRAIN_SIZE_CONVENTIONS["astm_sqrt_mean_area"].factor_to_intercept == 1.1225
    assert all(c.source for c in GRAIN_SIZE_CONVENTIONS.values())


def test_k_conversion_factor_0_8165():
    # REFERENCES §4.2 rule: k fitted with d = 1.5·ℓ̄ -> k_ℓ = k_d/√1.5 (×0.8165).
    assert convert_k_convention(1.0, "sphere_diameter", "mean_lineal_intercept") == pytest.approx(
        0.8165, abs=1e-4
    )


@pytest.mark.parametrize("convention", sorted(GRAIN_SIZE_CONVENTIONS))
def test_convention_switch_gives_identical_stress(convention):
    # REFERENCES §10 #10: d = c·ℓ̄ with k·√(c) gives the same σ as ℓ̄ with k.
    intercept = 12.0
    k_l = 0.6
    d = intercept_to_grain_size_um(intercept, convention)
    k_c = convert_k_convention(k_l, "mean_lineal_intercept", convention)
    s_l = hall_petch_mpa(intercept, sigma0_mpa=70.0, k_mpa_sqrt_m=k_l)
    s_c = hall_petch_mpa(d, sigma0_mpa=70.0, k_mpa_sqrt_m=k_c)
    assert s_c == pytest.approx(s_l, rel=1e-12)
    c = GRAIN_SIZE_CONVENTIONS[convention].factor_to_intercept
    assert k_c == pytest.approx(k_l * math.sqrt(c))


def test_unknown_convention():
    with pytest.raises(OptionError, match="Unknown grain-size convention 'ecd'"):
        intercept_to_grain_size_um(10.0, "ecd")


def test_flags_inside_range_are_empty():
    assert grain_size_flags(20.0, fitted_range_um=(3.0, 100.0)) == []


def test_flags_outside_fitted_range_warn():
    with pytest.warns(ExtrapolationWarning, match="outside the range 3–100 µm"):
        flags = grain_size_flags(150.0, fitted_range_um=(3.0, 100.0))
    assert flags == ["outside_fitted_range"]


def test_flags_ultrafine_warn():
    # REFERENCES §4.5: warn for d < 1 µm.
    with pytest.warns(ExtrapolationWarning, match="below 1 µm"):
        flags = grain_size_flags(0.5)
    assert flags == ["ultrafine_grains"]


def test_nanocrystalline_refused_unless_allowed():
    # REFERENCES §4.5: refuse or flag below 0.1 µm.
    with pytest.raises(OptionError, match="below 0.1 µm.*--allow-nanocrystalline"):
        grain_size_flags(0.05)
    with pytest.warns(ExtrapolationWarning, match="not valid"):
        flags = grain_size_flags(0.05, allow_nanocrystalline=True)
    assert flags == ["nanocrystalline"]
