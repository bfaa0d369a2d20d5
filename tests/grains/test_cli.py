"""``sectio grains`` and ``sectio synth grains`` run in-process.

Checks: the output files and their schema (DESIGN.md: ``sectio/grains@1``), exit statuses
(0 ok, 1 some field failed, 2 user error without a traceback), the CSV against the label
map (the grains tile the field, so their areas add up to the field area exactly), G values
against the E112 relations (REFERENCES.md §1.1), the summary against the field values
(§1.6 recipe), and the synthetic truth file against an independent count on the written
label TIFF.
"""

from __future__ import annotations

import csv
import json
import os
import re

import numpy as np
import pytest
import tifffile
from click.testing import CliRunner
from PIL import Image

from sectio.cli import cli, main
from sectio.errors import CalibrationWarning
from sectio.specimen import GRAIN_CSV_COLUMNS as CSV_COLUMNS
from sectio.stereology import (
    astm_g_from_grains_per_mm2,
    astm_g_from_intercept_um,
    count_crossings,
    planimetric_count,
)
from sectio.synth._render import write_calibrated_tiff
from sectio.synth.grains import synthetic_grains

PX_UM = 0.5
FIELD_KEYS = {
    "image", "pixel_size_um", "mean_intercept_um", "intercept_count", "grain_count",
    "grains_per_mm2", "astm_g_intercept", "astm_g_planimetric",
}
SUMMARY_KEYS = {
    "n_fields", "mean_intercept_um", "mean_intercept_ci95_um", "relative_accuracy_pct",
    "astm_g", "astm_g_ci95",
}


@pytest.fixture(scope="module")
def fields(tmp_path_factory):
    """Three calibrated synthetic fields of one 'specimen' and their true ℓ̄ (µm)."""
    d = tmp_path_factory.mktemp("fields")
    out = []
    for k in range(3):
        img, truth = synthetic_grains((384, 448), 140, rng=500 + k, n_scratches=0)
        p = d / f"field_{k + 1}.tif"
        write_calibrated_tiff(p, img, PX_UM)
        out.append((p, count_crossings(truth.labels).mean_intercept_px * PX_UM))
    return out


@pytest.fixture(scope="module")
def good_run(fields, tmp_path_factory):
    out = tmp_path_factory.mktemp("out")
    status = main(["grains", *[str(p) for p, _ in fields], "--out", str(out)])
    return status, out


def test_exit_zero_and_files(good_run):
    status, out = good_run
    assert status == 0
    assert {p.name for p in out.iterdir()} == {
        "grains.json", "grains.csv", "grains_fields.csv", "grains_specimen.csv",
        "field_1_overlay.png", "field_2_overlay.png", "field_3_overlay.png",
    }  # atomic writes leave no temp files behind


def test_json_schema_and_values(good_run, fields):
    _, out = good_run
    doc = json.loads((out / "grains.json").read_text())
    assert doc["schema"] == "sectio/grains@1"
    assert doc["failed"] == []
    assert len(doc["fields"]) == 3
    for f, (p, true_um) in zip(doc["fields"], fields, strict=True):
        assert FIELD_KEYS <= set(f)
        assert f["image"] == str(p)
        assert f["pixel_size_um"] == pytest.approx(PX_UM)  # from the TIFF tags
        assert f["pixel_size_source"] == "TIFF resolution tags"
        # E112 relations 1e and 1d (REFERENCES §1.1)
        assert f["astm_g_intercept"] == pytest.approx(
            float(astm_g_from_intercept_um(f["mean_intercept_um"])), abs=1e-9)
        assert f["astm_g_planimetric"] == pytest.approx(
            float(astm_g_from_grains_per_mm2(f["grains_per_mm2"])), abs=1e-9)
        # ℓ̄ = 1 / P_L with P_L averaged over the four directions (REFERENCES §3.1), and
        # close to L_T / P over all lines pooled (§1.5; the directions' lengths differ a bit)
        p_l = np.mean([1 / v for v in f["direction_intercepts_um"].values()])
        assert f["mean_intercept_um"] == pytest.approx(1 / p_l, rel=1e-9)
        assert f["mean_intercept_um"] == pytest.approx(
            f["test_line_length_um"] / f["intercept_count"], rel=0.01)
        # end to end against the exact synthetic truth (small fields: ±3 %)
        assert f["mean_intercept_um"] == pytest.approx(true_um, rel=0.03)
        assert f["grain_count"] > 50 and f["intercept_count"] > 500
    s = doc["summary"]
    assert SUMMARY_KEYS <= set(s)
    assert s["n_fields"] == 3 and s["ci_basis"] == "fields"
    li = [f["mean_intercept_um"] for f in doc["fields"]]
    # REFERENCES §1.6: mean of the fields, Student-t CI with n − 1 = 2, %RA = 100·CI/mean
    from scipy import stats

    hw = stats.t.ppf(0.975, 2) * np.std(li, ddof=1) / np.sqrt(3)
    assert s["mean_intercept_um"] == pytest.approx(np.mean(li))
    assert s["mean_intercept_ci95_um"] == pytest.approx([np.mean(li) - hw, np.mean(li) + hw])
    assert s["relative_accuracy_pct"] == pytest.approx(100 * hw / np.mean(li))
    assert s["astm_g"] == pytest.approx(float(astm_g_from_intercept_um(np.mean(li))))
    assert s["astm_g_ci95"][0] < s["astm_g"] < s["astm_g_ci95"][1]


