"""Shipped materials data against REFERENCES §4.3 and §6; user files and their errors."""

import math

import pytest

from sectio.errors import OptionError
from sectio.strength import (
    MaterialsFileError,
    burgers_vector_nm,
    get_material,
    load_materials,
    shear_modulus_from_elastic_gpa,
)

REQUIRED = ["steel-ferritic-lowc", "stainless-austenitic", "cu-pure", "al-pure",
            "al-age-hardening", "ni-pure", "ti-cp"]


def test_required_classes_shipped():
    names = set(load_materials())
    assert set(REQUIRED) <= names


# REFERENCES §4.3 literature ranges of σ0 (MPa) and k (MPa·m^½) (values from memory there).
# The pure metals' constants are fitted to published studies instead and checked study by
# study in tests/validation/test_hall_petch_compilation.py.
HP_RANGES = {
    "steel-ferritic-lowc": ((50, 100), (0.55, 0.75)),  # Pickering 1978; Petch 1953
    "stainless-austenitic": ((150, 200), (0.3, 0.6)),  # Norström 1977; Kashyap & Tangri 1997
    "al-age-hardening": ((30, 80), (0.1, 0.3)),  # Armstrong review
}


@pytest.mark.parametrize("name", sorted(HP_RANGES))
def test_hall_petch_constants_in_literature_ranges(name):
    m = load_materials()[name]
    (s_lo, s_hi), (k_lo, k_hi) = HP_RANGES[name]
    assert s_lo <= m.sigma0_mpa.value <= s_hi
    assert k_lo <= m.k_mpa_sqrt_m.value <= k_hi
    assert m.grain_size_range_um[0] < m.grain_size_range_um[1]


# REFERENCES §6: lattice parameter a, structure, E and ν (Dowling Table 5.2; Hermann 2011).
ELASTIC = {
    "al-pure": ("fcc", 0.4049, 70.3, 0.345),
    "cu-pure": ("fcc", 0.3615, 130.0, 0.343),
    "ni-pure": ("fcc", 0.3524, 200.0, 0.31),
    "steel-ferritic-lowc": ("bcc", 0.28662, 212.0, 0.293),
    "stainless-austenitic": ("fcc", 0.359, 196.5, 0.28),
    "ti-cp": ("hcp", 0.2951, 120.0, 0.361),
}


@pytest.mark.parametrize("name", sorted(ELASTIC))
def test_b_and_g_from_lattice_and_elastic_constants(name):
    structure, a, e, nu = ELASTIC[name]
    m = load_materials()[name]
    assert m.structure == structure
    assert m.burgers_nm.value == pytest.approx(burgers_vector_nm(a, structure), rel=0.02)
    assert m.shear_modulus_gpa.value == pytest.approx(shear_modulus_from_elastic_gpa(e, nu),
                                                      rel=0.02)


def test_reference_worked_b_and_g():
    # REFERENCES §6 worked checks.
    assert burgers_vector_nm(0.4049, "fcc") == pytest.approx(0.2863, abs=1e-4)
    assert burgers_vector_nm(0.28665, "bcc") == pytest.approx(0.2482, abs=1e-4)
    assert shear_modulus_from_elastic_gpa(70.3, 0.345) == pytest.approx(26.13, abs=0.01)
    assert shear_modulus_from_elastic_gpa(130.0, 0.343) == pytest.approx(48.40, abs=0.01)
    assert shear_modulus_from_elastic_gpa(120.0, 0.361) == pytest.approx(44.09, abs=0.01)
    with pytest.raises(OptionError, match="Unknown crystal structure 'bct'"):
        burgers_vector_nm(0.3, "bct")


def test_taylor_factors():
    # REFERENCES §6: 3.06 FCC random (Taylor 1938; Kocks 1970), 2.73–2.75 BCC pencil glide.
    mats = load_materials()
    for m in mats.values():
        if m.structure == "fcc":
            assert m.taylor_factor.value == pytest.approx(3.06)
    assert 2.73 <= mats["steel-ferritic-lowc"].taylor_factor.value <= 2.75


