"""The ``particles`` and ``synth particles`` commands, run in-process."""

from __future__ import annotations

import csv
import json

import pytest
import tifffile
from click.testing import CliRunner

from sectio.commands.particles import particles_command
from sectio.commands.synth_particles import synth_particles_command
from sectio.errors import CalibrationError, OptionError
from sectio.synth.particles import add_info_strip

from .conftest import PX_UM, make_section


@pytest.fixture(scope="module")
def images(tmp_path_factory):
    d = tmp_path_factory.mktemp("imgs")
    paths = []
    for i in range(2):
        sec = make_section(overlap=False, seed=70 + i, size_px=384)
        p = d / f"field_{i}.tif"
        tifffile.imwrite(p, sec.image)
        paths.append((p, sec))
    return paths


def _run(args):
    return CliRunner().invoke(particles_command, [str(a) for a in args],
                              catch_exceptions=False)


def test_two_fields_outputs(images, tmp_path):
    out = tmp_path / "out"
    res = _run([p for p, _ in images] + ["--pixel-size", "20nm", "--out", out])
    assert res.exit_code == 0, res.output
    doc = json.loads((out / "particles.json").read_text())
    assert doc["schema"] == "sectio/particles@1"
    for f, (_, sec) in zip(doc["fields"], images, strict=True):
        for key in ("image", "pixel_size_um", "area_fraction", "particle_count",
                    "particles_per_um2", "mean_ecd_um"):
            assert key in f
        assert f["pixel_size_um"] == pytest.approx(PX_UM)
        assert abs(f["area_fraction"] - sec.area_fraction) < 0.003  # exact mask truth
        assert (out / f["overlay_png"]).exists()
    s = doc["summary"]
    assert s["n_fields"] == 2 and s["basis"] == "fields"
    lo, hi = s["area_fraction_ci95"]
    assert lo < s["area_fraction"] < hi
    # mean of the two field values, as ASTM E562 prescribes
    assert s["area_fraction"] == pytest.approx(
        sum(f["area_fraction"] for f in doc["fields"]) / 2)
    for key in ("mean_ecd_um", "mean_ecd_ci95_um", "mean_ecd_se_um", "particles_per_um2",
                "particles_per_um2_ci95", "particles_per_um2_se", "area_fraction_se",
                "mean_sphere_diameter_um", "mean_sphere_diameter_ci95_um"):
        assert s[key] is not None, key
    # the strength module reads this summary as it is
    from sectio.strength.measured import particle_measurements

    pm = particle_measurements(s)
    assert pm.area_fraction.to_dict()["value"] == pytest.approx(s["area_fraction"])
    assert doc["options"]["phase"] == "bright" and doc["options"]["split"] is True
    assert doc["options"]["threshold_method"].startswith("half-contrast")
    with (out / "particles.csv").open() as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == sum(f["particle_count"] for f in doc["fields"])
    assert (out / "size_distribution.png").stat().st_size > 10_000
    assert "summary (2 field(s), fields)" in res.output


def test_single_field_uses_subregions(images, tmp_path):
    res = _run([images[0][0], "--pixel-size", "0.02um", "--out", tmp_path])
    assert res.exit_code == 0, res.output
    s = json.loads((tmp_path / "particles.json").read_text())["summary"]
    assert s["basis"] == "sub-regions of one field"
    lo, hi = s["area_fraction_ci95"]
    assert lo < s["area_fraction"] < hi
    assert s["dof"] >= 3


def test_failed_field_recorded_and_exit_1(images, tmp_path):
    bad = tmp_path / "broken.tif"
    bad.write_bytes(b"not a tiff at all")
    res = _run([images[0][0], bad, "--pixel-size", "0.02um", "--out", tmp_path / "o"])
    assert res.exit_code == 1
    doc = json.loads((tmp_path / "o" / "particles.json").read_text())
    assert doc["failed"][0]["image"] == str(bad)
    assert "could not be read as a TIFF" in doc["failed"][0]["reason"]
    assert len(doc["fields"]) == 1