def test_csv_one_row_per_grain(good_run):
    _, out = good_run
    doc = json.loads((out / "grains.json").read_text())
    with open(out / "grains.csv", newline="") as fh:
        reader = csv.DictReader(fh)
        assert reader.fieldnames == CSV_COLUMNS
        rows = list(reader)
    assert len(rows) == sum(f["grain_count"] for f in doc["fields"])
    for f in doc["fields"]:
        # the CSV names the image relative to the output folder
        mine = [r for r in rows if r["image"] == os.path.relpath(f["image"], out)]
        assert len(mine) == f["grain_count"]
        # the grains tile the field: their areas add up to the field area (exact)
        h, w = f["shape_px"]
        assert sum(float(r["area_um2"]) for r in mine) == pytest.approx(h * w * PX_UM**2)
        # ECD = √(4A/π) (definition of the equivalent circle diameter)
        for r in mine[:20]:
            # (to the 6 significant figures of the per-grain CSV)
            assert float(r["ecd_um"]) == pytest.approx(
                np.sqrt(4 * float(r["area_um2"]) / np.pi), rel=6e-6)
        assert {r["touches_edge"] for r in mine} == {"True", "False"}


def test_overlays_are_valid_pngs(good_run, fields):
    _, out = good_run
    for k in range(1, 4):
        p = out / f"field_{k}_overlay.png"
        assert p.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG spec)
        with Image.open(p) as im:
            im.verify()
        with Image.open(p) as im:
            assert im.mode == "RGB"
            assert im.width == 448 and im.height > 384  # the field plus a caption strip


def test_table_printed(fields, tmp_path, capsys):
    status = main(["grains", str(fields[0][0]), "--out", str(tmp_path / "o")])
    assert status == 0
    text = capsys.readouterr().out
    assert "field_1.tif" in text and "sub-regions of one field" in text


def test_corrupt_file_among_good_ones(fields, tmp_path, capsys):
    bad = tmp_path / "broken.tif"
    bad.write_bytes(b"II*\x00garbage" * 10)
    out = tmp_path / "o"
    status = main(["grains", str(fields[0][0]), str(bad), str(fields[1][0]), "--out", str(out)])
    assert status == 1  # DESIGN.md: a run keeps going past a failed field and exits 1
    doc = json.loads((out / "grains.json").read_text())
    assert [f["image"] for f in doc["fields"]] == [str(fields[0][0]), str(fields[1][0])]
    assert len(doc["failed"]) == 1 and doc["failed"][0]["image"] == str(bad)
    reason = doc["failed"][0]["reason"]
    assert str(bad) in reason
    assert "could not be read as a TIFF" in reason or "holds no image pages" in reason
    assert (out / "field_1_overlay.png").exists() and (out / "field_2_overlay.png").exists()
    assert doc["summary"]["n_fields"] == 2
    assert "broken.tif: skipped:" in capsys.readouterr().err


def test_blank_image_recorded_as_failure(fields, tmp_path):
    blank = tmp_path / "blank.tif"
    write_calibrated_tiff(blank, np.full((128, 128), 90, np.uint8), PX_UM)
    out = tmp_path / "o"
    status = main(["grains", str(fields[2][0]), str(blank), "--out", str(out)])
    assert status == 1
    doc = json.loads((out / "grains.json").read_text())
    assert len(doc["fields"]) == 1
    assert doc["failed"][0]["image"] == str(blank)
    assert "is blank" in doc["failed"][0]["reason"]