def test_every_value_has_a_source():
    for m in load_materials().values():
        d = m.to_dict()
        for key in ("shear_modulus_gpa", "burgers_nm", "poisson_ratio", "taylor_factor",
                    "sigma0_mpa", "k_mpa_sqrt_m", "grain_size_range_um"):
            assert len(d[key]["source"]) > 10, (m.name, key)


USER = """
[harrow-a36]
base = "steel-ferritic-lowc"
description = "Harrow Forge Ltd plate, trial H-3 (invented)"
sigma0_mpa = { value = 95.0, sd = 5.0, source = "fitted to trial H-3" }

[cu-pure]
description = "copper, overridden"
structure = "fcc"
grain_size_convention = "sphere_diameter"
shear_modulus_gpa = { value = 45.4, sd = 1.0, source = "handbook" }
burgers_nm = { value = 0.256, source = "a/sqrt2" }
poisson_ratio = { value = 0.34, source = "handbook" }
taylor_factor = { value = 3.06, source = "Taylor" }
sigma0_mpa = { value = 22.0, sd = 2.0, source = "own data" }
k_mpa_sqrt_m = { value = 0.14, sd = 0.01, source = "own data" }
grain_size_range_um = { value = [10, 100], source = "own data" }
"""


def test_user_file_adds_and_overrides(tmp_path):
    path = tmp_path / "mine.toml"
    path.write_text(USER, encoding="utf-8")
    mats = load_materials(path)
    h = mats["harrow-a36"]
    assert h.sigma0_mpa.value == 95.0
    assert h.k_mpa_sqrt_m.value == mats["steel-ferritic-lowc"].k_mpa_sqrt_m.value  # inherited
    assert h.origin == str(path)
    assert mats["cu-pure"].grain_size_convention == "sphere_diameter"
    assert mats["cu-pure"].burgers_nm.sd == 0.0
    assert get_material("harrow-a36", path).description.startswith("Harrow")


@pytest.mark.parametrize(
    ("text", "match"),
    [
        ("[x\n", "not valid TOML"),
        ("a = 1\n", "top-level key 'a' is not a material table"),
        ('[x]\nbase = "nope"\n', "names unknown material 'nope'"),
        ('[x]\nbase = "cu-pure"\nsigma0_mpa = 3\n', "key 'sigma0_mpa' must be a table"),
        ('[x]\nbase = "cu-pure"\nk_mpa_sqrt_m = { value = 0.1 }\n', "needs a source"),
        ('[x]\nbase = "cu-pure"\nk_mpa_sqrt_m = { value = -0.1, source = "s" }\n',
         "must be positive"),
        ('[x]\nbase = "cu-pure"\nk_mpa_sqrt_m = { value = 0.1, sd = -1, source = "s" }\n',
         "non-negative sd"),
        ('[x]\nbase = "cu-pure"\npoisson_ratio = { value = 0.6, source = "s" }\n',
         "below 0.5"),
        ('[x]\nbase = "cu-pure"\ngrain_size_convention = "ecd"\n', "must be one of"),
        ('[x]\nbase = "cu-pure"\ngrain_size_range_um = { value = [5, 1] }\n', "0 < low < high"),
        ('[x]\ndescription = "d"\n', "key 'structure' is missing"),
    ],
)
def test_user_file_errors(tmp_path, text, match):
    path = tmp_path / "bad.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(MaterialsFileError, match=match):
        load_materials(path)


def test_missing_file_and_unknown_material(tmp_path):
    with pytest.raises(MaterialsFileError, match="Cannot read materials file"):
        load_materials(tmp_path / "absent.toml")
    with pytest.raises(OptionError, match="Unknown material 'unobtainium'"):
        get_material("unobtainium")


def test_k_sd_positive_and_sane():
    for m in load_materials().values():
        if m.k_mpa_sqrt_m.log_sd is not None:  # between-study log-normal spread
            assert 0 < m.k_mpa_sqrt_m.log_sd < 1.5
            assert m.k_mpa_sqrt_m.sd == pytest.approx(m.k_mpa_sqrt_m.value * m.k_mpa_sqrt_m.log_sd)
        else:
            assert 0 < m.k_mpa_sqrt_m.sd < m.k_mpa_sqrt_m.value
        assert math.isfinite(m.sigma0_mpa.sd)
