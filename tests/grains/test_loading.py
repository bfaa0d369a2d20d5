"""Reading micrographs, their pixel size, and every bad-input path of ``load``.

External references: the TIFF 6.0 specification (ResolutionUnit 2 = inch, 3 = centimetre;
from memory), the exact inch (25.4 mm, international yard and pound of 1959; from memory),
1 psi = 6.894757 kPa (NIST SP 811; from memory), and scikit-image's ``rgb2gray``, which
computes the same ITU-R BT.709 luminance another way.
"""

from __future__ import annotations

import re

import numpy as np
import pytest
import tifffile
from PIL import Image
from skimage.color import rgb2gray

from sectio.errors import (
    CalibrationError,
    CalibrationWarning,
    ImageReadError,
    ImageWarning,
    InputError,
    MeasurementError,
    OptionError,
)
from sectio.micrograph import from_array, load
from sectio.synth._render import write_calibrated_tiff
from sectio.units import mpa_to_ksi, parse_length_um, parse_stress_mpa


def _ramp(h=40, w=50, lo=10, hi=200, dtype=np.uint8):
    """A test image with a known grey range (not blank, not tiny)."""
    yy, xx = np.mgrid[0:h, 0:w]
    img = lo + (hi - lo) * (xx + yy) / (h + w - 2)
    return np.round(img).astype(dtype)


def _scaled(a):
    a = np.asarray(a, float)
    return (a - a.min()) / (a.max() - a.min())


def _named(path) -> str:
    return re.escape(str(path))


# --------------------------------------------------------------------------- formats
@pytest.mark.parametrize(
    "dtype, lo, hi",
    [(np.uint8, 10, 200), (np.uint16, 1000, 60000), (np.float32, -3.5, 12.25)],
)
def test_tiff_bit_depths(tmp_path, dtype, lo, hi):
    a = _ramp(lo=lo, hi=hi, dtype=dtype) if dtype != np.float32 else (
        _ramp(lo=0, hi=255).astype(np.float32) / 255 * (hi - lo) + lo
    )
    p = tmp_path / "f.tif"
    write_calibrated_tiff(p, a, 0.5)
    mg = load(p)
    assert mg.image.dtype == np.float32 and mg.image.shape == a.shape
    # scaled to [0, 1] with dark = 0, grey levels kept in order and proportion
    np.testing.assert_allclose(mg.image, _scaled(a), atol=1e-6)
    assert mg.image.min() == 0.0 and mg.image.max() == 1.0
    # TIFF ResolutionUnit 3 = centimetre (TIFF 6.0): 20 000 px/cm ↔ 0.5 µm
    assert mg.pixel_size_um == pytest.approx(0.5, rel=1e-6)
    assert mg.pixel_size_source == "TIFF resolution tags"
    assert mg.path == str(p) and mg.name == "f.tif"


def test_multipage_tiff_warns_and_uses_page_one(tmp_path):
    a, b = _ramp(), _ramp()[::-1].copy()
    p = tmp_path / "stack.tif"
    tifffile.imwrite(p, np.stack([a, b]))
    with pytest.warns(ImageWarning, match=r"has 2 pages; using page 1 only"):
        mg = load(p, pixel_size="1um")
    np.testing.assert_allclose(mg.image, _scaled(a), atol=1e-6)
    assert any("multi-page" in n for n in mg.notes)


@pytest.mark.parametrize("suffix, fmt", [(".png", "PNG"), (".bmp", "BMP"), (".jpg", "JPEG")])
def test_png_bmp_jpeg(tmp_path, suffix, fmt):
    a = _ramp(64, 80)
    p = tmp_path / f"f{suffix}"
    Image.fromarray(a).save(p, format=fmt, **({"quality": 95} if fmt == "JPEG" else {}))
    mg = load(p, pixel_size="0.25um")
    tol = 0.03 if fmt == "JPEG" else 1e-6  # JPEG is lossy
    np.testing.assert_allclose(mg.image, _scaled(a), atol=tol)
    assert mg.pixel_size_um == 0.25 and mg.pixel_size_source == "given"


def test_16bit_png(tmp_path):
    a = _ramp(lo=500, hi=40000, dtype=np.uint16)
    p = tmp_path / "deep.png"
    Image.fromarray(a).save(p)
    mg = load(p, pixel_size="1um")
    np.testing.assert_allclose(mg.image, _scaled(a), atol=1e-6)


