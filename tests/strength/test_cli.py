"""The strength, fit-hall-petch and materials commands, run in-process with CliRunner."""

import json

import pytest
from click.testing import CliRunner

from sectio.commands.strength import (
    fit_hall_petch_command,
    materials_command,
    strength_command,
)
from sectio.errors import OptionError, ResultFileError
from sectio.strength import MaterialsFileError, get_material, hall_petch_mpa
from sectio.units import mpa_to_ksi, parse_value_sd

GRAINS = {"schema": "sectio/grains@1",
          "summary": {"n_fields": 10, "mean_intercept_um": 12.0,
                      "mean_intercept_ci95_um": [11.0, 13.0], "astm_g": 9.4}}
PARTICLES = {"schema": "sectio/particles@1",
             "summary": {"n_fields": 10, "area_fraction": 0.002,
                         "area_fraction_ci95": [0.0017, 0.0023], "mean_ecd_um": 0.008,
                         "mean_ecd_ci95_um": [0.007, 0.009], "particles_per_um2": 20.0,
                         "particles_per_um2_ci95": [17.0, 23.0]}}


@pytest.fixture()
def spec(tmp_path):
    (tmp_path / "grains.json").write_text(json.dumps(GRAINS), encoding="utf-8")
    (tmp_path / "particles.json").write_text(json.dumps(PARTICLES), encoding="utf-8")
    return tmp_path


def run(cmd, args):
    return CliRunner().invoke(cmd, [str(a) for a in args])


def test_strength_writes_json_and_summary(spec):
    out = spec / "out"
    res = run(strength_command, ["--grains", spec / "grains.json", "--particles",
                                 spec / "particles.json", "--material", "steel-ferritic-lowc",
                                 "--out", out, "--draws", 2000, "--seed", 3])
    assert res.exit_code == 0, res.output
    doc = json.loads((out / "strength.json").read_text(encoding="utf-8"))
    assert doc["schema"] == "sectio/strength@1"
    assert set(doc["yield_mpa"]) >= {"median", "ci95"}
    assert {"grain_boundary", "orowan", "sigma0"} <= set(doc["contributions_mpa"])
    hp = doc["inputs"]["hall_petch"]
    for key in ("sigma0_mpa", "k_mpa_sqrt_m", "grain_size_um", "grain_size_convention", "source"):
        assert key in hp
    assert doc["inputs"]["orowan"]["form"] == "line_tension"
    assert doc["inputs"]["monte_carlo"] == {**doc["inputs"]["monte_carlo"], "seed": 3,
                                            "draws": 2000}
    assert "ASTM E8/E8M" in doc["caution"]
    assert "MPa" in res.output and "CAUTION" in res.output
    # Byte-identical rerun with the same seed (DESIGN.md determinism).
    first = (out / "strength.json").read_bytes()
    run(strength_command, ["--grains", spec / "grains.json", "--particles",
                           spec / "particles.json", "--material", "steel-ferritic-lowc",
                           "--out", out, "--draws", 2000, "--seed", 3])
    assert (out / "strength.json").read_bytes() == first


def test_strength_ksi_summary(spec):
    res = run(strength_command, ["--grains", spec / "grains.json", "--material", "cu-pure",
                                 "--out", spec / "o", "--draws", 2000, "--units", "ksi"])
    assert res.exit_code == 0, res.output
    doc = json.loads((spec / "o" / "strength.json").read_text(encoding="utf-8"))
    # 1 ksi = 6.894757 MPa (NIST SP 811): the printed median is the JSON median in ksi.
    assert f"{mpa_to_ksi(doc['yield_mpa']['median']):.1f} ksi" in res.output
    cu = get_material("cu-pure")
    central = hall_petch_mpa(12.0, sigma0_mpa=cu.sigma0_mpa.value,
                             k_mpa_sqrt_m=cu.k_mpa_sqrt_m.value)
    assert doc["yield_mpa"]["at_central_inputs"] == pytest.approx(central, rel=1e-12)