def test_no_pixel_size_anywhere(tmp_path, capsys):
    img, _ = synthetic_grains((128, 128), 30, rng=1)
    paths = []
    for k in range(2):
        p = tmp_path / f"nocal_{k}.tif"
        tifffile.imwrite(p, img)  # no resolution unit: no calibration
        paths.append(str(p))
    status = main(["grains", *paths, "--out", str(tmp_path / "o")])
    assert status == 2  # DESIGN.md: user error → one sentence, no traceback, exit 2
    err = capsys.readouterr().err
    assert "Traceback" not in err
    last = err.strip().splitlines()[-1]
    assert last.startswith("sectio: None of the images carries a pixel size")
    assert "--pixel-size" in last
    assert last.endswith(".") and not re.search(r"\.\s+[A-Z]", last)  # one sentence


@pytest.mark.parametrize(
    "args, message",
    [(["--angles", "0,30"], "--angles '0,30'"),
     (["--line-spacing", "0"], "--line-spacing 0 is outside the allowed range [1, 1000]"),
     (["--subregions", "1"], "--subregions 1 is outside the allowed range [2, 20]"),
     (["--subregions", "100000"], "--subregions 100000 is outside the allowed range"),
     (["--angles", "nan"], "--angles entry nan is not a finite number"),
     (["--gap", "nan"], "--gap nan is not a finite number"),
     (["--gap", "1e9"], "--gap 1000000000.0 is outside the allowed range [0, 50]"),
     (["--pixel-size", "0.5"], "has no unit")],
)
def test_bad_options_exit_2(fields, tmp_path, capsys, args, message):
    status = main(["grains", str(fields[0][0]), "--out", str(tmp_path / "o"), *args])
    assert status == 2
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err


def test_pixel_size_option_overrides_tags(fields, tmp_path):
    out = tmp_path / "o"
    # the tags say 0.5 µm: the typed 250 nm is used, with a warning and both values kept
    with pytest.warns(CalibrationWarning, match=r"TIFF resolution tags say 0\.5 µm"):
        rc = main(["grains", str(fields[0][0]), "--pixel-size", "250nm", "--out", str(out)])
    assert rc == 0
    f = json.loads((out / "grains.json").read_text())["fields"][0]
    assert f["pixel_size_um"] == pytest.approx(0.25) and f["pixel_size_source"] == "given"
    tags = f["calibration"]["sources"][0]
    assert tags["pixel_size_um"] == pytest.approx(0.5) and tags["used"] is False


def test_same_input_same_json(fields, tmp_path):
    # DESIGN.md determinism: same input → byte-identical JSON
    a, b = tmp_path / "a", tmp_path / "b"
    args = [str(fields[0][0]), str(fields[1][0])]
    assert main(["grains", *args, "--out", str(a)]) == 0
    assert main(["grains", *args, "--out", str(b)]) == 0
    assert (a / "grains.json").read_bytes() == (b / "grains.json").read_bytes()


def test_help():
    runner = CliRunner()
    res = runner.invoke(cli, ["--help"])
    assert res.exit_code == 0 and "grains" in res.output
    res = runner.invoke(cli, ["grains", "--help"])
    assert res.exit_code == 0 and "--pixel-size" in res.output and "--out" in res.output


def test_synth_grains_truth_matches_label_tiff(tmp_path):
    out = tmp_path / "synth"
    res = CliRunner().invoke(
        cli, ["synth", "grains", "--out", str(out), "--size", "256x192", "--grains", "60",
              "--seed", "3", "--fields", "2"], catch_exceptions=False)
    assert res.exit_code == 0, res.output
    for k in (1, 2):
        img = tifffile.imread(out / f"grains_{k:02d}.tif")
        labels = tifffile.imread(out / f"grains_{k:02d}_labels.tif").astype(np.int64)
        assert img.shape == (192, 256) and labels.shape == (192, 256)  # --size is W x H
        truth = json.loads((out / f"grains_{k:02d}_truth.json").read_text())
        assert truth["image"] == f"grains_{k:02d}.tif"
        assert truth["grain_count"] == len(np.unique(labels))
        # independent recount on the written label map
        assert truth["mean_intercept_um"] == pytest.approx(
            count_crossings(labels).mean_intercept_px * truth["pixel_size_um"], rel=1e-12)
        assert truth["grains_per_mm2"] == pytest.approx(
            planimetric_count(labels).grains_per_mm2(truth["pixel_size_um"]), rel=1e-12)
        assert truth["astm_g_intercept"] == pytest.approx(
            float(astm_g_from_intercept_um(truth["mean_intercept_um"])))
    # and the written image is calibrated: `sectio grains` reads its pixel size from the tags
    out2 = tmp_path / "measured"
    assert main(["grains", str(out / "grains_01.tif"), "--out", str(out2)]) == 0
    f = json.loads((out2 / "grains.json").read_text())["fields"][0]
    assert f["pixel_size_um"] == pytest.approx(0.5)
