"""Stage-micrometer calibration: ruling period against exact synthetic truth, the command,
the calibration file and ``--objective`` on the measuring commands and in study files.

Truth: ``sectio.synth.strips.stage_micrometer`` puts the line centres at exactly
``k * period_px`` along the normal; µm/px = division / period (definition).
"""

from __future__ import annotations

import json
import re
import tomllib
from datetime import UTC, datetime

import numpy as np
import pytest
import tifffile

from sectio.calibration._calibrate import calibrate_objective
from sectio.calibration._micrometer import measure_ruling
from sectio.calibration._objectives import (
    calibration_file_path,
    lookup_objective,
    read_calibrations,
    store_objective,
)
from sectio.cli import main
from sectio.errors import CalibrationError, OptionError, StudyFileError
from sectio.study._studyfile import parse_study
from sectio.synth.grains import synthetic_grains
from sectio.synth.strips import attach_strip, font_paths, info_strip, stage_micrometer


@pytest.mark.parametrize("period, angle, dark, shape", [
    (23.7, 0.0, True, (400, 640)), (11.3, 1.5, True, (512, 512)),
    (48.2, -3.0, False, (600, 800)), (17.05, 8.0, True, (480, 640)),
    (31.4, 90.0, True, (640, 480)), (7.9, 0.4, False, (300, 400))])
def test_ruling_period_exact(period, angle, dark, shape):
    img = stage_micrometer(shape, period_px=period, angle_deg=angle, dark_lines=dark,
                           rng=int(period * 10))
    r = measure_ruling(img)
    # measured: within 0.02 % on all six (blur 1.2 px, noise 2 %, long line every 5th)
    assert r.period_px == pytest.approx(period, rel=2e-4)
    assert r.dark_lines is dark
    assert abs((r.angle_deg - angle + 90) % 180 - 90) < 0.3
    assert r.period_se_px < 0.01 and r.lines >= 5


def test_noisy_and_blurred_rulings():
    noisy = stage_micrometer((400, 600), period_px=19.3, angle_deg=2, noise=0.15, rng=4)
    blurred = stage_micrometer((400, 600), period_px=19.3, angle_deg=-1, blur_px=4, rng=5)
    assert measure_ruling(noisy).period_px == pytest.approx(19.3, rel=5e-4)  # measured 0.002 %
    assert measure_ruling(blurred).period_px == pytest.approx(19.3, rel=1e-3)  # 0.04 %


@pytest.mark.parametrize("what", ["grains", "noise", "one line"])
def test_not_a_ruling_refused(what):
    rng = np.random.default_rng(0)
    img = {"grains": synthetic_grains((400, 500), 200, rng=2)[0],
           "noise": rng.normal(size=(300, 300)),
           "one line": np.pad(np.ones((300, 10)), ((0, 0), (100, 190)))}[what]
    with pytest.raises(CalibrationError, match=r"x\.tif: no regular ruling of at least 5 lines"):
        measure_ruling(img, path="x.tif")


@pytest.fixture()
def ruling_file(tmp_path):
    p = tmp_path / "micrometer_50x.tif"
    tifffile.imwrite(p, stage_micrometer((480, 640), period_px=76.9, angle_deg=0.7, rng=3))
    return p


def test_calibrate_command_writes_and_keeps_history(tmp_path, ruling_file, capsys):
    cal = tmp_path / "lab" / "calibrations.toml"
    args = ["calibrate", str(ruling_file), "--objective", "50x", "--division", "10um",
            "--calibration-file", str(cal), "--microscope", "bench 2", "--by", "A. Tester"]
    assert main(args) == 0
    out = capsys.readouterr().out
    assert "objective 50x: 0.13" in out and "written to" in out
    doc = tomllib.loads(cal.read_text(encoding="utf-8"))
    rec = doc["objectives"]["50x"]
    assert rec["pixel_size_um"] == pytest.approx(10 / 76.9, rel=2e-4)  # exact truth
    assert rec["measured_by"] == "A. Tester" and rec["microscope"] == "bench 2"
    assert re.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ", rec["measured"])
    assert rec["method"].startswith("stage micrometer, 10 µm divisions")
    assert rec["image"].endswith("micrometer_50x.tif") and len(rec["image_sha256"]) == 64
    # measured again: the old value is kept under "previous" and the change printed
    assert main(args) == 0
    assert "previous value 0.13" in capsys.readouterr().out
    rec2 = read_calibrations(cal)["50x"]
    assert rec2["previous"]["pixel_size_um"] == rec["pixel_size_um"]
    # --dry-run writes nothing
    before = cal.read_bytes()
    assert main([*args[:-4], "--dry-run"]) == 0
    assert cal.read_bytes() == before