def test_strength_options_recorded(spec):
    res = run(strength_command, ["--grains", spec / "grains.json", "--particles",
                                 spec / "particles.json", "--material", "steel-ferritic-lowc",
                                 "--out", spec / "o", "--draws", 2000, "--orowan-form",
                                 "ashby_orowan", "--superposition", "power", "--exponent", 1.8,
                                 "--friction", "50+-5", "--solid-solution", "3ksi",
                                 "--dislocation-density", "1e14+-1e13",
                                 "--grain-size-convention", "sphere_diameter"])
    assert res.exit_code == 0, res.output
    doc = json.loads((spec / "o" / "strength.json").read_text(encoding="utf-8"))
    sup = doc["contributions_mpa"]["superposition"]
    assert (sup["rule"], sup["exponent"]) == ("power", 1.8)
    assert doc["contributions_mpa"]["solid_solution"]["at_central_inputs"] == pytest.approx(
        3 * 6.894757)
    assert doc["inputs"]["hall_petch"]["grain_size_um"] == pytest.approx(18.0)
    assert doc["inputs"]["orowan"]["form"] == "ashby_orowan"


@pytest.mark.parametrize(
    ("setup", "error", "match"),
    [
        (lambda p: None, ResultFileError, "Cannot read"),
        (lambda p: p.write_text("{", encoding="utf-8"), ResultFileError, "not valid JSON"),
        (lambda p: p.write_text('{"schema": "x", "summary": {}}', encoding="utf-8"),
         ResultFileError, "expected 'sectio/grains@1'"),
        (lambda p: p.write_text('{"schema": "sectio/grains@1"}', encoding="utf-8"),
         ResultFileError, "no 'summary'"),
    ],
)
def test_strength_bad_grains_file(tmp_path, setup, error, match):
    path = tmp_path / "grains.json"
    setup(path)
    res = run(strength_command, ["--grains", path, "--material", "cu-pure", "--out", tmp_path])
    assert res.exit_code != 0
    assert isinstance(res.exception, error)
    with pytest.raises(error, match=match):
        raise res.exception


def test_strength_bad_options(spec):
    base = ["--grains", spec / "grains.json", "--out", spec / "o"]
    res = run(strength_command, [*base, "--material", "vibranium"])
    assert res.exit_code != 0
    with pytest.raises(OptionError, match="Unknown material 'vibranium'"):
        raise res.exception
    res = run(strength_command, [*base, "--material", "cu-pure", "--superposition", "power"])
    with pytest.raises(OptionError, match="needs --exponent"):
        raise res.exception
    res = run(strength_command, [*base, "--material", "cu-pure", "--materials",
                                 spec / "nope.toml"])
    with pytest.raises(MaterialsFileError, match="Cannot read materials file"):
        raise res.exception
    res = run(strength_command, [*base, "--material", "cu-pure", "--units", "bar"])
    assert res.exit_code == 2  # click usage error


def test_parse_value_sd():
    assert parse_value_sd("50", what="x") == (50.0, 0.0)
    assert parse_value_sd("50+-10", what="x") == (50.0, 10.0)
    assert parse_value_sd("5±1 ksi", what="x") == pytest.approx((5 * 6.894757, 6.894757))
    assert parse_value_sd("1e14+-2e13", what="x", stress=False) == (1e14, 2e13)
    with pytest.raises(OptionError, match="write VALUE or VALUE\\+-SD"):
        parse_value_sd("1+-2+-3", what="--friction")
    with pytest.raises(OptionError, match="Unknown stress unit"):
        parse_value_sd("50 bar", what="--friction")
    with pytest.raises(OptionError, match="write a number"):
        parse_value_sd("lots", what="--dislocation-density", stress=False)


CSV = """grain_size_um,yield_mpa,grain_size_sd_um
4,375.1,0.3
6,302.6,0.4
9,274.0,0.5
14,245.6,0.8
22,190.2,1.3
35,168.3,2.1
55,161.4,3.3
80,125.1,4.8
"""


