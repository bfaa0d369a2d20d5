"""Scale-bar calibration on synthetic images with an info strip of known geometry."""

from __future__ import annotations

import numpy as np
import pytest
import tifffile

from sectio.calibration import InfoStrip
from sectio.errors import CalibrationError
from sectio.micrograph import load
from sectio.scalebar import measure_scale_bar
from sectio.synth.particles import add_info_strip

from .conftest import PX_UM, make_section


@pytest.fixture(scope="module")
def field_image():
    return make_section(overlap=False, seed=61, size_px=512).image


@pytest.mark.parametrize("bar_um, ticks", [(2.0, False), (5.0, True), (1.234, False)])
def test_bar_found_and_measured(field_image, bar_um, ticks):
    # Truth: the bar is drawn bar_um / PX_UM pixels long with anti-aliased ends.
    img = add_info_strip(field_image, pixel_size_um=PX_UM, bar_um=bar_um, ticks=ticks, rng=1)
    sb = measure_scale_bar(img, bar_length_um=bar_um)
    assert sb.strip_height_px == 48
    # end ticks are drawn on whole pixels, so they may add up to a pixel to the extent
    assert sb.bar_length_px == pytest.approx(bar_um / PX_UM, abs=1.0 if ticks else 0.5)
    assert sb.pixel_size_um == pytest.approx(PX_UM, rel=0.01)
    assert sb.polarity == "light on dark"
    assert sb.to_dict()["bar_length_um"] == bar_um


def test_dark_bar_on_light_strip(field_image):
    img = add_info_strip(field_image, pixel_size_um=PX_UM, bar_um=2.0, rng=2)
    h = field_image.shape[0]
    img[h:] = 255 - img[h:]
    sb = measure_scale_bar(img, bar_length_um=2.0)
    assert sb.polarity == "dark on light"
    assert sb.pixel_size_um == pytest.approx(PX_UM, rel=0.01)


def test_load_with_scale_bar_crops_strip(tmp_path, field_image):
    img = add_info_strip(field_image, pixel_size_um=PX_UM, bar_um=2.0, rng=3)
    path = tmp_path / "withbar.tif"
    tifffile.imwrite(path, img)
    mg = load(path, scale_bar="2um")
    assert mg.pixel_size_source == "scale bar"
    assert mg.pixel_size_um == pytest.approx(PX_UM, rel=0.01)
    assert mg.image.shape == field_image.shape  # the strip is excluded
    assert mg.calibration["bar_length_px"] == pytest.approx(100, abs=0.5)


def test_refuses_without_strip(field_image):
    with pytest.raises(CalibrationError, match="no info strip with a scale bar"):
        measure_scale_bar(field_image, bar_length_um=2.0, path="plain.tif")


def test_refuses_two_different_bars(field_image):
    img = add_info_strip(field_image, pixel_size_um=PX_UM, bar_um=2.0, rng=4)
    h = field_image.shape[0]
    img[h + 8: h + 11, 20:80] = 255  # a second, shorter straight line (60 px)
    with pytest.raises(CalibrationError, match="several bar-like lines"):
        measure_scale_bar(img, bar_length_um=2.0, path="two.tif")


def test_refuses_short_bar(field_image):
    img = add_info_strip(field_image, pixel_size_um=PX_UM, bar_um=0.3, rng=5)  # 15 px
    with pytest.raises(CalibrationError, match="no straight, uniform scale bar"):
        measure_scale_bar(img, bar_length_um=0.3, path="short.tif")


def test_refuses_strip_without_marks(field_image):
    strip = np.zeros((40, field_image.shape[1]), field_image.dtype)
    img = np.vstack([field_image, strip])
    # a blank band holds neither text nor bar: it is not taken for an info strip
    with pytest.raises(CalibrationError, match="no info strip with a scale bar"):
        measure_scale_bar(img, bar_length_um=2.0, path="blank.tif")
    # told where the strip is, the bar search still finds nothing to measure
    with pytest.raises(CalibrationError, match="no contrasting marks"):
        measure_scale_bar(img, bar_length_um=2.0, path="blank.tif",
                          strip=InfoStrip("bottom", 40, 0.0))
