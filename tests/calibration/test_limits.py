"""Sanity limits of a pixel size (0.1 nm – 1 mm per pixel) and units typed by people.

Unit factors are definitions (SI prefixes; 1 in = 25.4 mm exactly, 1959 agreement, from
memory). The limits are ours: 0.1 nm is below any SEM/TEM pixel used on a metal section,
1 mm above any light-microscope pixel (common practice).
"""

from __future__ import annotations

import pytest
import tifffile

from sectio.calibration import check_pixel_size_um, resolve_pixel_size
from sectio.calibration._metadata import FileSize
from sectio.errors import CalibrationError, OptionError
from sectio.micrograph import load

from .test_metadata import _image


@pytest.fixture()
def plain(tmp_path):
    p = tmp_path / "plain.tif"
    tifffile.imwrite(p, _image())
    return p


@pytest.mark.parametrize("text", ["5m", "1e30um", "0.5in", "2mm", "0.05nm", "50pm"])
def test_implausible_typed_sizes_refused(plain, text):
    with pytest.raises(OptionError, match=r"from --pixel-size .* is outside the plausible 0\.1 "
                                          r"nm to 1 mm; check the number and its unit"):
        load(plain, pixel_size=text)


@pytest.mark.parametrize("text, um", [("0.1nm", 1e-4), ("1mm", 1e3), ("2e-5in", 0.508),
                                      ("0.0001 inch", 2.54), ("100pm", 1e-4)])
def test_limits_inclusive_and_inch_units(plain, text, um):
    assert load(plain, pixel_size=text).pixel_size_um == pytest.approx(um, rel=1e-12)


def test_implausible_file_size_refused_with_its_source(tmp_path):
    # resolution tags of 1 pixel per centimetre: 10 mm pixels
    p = tmp_path / "coarse.tif"
    tifffile.imwrite(p, _image(), resolution=(1, 1), resolutionunit="CENTIMETER")
    with pytest.raises(CalibrationError, match=r"coarse\.tif: a pixel size of 1e\+04 µm from "
                                               r"the TIFF resolution tags is outside"):
        load(p)
    # a typed size is accepted; the file's value is listed beside it
    from sectio.errors import CalibrationWarning

    with pytest.warns(CalibrationWarning):
        mg = load(p, pixel_size="1um")
    assert mg.calibration["sources"][0]["pixel_size_um"] == pytest.approx(1e4)


def test_check_and_resolve_directly():
    assert check_pixel_size_um(0.5, what="x") == 0.5
    with pytest.raises(CalibrationError, match=r"^f\.tif: a pixel size of 2000 µm from the scale "
                                             r"bar is outside"):
        check_pixel_size_um(2000.0, what="the scale bar", path="f.tif")
    r = resolve_pixel_size(path="f.tif", file_sources=[FileSize("TIFF resolution tags", .5, .5)])
    assert r.pixel_size_um == 0.5 and r.details["used"] == "TIFF resolution tags"