def test_fit_command_writes_fit_plot_and_material(tmp_path, spec):
    data = tmp_path / "data.csv"
    data.write_text(CSV, encoding="utf-8")
    out = tmp_path / "fit"
    res = run(fit_hall_petch_command, [data, "--out", out, "--base", "steel-ferritic-lowc",
                                       "--name", "harrow-plate"])
    assert res.exit_code == 0, res.output
    doc = json.loads((out / "hall_petch_fit.json").read_text(encoding="utf-8"))
    assert doc["schema"] == "sectio/hall-petch-fit@1"
    assert doc["n"] == 8 and doc["method"] == "ols"
    assert "ISO 6892-1" in doc["caution"] and "design allowable" in doc["caution"]
    assert "CAUTION" in res.output
    assert 0.4 < doc["k_mpa_sqrt_m"]["value"] < 0.8
    assert (out / "hall_petch_fit.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    # The saved entry is usable for a prediction.
    res = run(strength_command, ["--grains", spec / "grains.json", "--material",
                                 "harrow-plate", "--materials", out / "hall_petch_material.toml",
                                 "--out", tmp_path / "pred", "--draws", 2000])
    assert res.exit_code == 0, res.output
    pred = json.loads((tmp_path / "pred" / "strength.json").read_text(encoding="utf-8"))
    expected = hall_petch_mpa(12.0, sigma0_mpa=doc["sigma0_mpa"]["value"],
                              k_mpa_sqrt_m=doc["k_mpa_sqrt_m"]["value"])
    assert pred["yield_mpa"]["at_central_inputs"] == pytest.approx(expected, rel=1e-12)


def test_fit_command_errors_in_variables_and_grains_json(tmp_path):
    rows = ["grains_json,yield_mpa"]
    for i, (d, y) in enumerate([(5, 330.0), (10, 250.0), (20, 190.0), (40, 160.0)]):
        g = {"schema": "sectio/grains@1",
             "summary": {"n_fields": 5, "mean_intercept_um": d, "mean_intercept_se_um": 0.05 * d}}
        (tmp_path / f"s{i}.json").write_text(json.dumps(g), encoding="utf-8")
        rows.append(f"s{i}.json,{y}")
    data = tmp_path / "data.csv"
    data.write_text("\n".join(rows) + "\n", encoding="utf-8")
    res = run(fit_hall_petch_command, [data, "--out", tmp_path / "f", "--errors-in-variables"])
    assert res.exit_code == 0, res.output
    doc = json.loads((tmp_path / "f" / "hall_petch_fit.json").read_text(encoding="utf-8"))
    assert doc["method"] == "york"
    assert doc["data"]["grain_size_sd_um"] == pytest.approx([0.25, 0.5, 1.0, 2.0])
    assert doc["material_entry"] is None
    assert "--base" in res.output


@pytest.mark.parametrize(
    ("text", "match"),
    [("d,yield_mpa\n1,2\n", "needs a header"),
     ("grain_size_um,yield_mpa\n5,abc\n6,3\n7,4\n", "line 2: a value is missing")],
)
def test_fit_command_bad_csv(tmp_path, text, match):
    data = tmp_path / "data.csv"
    data.write_text(text, encoding="utf-8")
    res = run(fit_hall_petch_command, [data, "--out", tmp_path / "f"])
    assert res.exit_code != 0
    with pytest.raises(ResultFileError, match=match):
        raise res.exception


def test_materials_command_lists_shipped_and_user(tmp_path):
    user = tmp_path / "m.toml"
    user.write_text('[harrow-b]\nbase = "ni-pure"\ndescription = "Harrow Forge Ltd alloy B"\n',
                    encoding="utf-8")
    res = run(materials_command, ["--materials", user, "--sources"])
    assert res.exit_code == 0, res.output
    for name in ("steel-ferritic-lowc", "stainless-austenitic", "cu-pure", "al-pure",
                 "al-age-hardening", "ni-pure", "ti-cp", "harrow-b"):
        assert name in res.output
    assert "Pickering" in res.output  # --sources prints the sources
    assert "ASTM E8/E8M" in res.output


def test_fit_command_reads_semicolon_and_decimal_comma(tmp_path):
    # The same data as CSV written by a spreadsheet in a decimal-comma locale.
    plain, semi = tmp_path / "plain.csv", tmp_path / "semi.csv"
    plain.write_text(CSV, encoding="utf-8")
    semi.write_text(CSV.replace(",", ";").replace(".", ","), encoding="utf-8")
    for data, out in ((plain, "a"), (semi, "b")):
        res = run(fit_hall_petch_command, [data, "--out", tmp_path / out])
        assert res.exit_code == 0, res.output
    a = json.loads((tmp_path / "a" / "hall_petch_fit.json").read_text(encoding="utf-8"))
    b = json.loads((tmp_path / "b" / "hall_petch_fit.json").read_text(encoding="utf-8"))
    assert b["k_mpa_sqrt_m"] == a["k_mpa_sqrt_m"]
    assert b["covariance"] == a["covariance"]


def test_strength_from_particles_only_grain_size_and_fit(tmp_path, spec):
    # Particles alone: the grain-boundary term is named as missing.
    res = run(strength_command, ["--particles", spec / "particles.json", "--material",
                                 "steel-ferritic-lowc", "--out", spec / "p", "--draws", 2000])
    assert res.exit_code == 0, res.output
    doc = json.loads((spec / "p" / "strength.json").read_text(encoding="utf-8"))
    assert doc["inputs"]["terms"]["missing"] == ["grain_boundary"]
    assert "grain_boundary" not in doc["contributions_mpa"]
    # ASTM G 9.4 typed in: ℓ̄ = 320·2^(−9.4/2) µm = 12.31 µm (ASTM E112 intercept relation).
    res = run(strength_command, ["--grain-size", "9.4", "--grain-size-measure", "astm_g",
                                 "--material", "cu-pure", "--out", spec / "g", "--draws", 2000])
    assert res.exit_code == 0, res.output
    doc = json.loads((spec / "g" / "strength.json").read_text(encoding="utf-8"))
    assert doc["inputs"]["hall_petch"]["mean_intercept"]["value"] == pytest.approx(
        320 * 2 ** (-9.4 / 2), rel=2e-3)
    # ECD 10 µm -> ℓ̄ = 0.891·√(π/4)·10 = 7.896 µm (E112 table ratio ℓ̄/√Ā = 0.891).
    res = run(strength_command, ["--grain-size", "10+-0.5", "--grain-size-measure", "ecd",
                                 "--material", "cu-pure", "--out", spec / "e", "--draws", 2000])
    doc = json.loads((spec / "e" / "strength.json").read_text(encoding="utf-8"))
    assert doc["inputs"]["hall_petch"]["mean_intercept"]["value"] == pytest.approx(7.896, 1e-3)
    # A fit document: its σ0, k and correlation are used.
    data = tmp_path / "data.csv"
    data.write_text(CSV, encoding="utf-8")
    run(fit_hall_petch_command, [data, "--out", tmp_path / "fit"])
    res = run(strength_command, ["--grains", spec / "grains.json", "--material",
                                 "steel-ferritic-lowc", "--hall-petch-fit",
                                 tmp_path / "fit" / "hall_petch_fit.json", "--out", spec / "f",
                                 "--draws", 2000])
    assert res.exit_code == 0, res.output
    doc = json.loads((spec / "f" / "strength.json").read_text(encoding="utf-8"))
    fit = json.loads((tmp_path / "fit" / "hall_petch_fit.json").read_text(encoding="utf-8"))
    assert doc["inputs"]["hall_petch"]["k_mpa_sqrt_m"] == fit["k_mpa_sqrt_m"]["value"]
    assert doc["inputs"]["monte_carlo"]["correlations"][0]["r"] < -0.5
    for args, match in (([], "Nothing to estimate from"),
                        (["--grains", spec / "grains.json", "--grain-size", "10"], "not both"),
                        (["--grains", spec / "grains.json", "--hall-petch-fit",
                          spec / "grains.json"], "not a sectio/hall-petch-fit@1")):
        res = run(strength_command, [*args, "--material", "cu-pure", "--out", spec / "x"])
        assert res.exit_code != 0
        assert match in str(res.exception) + res.output