def test_rgb_converted_to_grey_like_skimage(tmp_path):
    rng = np.random.default_rng(3)
    rgb = rng.integers(0, 256, size=(48, 64, 3), dtype=np.uint8)
    p = tmp_path / "colour.png"
    Image.fromarray(rgb).save(p)
    mg = load(p, pixel_size="1um")
    # scikit-image rgb2gray: ITU-R BT.709 luminance, the same weights computed elsewhere
    np.testing.assert_allclose(mg.image, _scaled(rgb2gray(rgb)), atol=1e-5)
    assert any("grey" in n for n in mg.notes)
    # an RGB file whose three channels are equal is plain grey: no note
    g = np.repeat(_ramp(48, 64)[..., None], 3, axis=2)
    p2 = tmp_path / "greyrgb.png"
    Image.fromarray(g).save(p2)
    mg2 = load(p2, pixel_size="1um")
    assert not any("grey" in n for n in mg2.notes)
    np.testing.assert_allclose(mg2.image, _scaled(g[..., 0]), atol=1e-6)


def test_rgba_and_grey_alpha(tmp_path):
    rgba = np.dstack([_ramp(), _ramp(), _ramp(), np.full((40, 50), 255, np.uint8)])
    p = tmp_path / "rgba.png"
    Image.fromarray(rgba, mode="RGBA").save(p)
    np.testing.assert_allclose(load(p, pixel_size="1um").image, _scaled(_ramp()), atol=1e-6)
    la = np.dstack([_ramp(), np.full((40, 50), 255, np.uint8)])
    assert from_array(la, pixel_size_um=1.0).image.shape == (40, 50)


# --------------------------------------------------------------------------- pixel size
@pytest.mark.parametrize(
    "text, expected_um",
    [("0.5um", 0.5), ("0.5µm", 0.5), ("0.5 μm", 0.5), ("500nm", 0.5), ("0.0005mm", 0.5),
     ("500 nm", 0.5), (0.5, 0.5), ("2 microns", 2.0)],
)
def test_pixel_size_option_with_units(tmp_path, text, expected_um):
    p = tmp_path / "f.tif"
    tifffile.imwrite(p, _ramp())
    mg = load(p, pixel_size=text)
    # SI prefixes: 1 nm = 1e-3 µm, 1 mm = 1e3 µm (definition)
    assert mg.pixel_size_um == pytest.approx(expected_um, rel=1e-12)
    assert mg.pixel_size_source == "given"


def test_option_overrides_tags_with_a_warning(tmp_path):
    p = tmp_path / "f.tif"
    write_calibrated_tiff(p, _ramp(), 0.5)
    with pytest.warns(CalibrationWarning, match=r"TIFF resolution tags say 0\.5 µm.*typed"):
        mg = load(p, pixel_size="0.2um")
    assert mg.pixel_size_um == pytest.approx(0.2) and mg.pixel_size_source == "given"
    # both values in the JSON
    src = mg.to_dict()["calibration"]["sources"]
    assert src[0]["pixel_size_um"] == pytest.approx(0.5) and src[0]["used"] is False
    assert src[0]["differs_by_pct"] == pytest.approx(150.0)
    assert any("typed --pixel-size" in n for n in mg.notes)
    # within 2 %: no warning, the difference is still recorded
    mg = load(p, pixel_size="0.505um")
    assert mg.calibration["sources"][0]["differs_by_pct"] == pytest.approx(0.99, abs=0.01)


def test_resolution_tags_in_inches(tmp_path):
    p = tmp_path / "inch.tif"
    # TIFF 6.0 ResolutionUnit 2 = inch; 1 in = 25 400 µm exactly → 50 800 px/in = 0.5 µm
    tifffile.imwrite(p, _ramp(), resolution=(50800, 50800), resolutionunit="INCH")
    mg = load(p)
    assert mg.pixel_size_um == pytest.approx(0.5, rel=1e-9)
    assert mg.pixel_size_source == "TIFF resolution tags"


def test_resolution_tags_in_centimetres_any_size(tmp_path):
    p = tmp_path / "cm.tif"
    tifffile.imwrite(p, _ramp(), resolution=(1e4 / 0.137, 1e4 / 0.137),
                     resolutionunit="CENTIMETER")
    assert load(p).pixel_size_um == pytest.approx(0.137, rel=1e-6)


def test_screen_dpi_is_not_a_calibration(tmp_path):
    p = tmp_path / "screen.tif"
    tifffile.imwrite(p, _ramp(), resolution=(72, 72), resolutionunit="INCH")
    with pytest.raises(CalibrationError, match=_named(p) + r".*--pixel-size"):
        load(p)


@pytest.mark.parametrize("name", ["plain.tif", "plain.png"])
def test_missing_pixel_size(tmp_path, name):
    p = tmp_path / name
    if name.endswith(".tif"):
        tifffile.imwrite(p, _ramp())  # tifffile writes ResolutionUnit NONE: no calibration
    else:
        Image.fromarray(_ramp()).save(p)
    msg = _named(p) + r" carries no pixel size.*--pixel-size.*--objective.*--scale-bar"
    with pytest.raises(CalibrationError, match=msg):
        load(p)