def test_no_pixel_size_anywhere_is_a_usage_error(images, tmp_path):
    with pytest.raises(CalibrationError, match="None of the images carries a pixel size"):
        _run([images[0][0], images[1][0], "--out", tmp_path])


def test_bad_threshold_and_min_size(images, tmp_path):
    with pytest.raises(OptionError, match="--threshold 2.0 is outside"):
        _run([images[0][0], "--pixel-size", "0.02um", "--threshold", "2", "--out", tmp_path])
    with pytest.raises(OptionError, match="--min-size"):
        _run([images[0][0], "--pixel-size", "0.02um", "--min-size", "abc", "--out", tmp_path])


def test_wrong_phase_flag_in_output(images, tmp_path):
    res = _run([images[0][0], "--pixel-size", "0.02um", "--phase", "dark", "--out", tmp_path])
    doc = json.loads((tmp_path / "particles.json").read_text())
    assert any("wrong --phase" in f["flag"] for f in doc["summary"]["flags"])
    assert "wrong --phase" in res.output


def test_scale_bar_option(tmp_path):
    sec = make_section(overlap=False, seed=80, size_px=384)
    p = tmp_path / "bar.tif"
    tifffile.imwrite(p, add_info_strip(sec.image, pixel_size_um=PX_UM, bar_um=2.0, rng=1))
    res = _run([p, "--scale-bar", "2um", "--out", tmp_path / "o"])
    assert res.exit_code == 0, res.output
    f = json.loads((tmp_path / "o" / "particles.json").read_text())["fields"][0]
    assert f["pixel_size_um"] == pytest.approx(PX_UM, rel=0.01)
    assert f["calibration"]["pixel_size_source"] == "scale bar"
    assert f["calibration"]["shape_px"] == [384, 384]
    assert abs(f["area_fraction"] - sec.area_fraction) < 0.003


def test_synth_command_writes_truth(tmp_path):
    res = CliRunner().invoke(
        synth_particles_command,
        ["--out", str(tmp_path), "--fields", "1", "--size", "256", "--seed", "3"],
        catch_exceptions=False)
    assert res.exit_code == 0, res.output
    truth = json.loads((tmp_path / "truth.json").read_text())
    assert truth["fields"][0]["image"] == "particles_01.tif"
    img = tifffile.imread(tmp_path / "particles_01.tif")
    assert img.shape == (256, 256)
    # the measurement of the synthetic image agrees with its exact truth
    res = _run([tmp_path / "particles_01.tif", "--out", tmp_path / "m"])
    assert res.exit_code == 0, res.output
    f = json.loads((tmp_path / "m" / "particles.json").read_text())["fields"][0]
    assert abs(f["area_fraction"] - truth["fields"][0]["area_fraction"]) < 0.003


def test_phase_auto_and_exit_1_on_suspect_field(images, tmp_path):
    # auto: the bright particles are chosen and said so; dark asked: probably wrong, exit 1
    res = _run([images[0][0], "--pixel-size", "0.02um", "--phase", "auto",
                "--out", tmp_path / "a"])
    assert res.exit_code == 0, res.output
    f = json.loads((tmp_path / "a" / "particles.json").read_text())["fields"][0]
    assert f["phase"] == "bright" and f["phase_requested"] == "auto"
    assert f["segmentation"]["method"] == "half-contrast" and f["threshold"] is not None
    assert f["probably_wrong"] is False and f["notes"][0].startswith("phase chosen: bright")
    res = _run([images[0][0], "--pixel-size", "0.02um", "--phase", "dark",
                "--out", tmp_path / "d"])
    assert res.exit_code == 1
    f = json.loads((tmp_path / "d" / "particles.json").read_text())["fields"][0]
    assert f["probably_wrong"] is True and f["suspect_flags"]
    assert "probably wrong" in res.output
