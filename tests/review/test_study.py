"""A field edited the way the review page does it, then ``sectio study`` rerun from scratch
in a new folder with the edit files copied in: the same numbers as the page showed."""

from __future__ import annotations

import json
import shutil

import numpy as np
import pytest

from sectio.review.session import ReviewSession
from sectio.study import load_study, run_study
from sectio.synth._render import write_calibrated_tiff
from sectio.synth.grains import synthetic_grains
from sectio.synth.particles import section_image, sphere_population

TOML = """\
[study]
title = "Review test"
seed = 0
draws = 1000
bootstrap = 20

[specimens.G]
images = ["g_*.tif"]

[specimens.P]
images = ["p_*.tif"]
measure = ["particles"]
"""


@pytest.fixture(scope="module")
def study(tmp_path_factory):
    d = tmp_path_factory.mktemp("review_study")
    for f in (1, 2):
        img, _ = synthetic_grains((256, 256), 70, rng=300 + f, kind="hardcore")
        write_calibrated_tiff(d / f"g_{f}.tif", img, 0.5)
        pop = sphere_population(size_um=(2.56, 2.56), volume_fraction=0.06,
                                median_radius_um=0.04, sigma_ln=0.2, rng=400 + f)
        write_calibrated_tiff(d / f"p_{f}.tif", section_image(pop, pixel_size_um=0.01,
                                                              rng=500 + f).image, 0.01)
    (d / "study.toml").write_text(TOML, encoding="utf-8")
    return d


def _neighbours(lab):
    a = int(lab[128, 128])
    rows, cols = np.nonzero((lab[:, 1:] != lab[:, :-1]) & (lab[:, :-1] == a))
    return [[int(cols[0]), int(rows[0])], [int(cols[0]) + 1, int(rows[0])]]


def test_study_rerun_with_copied_edit_files_gives_the_page_numbers(study, tmp_path):
    out1 = tmp_path / "first"
    run_study(load_study(study / "study.toml"), out1, workers=1, report=False)
    s = ReviewSession(out1, by="QA")
    g = next(f for f in s.fields if f.kind == "grains")
    p = next(f for f in s.fields if f.kind == "particles")
    s.prepare(g.id)
    s.add_edit(g.id, {"op": "join", "points": _neighbours(g.base_labels)})
    s.add_edit(g.id, {"op": "exclude", "polygon": [[0, 0], [60, 0], [60, 40], [0, 40]]})
    s.set_status(g.id, "reviewed")
    s.prepare(p.id)
    lab = p.base_labels
    big = int(np.argmax(np.bincount(lab.ravel())[1:])) + 1
    r, c = np.argwhere(lab == big)[0]
    s.add_edit(p.id, {"op": "delete", "point": [int(c), int(r)]})
    page_g, page_p = s.field_numbers(g), s.field_numbers(p)
    sum_g, sum_p = s.summary(g.group), s.summary(p.group)
    assert page_g["edits"]["count"] == 2 and page_g["edits"]["status"] == "reviewed"

    out2 = tmp_path / "second"
    for spec in ("G", "P"):
        (out2 / spec).mkdir(parents=True)
        for e in (out1 / spec).glob("*_edits.json"):
            shutil.copy(e, out2 / spec / e.name)
    run_study(load_study(study / "study.toml"), out2, workers=1, report=False)
    gdoc = json.loads((out2 / "G" / "grains.json").read_text())
    pdoc = json.loads((out2 / "P" / "particles.json").read_text())
    f0 = next(f for f in gdoc["fields"] if f["image"] == page_g["image"])
    for k in ("mean_intercept_um", "intercept_count", "grain_count", "grains_per_mm2",
              "left_out_fraction"):
        assert f0[k] == pytest.approx(page_g[k], rel=1e-12), k
    assert f0["edits"]["count"] == 2 and f0["edits"]["by"] == "QA"
    assert gdoc["summary"]["mean_intercept_um"] == pytest.approx(sum_g["mean_intercept_um"])
    assert gdoc["summary"]["mean_intercept_ci95_um"] == pytest.approx(
        sum_g["mean_intercept_ci95_um"])
    q0 = next(f for f in pdoc["fields"] if f["image"] == page_p["image"])
    for k in ("area_fraction", "particle_count", "mean_ecd_um"):
        assert q0[k] == pytest.approx(page_p[k], rel=1e-12), k
    assert pdoc["summary"]["area_fraction"] == pytest.approx(sum_p["area_fraction"])
    assert pdoc["summary"]["area_fraction_ci95"] == pytest.approx(sum_p["area_fraction_ci95"])
    # A later run in the first folder applies its edit files too.
    run_study(load_study(study / "study.toml"), out1, workers=1, report=False)
    again = json.loads((out1 / "G" / "grains.json").read_text())
    assert next(f for f in again["fields"] if f["image"] == page_g["image"])[
        "mean_intercept_um"] == pytest.approx(page_g["mean_intercept_um"], rel=1e-12)


def test_study_field_rejected_by_hand_is_listed_not_counted(study, tmp_path):
    out1 = tmp_path / "first"
    run_study(load_study(study / "study.toml"), out1, workers=1, report=False)
    s = ReviewSession(out1)
    g = [f for f in s.fields if f.kind == "grains"]
    s.set_status(g[1].id, "rejected", "pull-outs over most of the field")
    assert s.summary(g[0].group)["n_fields"] == 1
    run_study(load_study(study / "study.toml"), out1, workers=1, report=False)
    gdoc = json.loads((out1 / "G" / "grains.json").read_text())
    assert gdoc["summary"]["n_fields"] == 1
    assert gdoc["rejected"][0]["reason"] == "pull-outs over most of the field"
    # The review page still lists the rejected field (from the "rejected" entries).
    assert len([f for f in ReviewSession(out1).fields if f.kind == "grains"]) == 2