def test_non_square_pixels_refused_unless_pixel_size_given(tmp_path):
    p = tmp_path / "aniso.tif"
    tifffile.imwrite(p, _ramp(), resolution=(20000, 10000), resolutionunit="CENTIMETER")
    with pytest.raises(CalibrationError, match="non-square pixels.*--pixel-size"):
        load(p)
    # the message says to give --pixel-size: then it is accepted, with a note
    mg = load(p, pixel_size="0.5um")
    assert mg.pixel_size_um == 0.5
    assert any("non-square" in n for n in mg.notes)
    assert mg.calibration["sources"][0]["non_square"] is True


@pytest.mark.parametrize(
    "text, match",
    [("0.5", r"--pixel-size '0\.5' has no unit"),
     ("0.5 furlong", r"Unknown length unit 'furlong' in --pixel-size"),
     ("-1um", r"--pixel-size must be positive"),
     ("0nm", r"--pixel-size must be positive"),
     ("half a micron", r"Cannot read --pixel-size 'half a micron'")],
)
def test_bad_pixel_size_option(tmp_path, text, match):
    p = tmp_path / "f.tif"
    tifffile.imwrite(p, _ramp())
    with pytest.raises(OptionError, match=match):
        load(p, pixel_size=text)


def test_crop_bottom_recorded(tmp_path):
    a = _ramp(60, 50)
    p = tmp_path / "strip.tif"
    write_calibrated_tiff(p, a, 0.5)
    mg = load(p, crop_bottom=20)
    assert mg.image.shape == (40, 50) and mg.crop_bottom_px == 20
    assert mg.original_shape == (60, 50)
    np.testing.assert_allclose(mg.image, _scaled(a[:40]), atol=1e-6)
    d = mg.to_dict()
    assert d["crop_bottom_px"] == 20 and d["shape_px"] == [40, 50]
    assert d["original_shape_px"] == [60, 50] and d["pixel_size_um"] == pytest.approx(0.5)
    with pytest.raises(OptionError, match=r"--crop-bottom 50 does not fit " + _named(p)):
        load(p, crop_bottom=50)
    with pytest.raises(OptionError, match=r"--crop-bottom -3"):
        load(p, crop_bottom=-3)


# --------------------------------------------------------------------------- bad input
def test_missing_file(tmp_path):
    p = tmp_path / "nope.tif"
    with pytest.raises(ImageReadError, match=r"Cannot find the image file " + _named(p)):
        load(p, pixel_size="1um")


def test_folder_instead_of_file(tmp_path):
    d = tmp_path / "a_folder.tif"
    d.mkdir()
    with pytest.raises(ImageReadError, match=_named(d) + r" is a folder"):
        load(d, pixel_size="1um")


@pytest.mark.parametrize("name", ["bad.tif", "bad.png", "bad.jpg"])
def test_corrupt_file(tmp_path, name):
    p = tmp_path / name
    p.write_bytes(b"this is not an image at all" * 20)
    with pytest.raises(ImageReadError, match=_named(p) + r" could not be read"):
        load(p, pixel_size="1um")