def test_calibrate_from_scale_bar(tmp_path):
    img = attach_strip(synthetic_grains((400, 512), 150, rng=8)[0],
                       info_strip(512, bar_px=200.0, label="50 µm", font=font_paths()[0]))
    p = tmp_path / "bar.tif"
    tifffile.imwrite(p, img)
    cal = tmp_path / "c.toml"
    rec, file, old = calibrate_objective(p, objective="20x", scale_bar="50um",
                                         calibration_file=cal,
                                         now=datetime(2026, 1, 2, 3, 4, 5, tzinfo=UTC))
    assert rec["pixel_size_um"] == pytest.approx(50 / 200, rel=0.005)
    assert rec["measured"] == "2026-01-02T03:04:05Z" and old is None and file == cal


def test_calibrate_option_errors(ruling_file, tmp_path):
    with pytest.raises(OptionError, match=r"needs --division .* or --scale-bar"):
        calibrate_objective(ruling_file, objective="5x", calibration_file=tmp_path / "c.toml")
    with pytest.raises(OptionError, match=r"--objective needs a name"):
        store_objective(" ", {"pixel_size_um": 1.0}, tmp_path / "c.toml")


def test_file_location_option_env_user(tmp_path, monkeypatch):
    monkeypatch.delenv("SECTIO_CALIBRATIONS", raising=False)
    monkeypatch.setenv("XDG_CONFIG_HOME", str(tmp_path / "cfg"))
    assert calibration_file_path() == tmp_path / "cfg" / "sectio" / "calibrations.toml"
    monkeypatch.setenv("SECTIO_CALIBRATIONS", str(tmp_path / "lab.toml"))
    assert calibration_file_path() == tmp_path / "lab.toml"
    assert calibration_file_path(tmp_path / "x.toml") == tmp_path / "x.toml"


def test_lookup_errors(tmp_path):
    cal = tmp_path / "c.toml"
    with pytest.raises(OptionError, match=r"--objective '50x' is not calibrated in .*c\.toml "
                                          r"\(the file does not exist\); known: none yet"):
        lookup_objective("50x", cal)
    store_objective("10x", {"pixel_size_um": 0.65}, cal)
    with pytest.raises(OptionError, match=r"known: 10x; measure it with 'sectio calibrate"):
        lookup_objective("50x", cal)
    cal.write_text('[objectives.bad]\npixel_size_um = "big"\n', encoding="utf-8")
    with pytest.raises(CalibrationError, match=r"objectives\.bad\.pixel_size_um must be a "
                                               r"positive number"):
        lookup_objective("bad", cal)
    cal.write_text("[objectives\n", encoding="utf-8")
    with pytest.raises(CalibrationError, match=r"not a valid calibration file"):
        read_calibrations(cal)


def test_objective_on_grains_and_particles(tmp_path, monkeypatch, capsys):
    cal = tmp_path / "c.toml"
    store_objective("50x", {"pixel_size_um": 0.25, "measured": "2026-01-01T00:00:00Z"}, cal)
    monkeypatch.setenv("SECTIO_CALIBRATIONS", str(cal))
    img, _ = synthetic_grains((384, 384), 120, rng=9)
    p = tmp_path / "f.tif"
    tifffile.imwrite(p, img)
    assert main(["grains", str(p), "--objective", "50x", "--out", str(tmp_path / "g")]) == 0
    f = json.loads((tmp_path / "g" / "grains.json").read_text())["fields"][0]
    assert f["pixel_size_um"] == 0.25 and f["pixel_size_source"] == "objective 50x"
    assert f["calibration"]["objective"]["measured"] == "2026-01-01T00:00:00Z"
    assert main(["particles", str(p), "--objective", "50x", "--out", str(tmp_path / "p")]) in (0, 1)
    doc = json.loads((tmp_path / "p" / "particles.json").read_text())
    assert doc["options"]["objective"] == "50x"
    assert main(["grains", str(p), "--objective", "100x", "--out", str(tmp_path / "x")]) == 2
    assert "--objective '100x' is not calibrated" in capsys.readouterr().err


def test_study_file_objective(tmp_path):
    cal = tmp_path / "lab.toml"
    store_objective("50x", {"pixel_size_um": 0.13}, cal)
    img, _ = synthetic_grains((256, 256), 60, rng=1)
    tifffile.imwrite(tmp_path / "a.tif", img)
    text = ('[study]\ntitle = "t"\ncalibration_file = "lab.toml"\n\n[specimens.A]\n'
            'images = ["a.tif"]\nmeasure = ["grains"]\ncalibration = { objective = "50x" }\n')
    study = parse_study(text, tmp_path / "s.toml")
    c = study.specimens[0].calibration
    assert c["objective"] == "50x" and c["objective_pixel_size_um"] == 0.13
    assert c["calibration_file"] == str(cal.resolve())
    with pytest.raises(StudyFileError, match=r"s\.toml line 8, key specimens\.A\.calibration"
                                             r"\.objective: --objective '20x' is not calibrated"):
        parse_study(text.replace('"50x"', '"20x"'), tmp_path / "s.toml")
    with pytest.raises(StudyFileError, match=r"give one of pixel_size, objective and scale_bar"):
        parse_study(text.replace('objective = "50x"', 'objective = "50x", pixel_size = "1um"'),
                    tmp_path / "s.toml")
