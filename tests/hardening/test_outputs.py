"""Single commands: hostile file names, failing writers, and one bad field among good ones.

Checks: every output is valid UTF-8 JSON/CSV whatever bytes the image names hold, the
overlay names are portable and unique; a write that fails (disk full, read-only,
permission, a name too long, /proc) is one sentence naming the folder and the cause, exit 2;
a field that raises anything is recorded under "failed" with a sentence and the others are
written (exit 1). Errno meanings: POSIX (ENOSPC, EROFS, EACCES; from memory).
"""

from __future__ import annotations

import csv
import errno
import json
import os
import re

import numpy as np
import pytest

from sectio.cli import main
from sectio.report._safe import display_text, safe_stem
from sectio.specimen import image_name
from sectio.synth._render import write_calibrated_tiff
from sectio.synth.grains import synthetic_grains

HOSTILE = [
    os.fsdecode(b"caf\xe9 latin-1.tif"),  # not UTF-8
    "with spaces and 'quotes\".tif",
    "<script>markup<script> & $\\alpha$.tif",
    "x" * 246 + ".tif",  # 250 characters
    "x" * 246 + ".TIF",  # the same stem but another file (another case)
]


@pytest.fixture(scope="module")
def grain_image():
    img, _ = synthetic_grains((96, 112), 25, rng=11, n_scratches=0)
    return img


@pytest.fixture()
def hostile_files(tmp_path, grain_image):
    d = tmp_path / "in"
    d.mkdir()
    paths = []
    for name in HOSTILE:
        p = os.path.join(os.fsencode(d), os.fsencode(name))
        write_calibrated_tiff(os.fsdecode(p), grain_image, 0.5)
        paths.append(os.fsdecode(p))
    return paths


def test_hostile_names_in_every_output(hostile_files, tmp_path, capsys):
    out = tmp_path / "out"
    assert main(["grains", *hostile_files, "--out", str(out)]) == 0
    capsys.readouterr()
    doc = json.loads((out / "grains.json").read_bytes().decode("utf-8"))  # strict UTF-8
    overlays = [f["overlay_png"] for f in doc["fields"]]
    assert len(set(overlays)) == len(HOSTILE)  # unique
    for name in overlays:
        assert re.fullmatch(r"[A-Za-z0-9._+\-]+", name) and len(name.encode()) < 120, name
        assert (out / name).is_file()
    # the undecodable byte is shown as U+FFFD; markup and quotes travel as text
    images = [f["image"] for f in doc["fields"]]
    assert any("caf\ufffd latin-1.tif" in i for i in images)
    assert any("<script>markup<script> & $\\alpha$.tif" in i for i in images)
    rows = list(csv.DictReader((out / "grains.csv").read_text(encoding="utf-8").splitlines()))
    # the CSV names each image relative to the output folder (sectio.specimen.image_name)
    assert {r["image"] for r in rows} == {image_name(i, out) for i in images}


def test_safe_stem():
    assert safe_stem("field_1.tif") == "field_1"
    a, b = safe_stem("a b.tif"), safe_stem("a_b.tif")
    assert a != b and a.startswith("a_b-") and b == "a_b"
    assert safe_stem(b"caf\xe9.png").startswith("caf-")
    assert len(safe_stem("y" * 250 + ".tif")) <= 89
    assert safe_stem("../../etc/passwd") == "passwd"
    assert safe_stem(".tif").startswith("tif-") and safe_stem("...").startswith("field-")
    assert display_text(os.fsdecode(b"\xff")) == "\ufffd"


@pytest.mark.parametrize("code, cause", [(errno.ENOSPC, "the disk is full"),
                                         (errno.EROFS, "the file system is read-only"),
                                         (errno.EACCES, "permission denied")])
def test_writer_failure_is_one_sentence_exit_2(hostile_files, tmp_path, capsys, monkeypatch,
                                               code, cause):
    import sectio.report._io as io_mod

    def failing_fsync(fd):
        raise OSError(code, os.strerror(code))

    monkeypatch.setattr(io_mod.os, "fsync", failing_fsync)
    out = tmp_path / "full"
    rc = main(["grains", hostile_files[1], "--out", str(out)])
    err = capsys.readouterr().err.strip().splitlines()
    assert rc == 2
    assert re.fullmatch(rf"sectio: Cannot write \S+ in {re.escape(str(out))}: {cause}; "
                        r"free space, .*then run the command again.*\.", err[-1]), err
    assert not [p for p in out.iterdir() if p.name.endswith(".tmp")]  # no temp left


@pytest.mark.parametrize("where, cause", [
    ("/proc/sectio-out", r"Cannot write in the output folder /proc/sectio-out: "),
    ("LONG", r"a file name is too long"),
])
def test_unwritable_output_folders(hostile_files, tmp_path, capsys, where, cause):
    out = str(tmp_path / ("n" * 300)) if where == "LONG" else where
    rc = main(["grains", hostile_files[1], "--out", out])
    err = capsys.readouterr().err
    assert rc == 2 and re.search(cause, err) and "Traceback" not in err, err


def test_dev_null_as_output(hostile_files, capsys):
    rc = main(["grains", hostile_files[1], "--out", "/dev/null"])
    err = capsys.readouterr().err
    assert rc == 2 and "/dev/null" in err and "Traceback" not in err


def test_one_failing_field_is_recorded_and_the_rest_written(hostile_files, tmp_path, capsys,
                                                           monkeypatch):
    import sectio.grains as grains_mod

    real = grains_mod.measure_grains

    def flaky(mg, opts):
        if "spaces" in mg.path:
            raise ZeroDivisionError("float division by zero")
        return real(mg, opts)

    monkeypatch.setattr(grains_mod, "measure_grains", flaky)
    out = tmp_path / "o"
    rc = main(["grains", hostile_files[1], hostile_files[2], "--out", str(out)])
    capsys.readouterr()
    assert rc == 1
    doc = json.loads((out / "grains.json").read_text(encoding="utf-8"))
    assert len(doc["fields"]) == 1 and len(doc["failed"]) == 1
    reason = doc["failed"][0]["reason"]
    assert "could not be measured (ZeroDivisionError: float division by zero)" in reason
    assert doc["summary"]["n_fields"] == 1


def test_narrow_strip_and_tiny_pixel_size(tmp_path, capsys):
    rng = np.random.default_rng(0)
    strip = tmp_path / "strip.tif"
    write_calibrated_tiff(strip, rng.random((16, 4000)).astype(np.float32), 0.5)
    good = tmp_path / "good.tif"
    img, _ = synthetic_grains((96, 112), 25, rng=3, n_scratches=0)
    write_calibrated_tiff(good, img, 0.5)
    out = tmp_path / "o"
    rc = main(["grains", str(strip), str(good), "--out", str(out)])
    capsys.readouterr()
    doc = json.loads((out / "grains.json").read_text())
    assert rc == 1 and len(doc["fields"]) == 1 and doc["failed"][0]["image"] == str(strip)
    rc = main(["grains", str(good), "--pixel-size", "5e-324um", "--out", str(out)])
    assert rc == 2 and "5e-324um" in capsys.readouterr().err
