"""The summary CSV files (one row per field, one per specimen) against the JSON documents,
the two CSV dialects against each other, and the image names in every CSV file."""

from __future__ import annotations

import csv
import json
import math
import os
import shutil
from pathlib import Path

import pytest

from sectio.cli import main
from sectio.specimen import SUMMARY_DIGITS
from sectio.study import load_study, run_study

CSV_NAMES = ("fields.csv", "specimens.csv", "S-600/grains.csv", "S-600/grains_fields.csv",
             "S-600/grains_specimen.csv", "P-4h/particles.csv", "P-4h/particles_fields.csv",
             "P-4h/particles_specimen.csv")


@pytest.fixture(scope="module")
def runs(image_dir, tmp_path_factory):
    """The small study run with comma CSVs, then rerun (fields reused) with semicolon CSVs."""
    from .conftest import STUDY_TOML

    base = tmp_path_factory.mktemp("summary_csv")
    d = base / "study"
    shutil.copytree(image_dir, d)
    (d / "study.toml").write_text(STUDY_TOML, encoding="utf-8")
    out = base / "out"
    run_study(load_study(d / "study.toml"), out, workers=1, report=False)
    comma = base / "comma"
    for name in CSV_NAMES:
        (comma / name).parent.mkdir(parents=True, exist_ok=True)
        shutil.copy(out / name, comma / name)
    run_study(load_study(d / "study.toml"), out, workers=1, report=False,
              csv_dialect="semicolon")
    return d, out, comma


def _rows(path: Path, delimiter: str = ",") -> list[dict]:
    with path.open(newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh, delimiter=delimiter))


def _number(text: str, decimal: str = "."):
    """A cell as a float when it is a number, else the text."""
    try:
        return float(text.replace(decimal, ".")) if text else None
    except ValueError:
        return text


def _close(csv_value, json_value) -> bool:
    """Equal to the rounding of the CSV files (SUMMARY_DIGITS significant figures)."""
    if json_value is None:
        return csv_value is None
    if isinstance(json_value, bool):
        return csv_value == str(json_value)
    if isinstance(json_value, str):
        return csv_value == json_value
    return math.isclose(csv_value, json_value, rel_tol=0.5 * 10 ** (1 - SUMMARY_DIGITS),
                        abs_tol=1e-12)


def test_specimen_rows_equal_the_json_summaries(runs):
    _, out, comma = runs
    rows = {r["specimen"]: {k: _number(v) for k, v in r.items()}
            for r in _rows(comma / "specimens.csv")}
    assert set(rows) == {"S-600", "S-700", "P-4h"}
    for spec in ("S-600", "S-700"):
        s = json.loads((out / spec / "grains.json").read_text(encoding="utf-8"))["summary"]
        r = rows[spec]
        pairs = [("mean_intercept_um", s["mean_intercept_um"]),
                 ("mean_intercept_sd_um", s["mean_intercept_sd_um"]),
                 ("mean_intercept_ci95_low_um", s["mean_intercept_ci95_um"][0]),
                 ("mean_intercept_ci95_high_um", s["mean_intercept_ci95_um"][1]),
                 ("astm_g", s["astm_g"]), ("astm_g_ci95_low", s["astm_g_ci95"][0]),
                 ("grains_per_mm2_ci95_high", s["grains_per_mm2_ci95"][1]),
                 ("grain_count", s["grain_count_total"]), ("grain_fields", s["n_fields"])]
        for col, want in pairs:
            assert _close(r[col], want), (spec, col, r[col], want)
        st = json.loads((out / spec / "strength.json").read_text(encoding="utf-8"))
        assert _close(r["yield_median_mpa"], st["yield_mpa"]["median"])
        assert _close(r["yield_ci95_high_mpa"], st["yield_mpa"]["ci95"][1])
    s = json.loads((out / "P-4h" / "particles.json").read_text(encoding="utf-8"))["summary"]
    r = rows["P-4h"]
    # fractions are written in per cent
    assert _close(r["volume_fraction_pct"], 100 * s["volume_fraction"])
    assert _close(r["volume_fraction_ci95_low_pct"], 100 * s["volume_fraction_ci95"][0])
    assert _close(r["mean_sphere_diameter_ci95_high_um"], s["mean_sphere_diameter_ci95_um"][1])
    assert _close(r["particles_per_um2"], s["particles_per_um2"])
    assert _close(r["mean_ecd_sd_um"], s["mean_ecd_sd_um"])
    assert r["mean_intercept_um"] is None  # a particles-only specimen: grain columns empty
    # the same row in the specimen's own file
    own = {k: _number(v) for k, v in _rows(comma / "P-4h" / "particles_specimen.csv")[0].items()}
    assert all(own[k] == r[k] for k in own), own


