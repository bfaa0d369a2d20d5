"""Study file parsing: accepted forms, and every error names the line and the key."""

from __future__ import annotations

import pytest

from sectio.errors import StudyFileError
from sectio.study import key_lines, load_study, parse_study

from .conftest import STUDY_TOML


def test_demo_like_file_parses(study_dir):
    st = load_study(study_dir / "study.toml")
    assert [s.name for s in st.specimens] == ["S-600", "S-700", "P-4h"]
    s600 = st.specimens[0]
    assert s600.images == ("g600_f1.tif", "g600_f2.tif")  # relative to the study folder
    assert all(p.is_absolute() and p.exists() for p in s600.image_paths)
    assert s600.measure == ("grains",)
    assert s600.trial.to_dict() == {"name": "annealing temperature", "value": 600.0,
                                    "unit": "°C"}
    assert not s600.trial.is_time and st.specimens[2].trial.is_time
    assert (st.seed, st.draws, st.bootstrap) == (0, 2000, 50)
    assert st.n_fields() == 6


def test_key_lines_maps_headers_keys_dotted_and_inline():
    text = ('[study]\ntitle = "x"\n\n[specimens.A-1]\nimages = ["a.tif"]\n'
            'trial = { name = "t", value = 4, unit = "h" }\n'
            'grains.gap_px = 2.0\n[specimens."B 2".calibration]\npixel_size = "1um"\n')
    lines = key_lines(text)
    assert lines[("study", "title")] == 2
    assert lines[("specimens", "A-1")] == 4
    assert lines[("specimens", "A-1", "images")] == 5
    assert lines[("specimens", "A-1", "trial", "unit")] == 6
    assert lines[("specimens", "A-1", "grains", "gap_px")] == 7
    assert lines[("specimens", "B 2", "calibration", "pixel_size")] == 9


def _spoil(study_dir, old: str, new: str):
    # expected line numbers below are counted by hand in conftest.STUDY_TOML
    text = STUDY_TOML.replace(old, new, 1)
    assert text != STUDY_TOML
    return parse_study(text, study_dir / "study.toml")


@pytest.mark.parametrize(
    ("old", "new", "pattern"),
    [
        ('images = ["g700_*.tif"]', 'images = ["nothing_*.tif"]',
         r"study\.toml line 14, key specimens\.S-700\.images: no image file matches"),
        ('material = "steel-ferritic-lowc"\nseries = "anneal"\ntrial = { name = '
         '"annealing temperature", value = 600',
         'material = "unobtainium"\nseries = "anneal"\ntrial = { name = '
         '"annealing temperature", value = 600',
         r"line 9, key specimens\.S-600\.material: .*unobtainium"),
        ('measure = ["particles"]', 'measure = ["hardness"]',
         r"line 21, key specimens\.P-4h\.measure: list 'grains' and/or 'particles'"),
        ('draws = 2000', 'draws = "many"', r"line 4, key study\.draws: expected an integer"),
        ('bootstrap = 50', 'bootstrap = 50\ncolour = "blue"',
         r"line 6, key study\.colour: unknown key; known keys here"),
        ('value = 4, unit = "h"', 'unit = "h"', r"line 24, key specimens\.P-4h\.trial: "
         r"missing 'value'"),
        ('series = "ageing"', 'series = "anneal"',
         r"key specimens\.P-4h\.trial: series 'anneal' mixes trial variables"),
        ('[specimens.P-4h]', '[specimens.P-4h]\ngrains = { line_spacing_px = 0 }',
         r"line 20, key specimens\.P-4h\.grains\.line_spacing_px: line_spacing_px 0 is outside "
         r"the allowed range"),
        ('[specimens.P-4h]', '[specimens.P-4h]\ncalibration = { pixel_size = "fast" }',
         r"line 20, key specimens\.P-4h\.calibration\.pixel_size: Cannot read"),
        ('[specimens.P-4h]', '[specimens.P-4h]\nparticles = { phase = "grey" }',
         r"line 20, key specimens\.P-4h\.particles\.phase: phase must be 'bright' or 'dark'"),
        ('[specimens.P-4h]', '[specimens.P-4h]\nstrength = { orowan_form = "magic" }',
         r"line 20, key specimens\.P-4h\.strength\.orowan_form: .magic. is not one of "
         r"line_tension"),
        ('[specimens.P-4h]', '[specimens."P 4h"]',
         r"key specimens\.P 4h: specimen names may use letters"),
    ],
)
def test_errors_name_line_and_key(study_dir, old, new, pattern):
    with pytest.raises(StudyFileError, match=pattern):
        _spoil(study_dir, old, new)


def test_syntax_error_reports_line(study_dir):
    with pytest.raises(StudyFileError, match=r"study\.toml: not valid TOML .*line 7"):
        _spoil(study_dir, '[specimens.S-600]', '[specimens.S-600')


def test_missing_images_key_and_no_specimens(study_dir):
    with pytest.raises(StudyFileError, match=r"line 7, key specimens\.S-600: missing key "
                                             r"'images'"):
        _spoil(study_dir, 'images = ["g600_*.tif"]\n', '')
    with pytest.raises(StudyFileError, match=r"key specimens: no specimens"):
        parse_study('[study]\ntitle = "empty"\n', study_dir / "study.toml")


def test_missing_study_file(tmp_path):
    with pytest.raises(StudyFileError, match=r"Cannot find the study file .*nope\.toml"):
        load_study(tmp_path / "nope.toml")


def test_report_table_and_overrides(tmp_path):
    from sectio.study import parse_study, with_report_fields

    (tmp_path / "a.tif").write_bytes(b"")
    text = ('[study]\ntitle = "t"\n[report]\nnumber = "R-1"\nstandards = "ASTM E112-13"\n'
            'etchant = "nital"\n[specimens.A]\nimages = ["a.tif"]\netchant = "picral"\n'
            '[specimens.B]\nimages = ["a.tif"]\n')
    study = parse_study(text, tmp_path / "s.toml")
    assert study.report["standards"] == ["ASTM E112-13"]
    recs = {s.name: s.record for s in study.specimens}
    assert recs == {"A": {"etchant": "picral"}, "B": {"etchant": "nital"}}
    over = with_report_fields(study, number="R-2", etchant="Kalling's", operator=None)
    assert over.report["number"] == "R-2" and "operator" not in over.report
    # A specimen's own value wins; the default moves for the others.
    assert {s.name: s.record["etchant"] for s in over.specimens} == {"A": "picral",
                                                                      "B": "Kalling's"}
    with pytest.raises(StudyFileError, match=r"line 6, key report.signed: unknown key"):
        parse_study(text.replace('etchant = "nital"', 'signed = "x"'), tmp_path / "s.toml")
    with pytest.raises(StudyFileError, match="list the standards as strings"):
        parse_study(text.replace('"ASTM E112-13"', '[1]'), tmp_path / "s.toml")
