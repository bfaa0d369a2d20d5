"""Edit files applied again by ``sectio grains`` / ``sectio particles`` on later runs."""

from __future__ import annotations

import json

import numpy as np
import pytest

from sectio.cli import main
from sectio.review.editfile import image_sha256, new_edit_doc, write_edit_file
from sectio.synth._render import write_calibrated_tiff
from sectio.synth.grains import synthetic_grains

PX_UM = 0.5


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    d = tmp_path_factory.mktemp("edits")
    paths = []
    for k in range(2):
        img, _ = synthetic_grains((256, 320), 60, rng=40 + k, n_scratches=0)
        p = d / f"f{k + 1}.tif"
        write_calibrated_tiff(p, img, PX_UM)
        paths.append(p)
    out = d / "out"
    assert main(["grains", *map(str, paths), "--out", str(out)]) == 0
    return paths, out, json.loads((out / "grains.json").read_text())


def _two_neighbours(field_doc, out):
    """Centres of two neighbouring grains, read from the run's own label map."""
    from sectio.micrograph import load
    from sectio.review.measure import measure_field

    src = field_doc["source"]
    mg = load(field_doc["image"], **src["calibration"])
    lab = measure_field("grains", mg, src["options"]).labels
    a = int(lab[128, 160])
    rows, cols = np.nonzero(lab[:, 1:] != lab[:, :-1])
    for r, c in zip(rows, cols, strict=True):
        if lab[r, c] == a and lab[r, c + 1] != a:
            return [[c, r], [c + 1, r]], lab
    raise AssertionError("no neighbour found")


def test_edit_file_applied_by_a_later_run(run, tmp_path):
    paths, out, doc = run
    f1 = doc["fields"][0]
    assert f1["edits"] is None and f1["source"]["edit_file"] == "f1_grains_edits.json"
    pts, lab = _two_neighbours(f1, out)
    ed = new_edit_doc(kind="grains", image=str(paths[0]), image_sha=image_sha256(paths[0]),
                      shape_px=lab.shape, options=f1["source"]["options"])
    ed["edits"] = [{"op": "join", "points": pts}]
    ed["by"] = "A. Tester"
    out2 = tmp_path / "out2"
    write_edit_file(out2 / "f1_grains_edits.json", ed)
    assert main(["grains", *map(str, paths), "--out", str(out2)]) == 0
    doc2 = json.loads((out2 / "grains.json").read_text())
    g1, g2 = doc2["fields"]
    # One grain fewer, fewer crossings; the other field is untouched.
    assert g1["grain_count"] == f1["grain_count"] - 1
    assert g1["intercept_count"] < f1["intercept_count"]
    assert g1["edits"]["count"] == 1 and g1["edits"]["by"] == "A. Tester"
    assert g2["mean_intercept_um"] == doc["fields"][1]["mean_intercept_um"]
    assert g2["edits"] is None


def test_rejected_field_left_out_of_the_statistics(run, tmp_path):
    paths, out, doc = run
    ed = new_edit_doc(kind="grains", image=str(paths[1]), image_sha=image_sha256(paths[1]),
                      shape_px=(256, 320), options={})
    ed["status"], ed["reason"] = "rejected", "unetched patch over half the field"
    out2 = tmp_path / "out3"
    write_edit_file(out2 / "f2_grains_edits.json", ed)
    assert main(["grains", *map(str, paths), "--out", str(out2)]) == 0
    doc2 = json.loads((out2 / "grains.json").read_text())
    assert [f["image"] for f in doc2["fields"]] == [str(paths[0])]
    assert doc2["summary"]["n_fields"] == 1
    assert doc2["rejected"][0]["reason"] == "unetched patch over half the field"
    assert doc2["summary"]["mean_intercept_um"] == doc["fields"][0]["mean_intercept_um"]


def test_edit_file_of_a_changed_image_is_refused(run, tmp_path, capsys):
    paths, out, doc = run
    ed = new_edit_doc(kind="grains", image=str(paths[0]), image_sha="0" * 64,
                      shape_px=(256, 320), options={})
    out2 = tmp_path / "out4"
    write_edit_file(out2 / "f1_grains_edits.json", ed)
    assert main(["grains", *map(str, paths), "--out", str(out2)]) == 1
    doc2 = json.loads((out2 / "grains.json").read_text())
    assert "made on another version of" in doc2["failed"][0]["reason"]
    assert len(doc2["fields"]) == 1


def test_report_marks_corrected_fields():
    from sectio.report.html import _edit_mark

    assert _edit_mark({"edits": {"count": 3, "status": "reviewed", "by": "JS"}}) == \
        " — corrected by hand: 3 edits, reviewed by JS"
    assert _edit_mark({"edits": {"count": 1, "status": None}}) == " — corrected by hand: 1 edit"
    assert _edit_mark({"edits": None}) == ""