def test_field_rows_equal_the_json_fields(runs):
    study, out, comma = runs
    rows = [{k: _number(v) for k, v in r.items()} for r in _rows(comma / "fields.csv")]
    assert [(r["specimen"], r["kind"]) for r in rows] == [
        ("S-600", "grains")] * 2 + [("S-700", "grains")] * 2 + [("P-4h", "particles")] * 2
    for spec, kind in (("S-600", "grains"), ("P-4h", "particles")):
        doc = json.loads((out / spec / f"{kind}.json").read_text(encoding="utf-8"))
        mine = [r for r in rows if r["specimen"] == spec]
        for r, f in zip(mine, doc["fields"], strict=True):
            assert r["image"] == f["image"] and (study / r["image"]).is_file()
            assert r["overlay_png"] == f["overlay_png"]
            assert (out / spec / r["overlay_png"]).is_file()
            if kind == "grains":
                for col, key in (("mean_intercept_um", "mean_intercept_um"),
                                 ("astm_g", "astm_g_intercept"), ("grain_count", "grain_count"),
                                 ("grains_per_mm2", "grains_per_mm2"),
                                 ("pixel_size_um", "pixel_size_um")):
                    assert _close(r[col], f[key]), (col, r[col], f[key])
                lo, hi = r["mean_intercept_ci95_low_um"], r["mean_intercept_ci95_high_um"]
                assert lo < r["mean_intercept_um"] < hi
            else:
                assert _close(r["volume_fraction_pct"], 100 * f["volume_fraction"])
                assert _close(r["mean_ecd_um"], f["mean_ecd_um"])
                assert _close(r["particles_per_um2"], f["particles_per_um2"])


def test_a_single_field_ci_is_the_single_field_run_s(runs, tmp_path):
    # The per-field CI of the mean intercept is what `sectio grains` reports for that field
    # alone (its sub-regions): run the command on the first field and compare.
    study, out, comma = runs
    first = _rows(comma / "S-600" / "grains_fields.csv")[0]
    assert main(["grains", str(study / first["image"]), "--out", str(tmp_path)]) == 0
    s = json.loads((tmp_path / "grains.json").read_text(encoding="utf-8"))["summary"]
    assert s["ci_basis"] == "sub-regions of one field"
    assert _close(float(first["mean_intercept_ci95_low_um"]), s["mean_intercept_ci95_um"][0])
    assert _close(float(first["mean_intercept_ci95_high_um"]), s["mean_intercept_ci95_um"][1])


def test_semicolon_files_read_back_equal_the_comma_files(runs):
    _, out, comma = runs
    for name in CSV_NAMES:
        a = _rows(comma / name)
        b = _rows(out / name, delimiter=";")
        assert len(b[0]) > 3, name  # ';' between values
        cells = [v for r in b for v in r.values() if isinstance(_number(v, ","), float)]
        # ',' as the decimal mark, never '.'
        assert any("," in v for v in cells) and not any("." in v for v in cells), name
        assert len(a) == len(b) > 0 and list(a[0]) == list(b[0]), name
        for ra, rb in zip(a, b, strict=True):
            assert {k: _number(v) for k, v in ra.items()} == {
                k: _number(v, ",") for k, v in rb.items()}, name


def test_summary_numbers_carry_at_most_four_significant_figures(runs):
    _, _, comma = runs
    for name in ("fields.csv", "specimens.csv"):
        for r in _rows(comma / name):
            for k, v in r.items():
                exact = k.endswith(("count", "_fields", "_failed"))  # counts stay whole
                if isinstance(_number(v), float) and "e" not in v and not exact:
                    digits = v.lstrip("-").replace(".", "").lstrip("0")
                    assert len(digits.rstrip("0") or "0") <= SUMMARY_DIGITS, (k, v)


def test_command_csvs_name_images_relative_to_the_output_folder(image_dir, tmp_path):
    # Absolute paths on the command line: particles.csv, grains.csv and the field files give
    # the image relative to the output folder (they resolve from there).
    out = tmp_path / "results"
    imgs = [str((image_dir / f"p004_f{i}.tif").resolve()) for i in (1, 2)]
    assert main(["particles", *imgs, "--out", str(out)]) == 0
    grains_out = tmp_path / "g"
    g_img = str((image_dir / "g600_f1.tif").resolve())
    assert main(["grains", g_img, "--out", str(grains_out), "--csv-dialect", "semicolon"]) == 0
    for folder, name, delim, want in (
            (out, "particles.csv", ",", imgs), (out, "particles_fields.csv", ",", imgs),
            (grains_out, "grains.csv", ";", [g_img]),
            (grains_out, "grains_fields.csv", ";", [g_img])):
        names = {r["image"] for r in _rows(folder / name, delim)}
        assert names == {os.path.relpath(p, folder) for p in want}, name
        assert all(not os.path.isabs(n) and (folder / n).resolve() == Path(p)
                   for n, p in zip(sorted(names), sorted(want), strict=True))
