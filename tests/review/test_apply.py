"""Hand edits on label maps, checked against exact truth (synthetic tessellations)."""

from __future__ import annotations

import numpy as np
import pytest

from sectio.micrograph import from_array
from sectio.review.apply import EditError, apply_edits, cut_labels
from sectio.review.editfile import EditFileError, new_edit_doc, read_edit_file, write_edit_file
from sectio.review.measure import remeasure
from sectio.stereology._intercepts import count_crossings
from sectio.stereology._planimetric import planimetric_count
from sectio.synth.grains import grain_structure

STRAIGHT = (0, 45, 90, 135)


def _same_partition(a: np.ndarray, b: np.ndarray) -> bool:
    """True when two label maps divide the image into the same regions (labels may differ)."""
    pairs = np.unique(np.stack([a.ravel(), b.ravel()]), axis=1)
    return len(np.unique(pairs[0])) == pairs.shape[1] == len(np.unique(pairs[1]))


def _squares(n=6, a=40):
    # A square tiling: every grain is an a x a square (exact truth by construction).
    idx = np.arange(n * a) // a
    return (idx[:, None] * n + idx[None, :] + 1).astype(np.int32)


def test_scratch_split_grains_joined_back_to_truth():
    # Truth: a Poisson-Voronoi section (sectio.synth, exact labels). A straight scratch
    # across the field that the segmentation took for a boundary splits every grain it
    # crosses; joining the halves on both sides of the scratch must give back the truth's
    # partition and exactly the truth's intercept count.
    truth = grain_structure((300, 400), 80, rng=np.random.default_rng(5))[0].labels
    scratch = [[0, 40], [399, 260]]
    wrong = truth.astype(np.int64).copy()
    n_new = cut_labels(wrong, scratch)
    assert n_new >= 5
    c_truth = count_crossings(truth, angles_deg=STRAIGHT, line_spacing_px=1)
    c_wrong = count_crossings(wrong, angles_deg=STRAIGHT, line_spacing_px=1)
    assert c_wrong.total_crossings > c_truth.total_crossings
    joins = []
    for g in np.unique(truth):
        parts = np.unique(wrong[truth == g])
        if parts.size > 1:
            pts = []
            for p in parts:
                r, c = np.argwhere(wrong == p)[len(np.argwhere(wrong == p)) // 2]
                pts.append([int(c), int(r)])
            joins.append({"op": "join", "points": pts})
    assert len(joins) == n_new
    fixed = apply_edits(wrong, joins, kind="grains").labels
    assert _same_partition(fixed, truth)
    c_fixed = count_crossings(fixed, angles_deg=STRAIGHT, line_spacing_px=1)
    assert c_fixed.crossings == c_truth.crossings
    assert c_fixed.mean_intercept_px == pytest.approx(c_truth.mean_intercept_px, rel=1e-12)


def test_cut_adds_one_crossing_per_test_line_it_crosses():
    # Cutting a 40 x 40 square grain down its middle column: every row through the grain
    # (40 rows) crosses the new boundary once; columns do not cross a vertical cut.
    lab = _squares()
    before = count_crossings(lab, angles_deg=(0, 90))
    out = apply_edits(lab, [{"op": "cut", "line": [[100.5, 75], [100.5, 125]]}], kind="grains")
    after = count_crossings(out.labels, angles_deg=(0, 90))
    assert after.crossings[0] - before.crossings[0] == 40
    assert after.crossings[1] == before.crossings[1]
    assert len(np.unique(out.labels)) == 37
    # Columns 80..99 and 101..119 on either side of the stroke's column 100, which joins
    # one side: 20 + 1 and 19 columns of 40 rows.
    sizes = sorted(np.bincount(out.labels[80:120, 80:120].ravel())[np.unique(
        out.labels[80:120, 80:120])])
    assert sizes == [760, 840]


def test_cut_that_does_not_cross_leaves_the_grain_whole():
    lab = _squares()
    out = apply_edits(lab, [{"op": "cut", "line": [[90, 90], [100, 100]]}], kind="grains")
    assert _same_partition(out.labels, lab)
    assert out.effects == ["cut: 0 new region(s)"]


def test_exclusion_equals_cropping_for_straight_lines():
    # Leaving the right half out must count exactly what the left half alone counts
    # (a crop is the independent way to take test lines over that area only). The left-out
    # part is 148 columns wide, a multiple of the line spacing, so that the 45° lines
    # (placed from the right-hand edge) fall on the same diagonals in both.
    truth = grain_structure((200, 300), 60, rng=np.random.default_rng(2))[0].labels
    out = apply_edits(truth, [{"op": "exclude", "polygon": [[152, 0], [299, 0], [299, 199],
                                                            [152, 199]]}], kind="grains")
    assert out.left_out[:, 152:].all() and not out.left_out[:, :152].any()
    for spacing in (1, 4):
        a = count_crossings(out.labels, angles_deg=STRAIGHT, line_spacing_px=spacing)
        b = count_crossings(truth[:, :152], angles_deg=STRAIGHT, line_spacing_px=spacing)
        assert a.crossings == b.crossings
        assert a.length_px == pytest.approx(b.length_px)
    pc = planimetric_count(out.labels, left_out=out.left_out)
    assert pc.field_area_px == 200 * 152
    # Grains touching the left-out half count 1/2, like grains on the field edge.
    crop = planimetric_count(truth[:, :152])
    assert pc.inside == crop.inside


def test_circles_through_a_left_out_region_are_not_used():
    lab = _squares(n=10, a=40)
    full = count_crossings(lab, angles_deg=(0,), circle_radius_px=40)
    out = apply_edits(lab, [{"op": "exclude", "polygon": [[0, 0], [60, 0], [60, 60], [0, 60]]}],
                      kind="grains")
    part = count_crossings(out.labels, angles_deg=(0,), circle_radius_px=40)
    one = 2 * np.pi * 40
    assert full.circle_length_px - part.circle_length_px == pytest.approx(one)


def test_twin_mark_joins_for_grain_size_and_keeps_its_length():
    lab = _squares()
    edits = [{"op": "twin", "points": [[10, 10], [50, 10]]}]  # grains 1 and 2 share 40 px
    out = apply_edits(lab, edits, kind="grains")
    assert out.twin_length_px == 40
    assert len(np.unique(out.labels)) == 35
    # Withdrawing the mark (it is a grain boundary after all) restores the map.
    out2 = apply_edits(lab, edits + [{"op": "grain_boundary", "points": [[50, 10], [10, 10]]}],
                       kind="grains")
    assert _same_partition(out2.labels, lab) and out2.twin_length_px == 0


def test_edits_are_refused_with_one_sentence():
    lab = _squares()
    with pytest.raises(EditError, match=r"outside the 240 x 240 pixel image"):
        apply_edits(lab, [{"op": "join", "points": [[10, 10], [500, 10]]}], kind="grains")
    with pytest.raises(EditError, match="not an edit of grains"):
        apply_edits(lab, [{"op": "delete", "point": [1, 1]}], kind="grains")


def test_grain_field_remeasured_from_edited_labels():
    # The field-level path: a 2 x 2 um square tiling, a join of two squares. ASTM E112:
    # l = L / P; the joined pair removes its shared 40 px boundary from 40 rows.
    from sectio.grains import GrainOptions, grain_field_from_labels

    lab = _squares()
    mg = from_array((lab % 2).astype(float), pixel_size_um=0.5)
    field = grain_field_from_labels(mg, lab, GrainOptions(line_spacing_px=1,
                                                          angles_deg=(0.0,)), None)
    edited = apply_edits(lab, [{"op": "join", "points": [[10, 10], [50, 10]]}], kind="grains")
    after = remeasure("grains", field, edited)
    assert field.counts.crossings[0] - after.counts.crossings[0] == 40
    rows, steps = 240, 239
    assert after.mean_intercept_um == pytest.approx(rows * steps / (rows * 5 - 40) * 0.5)
    assert after.grain_count == 35


def _discs():
    # Discs of radius 8 on a 40-px grid, plus a touching pair split in two (labels 1, 2).
    yy, xx = np.mgrid[0:200, 0:200]
    lab = np.zeros((200, 200), np.int32)
    n = 0
    for cy in (40, 80, 120, 160):
        for cx in (40, 80, 120, 160):
            n += 1
            lab[(yy - cy) ** 2 + (xx - cx) ** 2 <= 64] = n
    return lab


def test_particle_delete_add_join_split():
    lab = _discs()
    area0 = np.count_nonzero(lab)
    out = apply_edits(lab, [{"op": "delete", "point": [40, 40]}], kind="particles")
    assert np.count_nonzero(out.labels) == area0 - np.count_nonzero(lab == 1)
    sq = [[10, 10], [19, 10], [19, 19], [10, 19]]
    out = apply_edits(lab, [{"op": "add", "polygon": sq}], kind="particles")
    assert np.count_nonzero(out.labels) - area0 == 100  # pixels (10..19) x (10..19)
    out = apply_edits(lab, [{"op": "join", "points": [[40, 40], [80, 40]]}], kind="particles")
    assert len(np.unique(out.labels)) - 1 == 15
    out = apply_edits(lab, [{"op": "split", "line": [[80.5, 20], [80.5, 60]]}], kind="particles")
    assert len(np.unique(out.labels)) - 1 == 17
    assert np.count_nonzero(out.labels) == area0  # a split moves no pixel out of a particle


def test_edit_file_refused_when_the_image_changed(tmp_path):
    doc = new_edit_doc(kind="grains", image="f.tif", image_sha="a" * 64, shape_px=(10, 10),
                       options={})
    p = tmp_path / "f_grains_edits.json"
    write_edit_file(p, doc)
    assert read_edit_file(p, image_sha="a" * 64)["kind"] == "grains"
    with pytest.raises(EditFileError, match=r"made on another version of f\.tif"):
        read_edit_file(p, image_sha="b" * 64)
    p.write_text("{", encoding="utf-8")
    with pytest.raises(EditFileError, match="not valid JSON"):
        read_edit_file(p)