def test_truncated_tiff(tmp_path):
    p = tmp_path / "cut.tif"
    write_calibrated_tiff(p, _ramp(200, 200), 0.5)
    data = p.read_bytes()
    p.write_bytes(data[: len(data) // 3])
    with pytest.raises(ImageReadError, match=_named(p) + r" could not be read as a TIFF"):
        load(p)


@pytest.mark.parametrize("name, shown", [("scan.gif", r"\.gif"), ("noext", r"\(none\)")])
def test_unsupported_suffix(tmp_path, name, shown):
    p = tmp_path / name
    p.write_bytes(b"GIF89a")
    with pytest.raises(ImageReadError, match=_named(p) + r": unsupported file type " + shown):
        load(p, pixel_size="1um")


def test_odd_3d_stack(tmp_path):
    p = tmp_path / "five.tif"
    tifffile.imwrite(p, np.zeros((40, 50, 5), np.uint8) + _ramp()[..., None],
                     photometric="minisblack", planarconfig="contig")
    with pytest.raises(ImageReadError, match=_named(p) + r" has shape \(40, 50, 5\), not a 2-D"):
        load(p, pixel_size="1um")
    with pytest.raises(ImageReadError, match=r"stack\.npy has shape \(5, 6, 7\)"):
        from_array(np.zeros((5, 6, 7)), pixel_size_um=1.0, path="stack.npy")


def test_blank_image(tmp_path):
    p = tmp_path / "blank.tif"
    tifffile.imwrite(p, np.full((64, 64), 77, np.uint8))
    msg = _named(p) + r" is blank \(every pixel has the value 77\)"
    with pytest.raises(MeasurementError, match=msg):
        load(p, pixel_size="1um")


def test_tiny_image_narrow(tmp_path):
    p = tmp_path / "narrow.png"
    Image.fromarray(_ramp(40, 12)).save(p)
    with pytest.raises(ImageReadError, match=_named(p) + r" is only 12 x 40 pixels"):
        load(p, pixel_size="1um")


# An image under 17 rows must be reported as too small, not as a --crop-bottom problem.
def test_tiny_image_short(tmp_path):
    p = tmp_path / "tiny.png"
    Image.fromarray(_ramp(10, 12)).save(p)
    with pytest.raises(ImageReadError, match=_named(p) + r" is only 12 x 10 pixels"):
        load(p, pixel_size="1um")


def test_nonfinite_pixels(tmp_path):
    a = _ramp().astype(np.float32)
    a[5, 5] = np.nan
    p = tmp_path / "nan.tif"
    tifffile.imwrite(p, a)
    mg = load(p, pixel_size="1um")
    assert np.isfinite(mg.image).all()
    assert any("non-finite" in n for n in mg.notes)
    p2 = tmp_path / "allnan.tif"
    tifffile.imwrite(p2, np.full((32, 32), np.nan, np.float32))
    with pytest.raises(MeasurementError, match=_named(p2) + r" holds no finite pixel values"):
        load(p2, pixel_size="1um")


def test_from_array_needs_a_positive_pixel_size():
    with pytest.raises(CalibrationError, match=r"<array>: pixel size must be a positive"):
        from_array(_ramp(), pixel_size_um=0.0)


def test_every_error_is_an_input_error_and_a_builtin():
    # DESIGN.md / STYLE.md: user errors subclass InputError and the matching builtin
    assert issubclass(ImageReadError, InputError) and issubclass(ImageReadError, OSError)
    for cls in (CalibrationError, OptionError, MeasurementError):
        assert issubclass(cls, InputError) and issubclass(cls, ValueError)


# --------------------------------------------------------------------------- units
@pytest.mark.parametrize(
    "text, um",
    [("0.5um", 0.5), ("0.5 µm", 0.5), ("0.5μm", 0.5), ("500nm", 0.5), ("0.0005mm", 0.5),
     ("1e-6 m", 1.0), ("2 microns", 2.0), ("3 micron", 3.0), (".25um", 0.25), ("0.5UM", 0.5),
     ("0.001in", 25.4), ("1 inch", 25400.0), ("250 pm", 2.5e-4)],
)
def test_parse_length_um(text, um):
    # SI prefixes (definition); 1 in = 25.4 mm exactly (1959 agreement, from memory)
    assert parse_length_um(text) == pytest.approx(um, rel=1e-12)


def test_parse_length_defaults_and_errors():
    assert parse_length_um(3, default_unit="um") == 3.0
    assert parse_length_um("3", what="--min-grain-size", default_unit="nm") == pytest.approx(0.003)
    with pytest.raises(OptionError, match=r"The --min-grain-size 3\.0 has no unit"):
        parse_length_um(3.0, what="--min-grain-size")
    with pytest.raises(OptionError, match=r"Unknown length unit 'ft'"):
        parse_length_um("2 ft")
    with pytest.raises(OptionError, match=r"must be positive"):
        parse_length_um("-2um")
    with pytest.raises(OptionError, match=r"Cannot read length 'um5'"):
        parse_length_um("um5")


@pytest.mark.parametrize(
    "text, mpa",
    [("310 MPa", 310.0), ("310mpa", 310.0), ("0.31 GPa", 310.0), ("45 ksi", 310.264065),
     ("45000 psi", 310.264065), ("3.1e8 Pa", 310.0), ("310000 kPa", 310.0), ("310", 310.0),
     (250.0, 250.0)],
)
def test_parse_stress_mpa(text, mpa):
    # 1 psi = 6.894757 kPa (NIST SP 811, from memory); ksi = 1000 psi; SI prefixes
    assert parse_stress_mpa(text) == pytest.approx(mpa, rel=1e-6)


def test_parse_stress_errors_and_ksi_round_trip():
    with pytest.raises(OptionError, match=r"Unknown stress unit 'bar' in yield '3 bar'"):
        parse_stress_mpa("3 bar", what="yield")
    with pytest.raises(OptionError, match=r"Cannot read stress 'strong'"):
        parse_stress_mpa("strong")
    assert mpa_to_ksi(parse_stress_mpa("45 ksi")) == pytest.approx(45.0, rel=1e-12)
