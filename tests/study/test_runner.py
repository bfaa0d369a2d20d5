"""Running studies: results, resume by content hash, failures recorded, kill and rerun."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time

import numpy as np
import pytest

from sectio.micrograph import load
from sectio.particles import measure_particles, summarize_particles
from sectio.report import to_json_text
from sectio.specimen import FieldRecord, particles_document
from sectio.stereology import intercept_lengths_px
from sectio.study import field_key, load_study, run_study

from .conftest import json_files, run_cli


def test_intercept_lengths_of_stripes_are_exact():
    # Vertical stripes 5 px wide: every horizontal line crosses chords of exactly 5 px;
    # vertical lines stay inside one stripe and give no complete chord.
    labels = np.repeat(np.arange(20), 5)[None, :].repeat(40, axis=0)
    chords = intercept_lengths_px(labels, spacing_px=4)
    assert len(chords) == 10 * 18  # 10 test rows, 18 inner stripes each
    assert set(chords) == {5.0}


def test_field_key_depends_on_image_options_and_kind():
    a = field_key(b"abc", "grains", {"pixel_size": None}, {"gap_px": 3.0})
    assert a == field_key(b"abc", "grains", {"pixel_size": None}, {"gap_px": 3.0})
    assert a != field_key(b"abd", "grains", {"pixel_size": None}, {"gap_px": 3.0})
    assert a != field_key(b"abc", "grains", {"pixel_size": None}, {"gap_px": 2.0})
    assert a != field_key(b"abc", "particles", {"pixel_size": None}, {"gap_px": 3.0})
    assert len(a) == 64 and int(a, 16) >= 0  # sha256 hex digest


def test_stored_particle_records_summarise_like_live_fields(study_dir, tmp_path):
    """The summary of records rebuilt from JSON equals summarize_particles of live fields."""
    st = load_study(study_dir / "study.toml")
    run_study(st, tmp_path / "out", workers=1, report=False)
    spec = st.specimens[2]
    live = [measure_particles(load(p), seed=0) for p in spec.image_paths]
    recs = [FieldRecord.from_dict(json.loads(
                (tmp_path / "out" / "fields" / f"{f['key']}.json").read_text()))
            for f in json.loads((tmp_path / "out" / "study.json").read_text())
            ["specimens"][2]["fields"]]
    ref = json.loads(to_json_text(summarize_particles(live, bootstrap=50, seed=0)))
    part = particles_document(recs, calibration={}, measure={"seed": 0}, bootstrap=50)
    got = json.loads(to_json_text(part.doc["summary"]))
    ref["flags"] = got["flags"] = None  # image paths differ (temp copy vs study folder)
    assert got == ref


def test_run_resume_and_results(study_dir, tmp_path):
    st = load_study(study_dir / "study.toml")
    out = tmp_path / "out"
    calls = []
    run1 = run_study(st, out, workers=1, report=False, progress=lambda d, t: calls.append(d))
    assert (run1.computed, run1.reused, run1.failed) == (6, 0, [])
    assert calls == [0, 1, 2, 3, 4, 5, 6]
    doc = run1.study_doc
    assert doc["schema"] == "sectio/study@1"
    s600, s700, p4 = doc["specimens"]
    # Synthetic truth: hard-core Voronoi grains made for mean intercepts 6 and 9 um; the
    # measured intercepts should land within 15 % (segmentation of 256-px fields).
    assert s600["grains"]["mean_intercept_um"] == pytest.approx(6.0, rel=0.15)
    assert s700["grains"]["mean_intercept_um"] == pytest.approx(9.0, rel=0.15)
    # Volume fraction of the sphere population was 0.06 (Delesse: A_A = V_V).
    assert p4["particles"]["area_fraction"] == pytest.approx(0.06, abs=0.025)
    assert s600["strength"]["yield_mpa"]["median"] > s700["strength"]["yield_mpa"]["median"]
    assert "ASTM E8" in s600["strength"]["caution"]
    grains = json.loads((out / "S-600" / "grains.json").read_text())
    assert grains["schema"] == "sectio/grains@1"
    assert [f["image"] for f in grains["fields"]] == ["g600_f1.tif", "g600_f2.tif"]
    assert (out / "S-600" / grains["fields"][0]["overlay_png"]).is_file()
    strength = json.loads((out / "P-4h" / "strength.json").read_text())
    assert strength["schema"] == "sectio/strength@1"
    assert strength["inputs"]["files"]["particles"] == "particles.json"
    first = json_files(out)
    # A rerun computes nothing and writes the same bytes.
    run2 = run_study(st, out, workers=1, report=False)
    assert (run2.computed, run2.reused) == (0, 6)
    assert json_files(out) == first
    log = json.loads((out / "run_log.json").read_text())
    assert log["fields_reused"] == 6 and log["fields_computed"] == 0


def test_changed_option_recomputes_only_that_specimen(study_dir, tmp_path):
    out = tmp_path / "out"
    run_study(load_study(study_dir / "study.toml"), out, workers=1, report=False)
    toml = study_dir / "study.toml"
    toml.write_text(toml.read_text().replace(
        'images = ["g700_*.tif"]', 'images = ["g700_*.tif"]\ngrains = { gap_px = 2.0 }'))
    run = run_study(load_study(toml), out, workers=1, report=False)
    assert (run.computed, run.reused) == (2, 4)


def test_bad_field_is_recorded_and_the_rest_go_on(study_dir, tmp_path):
    (study_dir / "g700_f3.tif").write_bytes(b"this is not a TIFF")
    out = tmp_path / "out"
    res = run_cli("study", study_dir / "study.toml", "--out", out, "--workers", "1",
                  "--no-report")
    assert res.returncode == 1, res.stderr
    assert "failed: S-700 g700_f3.tif (grains)" in res.stderr
    doc = json.loads((out / "study.json").read_text())
    (bad,) = doc["failed"]
    assert bad["image"] == "g700_f3.tif" and "g700_f3.tif" in bad["reason"]
    assert "/tmp" not in bad["reason"]  # the worker's temporary copy is not named
    s700 = doc["specimens"][1]
    assert s700["grains"]["n_fields"] == 2  # the two good fields are measured
    assert s700["strength"] is not None


def test_cli_reports_study_file_errors_with_line(study_dir, tmp_path):
    toml = study_dir / "study.toml"
    toml.write_text(toml.read_text().replace('draws = 2000', 'draws = "lots"'))
    res = run_cli("study", toml, "--out", tmp_path / "out")
    assert res.returncode == 2
    assert "sectio: study.toml line 4, key study.draws: expected an integer" in res.stderr


def test_unknown_scheduler_address_is_an_option_error(study_dir, tmp_path):
    from sectio.errors import OptionError

    pytest.importorskip("dask.distributed")
    with pytest.raises(OptionError, match=r"--scheduler 'localhost:1' is not a scheduler"):
        run_study(load_study(study_dir / "study.toml"), tmp_path / "o", scheduler="localhost:1",
                  report=False)


def test_kill_and_rerun_equals_uninterrupted_run(study_dir, tmp_path):
    """SIGKILL the run after the first field result appears, rerun, compare the JSON."""
    ref_out = tmp_path / "ref"
    run_study(load_study(study_dir / "study.toml"), ref_out, workers=1, report=False)
    out = tmp_path / "killed"
    code = "import sys; from sectio.cli import main; sys.exit(main())"
    proc = subprocess.Popen(
        [sys.executable, "-c", code, "study", str(study_dir / "study.toml"), "--out", str(out),
         "--workers", "2", "--no-report"],
        stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True,
        env={**os.environ, "PYTHONWARNINGS": "ignore"})
    deadline = time.monotonic() + 90
    try:
        while time.monotonic() < deadline and proc.poll() is None:
            if list((out / "fields").glob("*.json")):
                break
            time.sleep(0.01)
    finally:
        os.killpg(proc.pid, signal.SIGKILL)  # the run and its worker processes
        proc.wait()
    done_at_kill = len(list((out / "fields").glob("*.json")))
    assert 1 <= done_at_kill < 6, "the run was not interrupted mid-way"
    assert not (out / "study.json").exists()
    res = run_cli("study", study_dir / "study.toml", "--out", out, "--workers", "1",
                  "--no-report")
    assert res.returncode == 0, res.stderr
    assert f"{6 - done_at_kill} field(s) measured, {done_at_kill} reused" in res.stdout
    assert json_files(out) == json_files(ref_out)
