"""The info strip is found on every image and never changes a result.

Truth: the strip-free image itself. The same micrograph is measured without a strip and
with strips of several kinds attached (block glyphs; real text in bundled fonts, light on
dark and dark on light; at the bottom and at the top; a frame line; JPEG-compressed); the
area fraction must agree within 0.1 points and the mean lineal intercept within 0.5 %
(issue 10). Images with nothing to cut (noise-free tracings, flat-shaded maps, textured
micrographs, the real SEM images in /work/shared/real) must come back whole.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import tifffile
from PIL import Image
from scipy import ndimage as ndi

from sectio.calibration import find_info_strips
from sectio.grains import measure_grains
from sectio.micrograph import load
from sectio.particles import measure_particles
from sectio.report.grains import boundary_pixels
from sectio.synth.grains import grain_structure, synthetic_grains
from sectio.synth.particles import add_info_strip, section_image, sphere_population
from sectio.synth.strips import attach_strip, font_paths, info_strip

PX_UM = 0.02
REAL = Path("/work/shared/real/superalloy-sem")


def _strip(width, kind, bar_px=180.0):
    fonts = font_paths()
    if kind == "text":
        return info_strip(width, bar_px=bar_px, label="2 µm", font=fonts[0])
    if kind == "text-dark-on-light":
        return info_strip(width, bar_px=bar_px, label="2 µm", font=fonts[3], background=1.0,
                          ink=0.0, label_place="right", height=40)
    if kind == "default-font-framed":
        s = info_strip(width, bar_px=bar_px, label="2 um", font=None, height=56, font_size=20)
        s[0:2] = 1.0  # a frame line between image and strip
        return s
    raise ValueError(kind)


@pytest.fixture(scope="module")
def particle_image():
    pop = sphere_population(size_um=(512 * PX_UM, 420 * PX_UM), volume_fraction=0.06,
                            median_radius_um=0.15, sigma_ln=0.25, overlap=False, rng=5)
    return section_image(pop, pixel_size_um=PX_UM, rng=6).image


@pytest.fixture(scope="module")
def grain_image():
    img, _ = synthetic_grains((400, 512), 160, rng=21)
    return img


def _with(image, kind, side, tmp_path, name):
    if kind == "blocks":
        arr = add_info_strip(image, pixel_size_um=PX_UM, bar_um=2.0, rng=1)
        if side == "top":
            arr = np.vstack([arr[image.shape[0]:], arr[: image.shape[0]]])
    else:
        arr = attach_strip(image, _strip(image.shape[1], kind), side=side)
    p = tmp_path / name
    tifffile.imwrite(p, arr)
    return p, arr.shape[0] - image.shape[0]


CASES = [("blocks", "bottom"), ("text", "bottom"), ("text", "top"),
         ("text-dark-on-light", "bottom"), ("default-font-framed", "top")]


@pytest.mark.parametrize("kind, side", CASES)
def test_strip_never_changes_area_fraction(tmp_path, particle_image, kind, side):
    plain = tmp_path / "plain.tif"
    tifffile.imwrite(plain, particle_image)
    ref = measure_particles(load(plain, pixel_size=PX_UM))
    p, rows = _with(particle_image, kind, side, tmp_path, "strip.tif")
    mg = load(p, pixel_size=PX_UM)
    assert mg.image.shape == particle_image.shape
    assert (mg.crop_top_px if side == "top" else mg.crop_bottom_px) == rows
    assert any(f"info strip found at the {side}: {rows} rows" in n for n in mg.notes)
    f = measure_particles(mg)
    assert abs(f.area_fraction - ref.area_fraction) <= 0.001  # 0.1 points
    # left in (--keep-strip), the strip would change it: the check can fail
    kept = measure_particles(load(p, pixel_size=PX_UM, keep_strip=True))
    assert kept.micrograph.image.shape[0] == particle_image.shape[0] + rows


@pytest.mark.parametrize("kind, side", [("text", "bottom"), ("default-font-framed", "top")])
def test_strip_never_changes_intercept(tmp_path, grain_image, kind, side):
    plain = tmp_path / "plain.tif"
    tifffile.imwrite(plain, grain_image)
    ref = measure_grains(load(plain, pixel_size="0.5um"))
    p, rows = _with(grain_image, kind, side, tmp_path, "strip.tif")
    f = measure_grains(load(p, pixel_size="0.5um"))
    assert f.mean_intercept_um == pytest.approx(ref.mean_intercept_um, rel=0.005)
    assert f.grain_count == ref.grain_count


def test_jpeg_strip_found(tmp_path, particle_image):
    # lossy compression blurs the flat strip around the glyphs; still found, same rows
    arr = attach_strip(particle_image, _strip(512, "text"), side="bottom")
    p = tmp_path / "strip.jpg"
    Image.fromarray(arr).save(p, quality=85)
    mg = load(p, pixel_size=PX_UM)
    assert mg.crop_bottom_px == 48 and mg.image.shape == particle_image.shape


def test_crop_bottom_overrides_and_scale_bar_uses_found_strip(tmp_path, particle_image):
    p, rows = _with(particle_image, "text", "top", tmp_path, "top.tif")
    mg = load(p, pixel_size=PX_UM, crop_bottom=10)
    assert mg.crop_bottom_px == 10 and mg.crop_top_px == 0  # no search when rows are given
    bar = load(p, scale_bar="2um")  # the bar is 180 px long: 2 µm / 180 px
    assert bar.pixel_size_um == pytest.approx(2.0 / 180, rel=0.005)
    assert bar.crop_top_px == rows and bar.calibration["strip_side"] == "top"


def _flat_shaded(truth):
    return np.random.default_rng(5).uniform(0, 1, truth.labels.max() + 1)[truth.labels]


def test_nothing_cut_where_there_is_no_strip():
    truth, _ = grain_structure((512, 512), 200, rng=3)
    trace = boundary_pixels(truth.labels)
    images = {
        "etched": synthetic_grains((512, 512), 300, rng=4)[0],
        "traced": np.where(trace, 0.0, 1.0),
        "white-on-black": np.where(ndi.binary_dilation(trace), 1.0, 0.0),
        "flat-shaded": _flat_shaded(truth),
    }
    for name in sorted(REAL.glob("*.png")) if REAL.exists() else []:
        if "mask" not in name.name:
            images[name.name] = np.asarray(Image.open(name).convert("L"))
    # a blank dark band holds no text or bar: not a strip
    images["blank band"] = np.vstack([images["etched"], np.zeros((40, 512), np.uint8)])
    found = {k: find_info_strips(v) for k, v in images.items()}
    assert all(v == [] for v in found.values()), found
