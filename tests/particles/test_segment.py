"""Segmentation and per-field accuracy on synthetic sections with exact truth."""

from __future__ import annotations

import numpy as np
import pytest

from sectio.errors import OptionError
from sectio.micrograph import from_array
from sectio.particles import measure_particles
from sectio.segment.particles import half_contrast_threshold, segment_particles

from .conftest import PX_UM, make_section


def _truth_mean_ecd(sec, floor_um):
    d = sec.disc_diameters_um()
    sel = sec.discs_in_field() & (d >= floor_um)
    return d[sel].mean()


def test_area_fraction_hard_spheres(hard_section):
    # Truth: the exact mask (pixel centres inside a section disc). Target ±0.3 points.
    sec, field = hard_section
    assert abs(field.area_fraction - sec.area_fraction) < 0.002


def test_area_fraction_boolean(boolean_section):
    sec, field = boolean_section
    assert abs(field.area_fraction - sec.area_fraction) < 0.002


def test_mean_ecd_touching_split(hard_section):
    # Truth: mean diameter of the exact section discs centred in the field, above the
    # size floor. Target ±4 % with touching particles split.
    sec, field = hard_section
    truth = _truth_mean_ecd(sec, field.options["min_size_um"])
    assert field.segmentation.n_split > 10  # touching pairs were present and split
    assert abs(field.mean_ecd_um / truth - 1) < 0.04


def test_count_density_hard(hard_section):
    # N_A of the discs centred in the field (exact), Miles–Lantuéjoul-weighted estimate.
    sec, field = hard_section
    d = sec.disc_diameters_um()
    n_true = np.sum(sec.discs_in_field() & (d >= field.options["min_size_um"]))
    n_a_true = n_true / field.micrograph.area_um2
    assert abs(field.particles_per_um2 / n_a_true - 1) < 0.06


def test_no_split_merges_touching_particles():
    sec = make_section(overlap=False, seed=21, size_px=512)
    mg = from_array(sec.image, pixel_size_um=PX_UM)
    split = measure_particles(mg)
    merged = measure_particles(mg, split=False)
    assert merged.segmentation.n_split == 0
    assert merged.particle_count < split.particle_count
    # same phase area over fewer particles: the mean particle area must grow
    assert merged.table.area_um2.mean() > split.table.area_um2.mean()
    assert merged.table.ecd_um.max() > split.table.ecd_um.max()
    # splitting never changes the phase mask, so the area fraction is identical
    assert merged.area_fraction == split.area_fraction


def test_dark_phase_and_gradient():
    sec = make_section(overlap=False, seed=31, size_px=768, phase="dark", gradient=0.4)
    field = measure_particles(from_array(sec.image, pixel_size_um=PX_UM), phase="dark")
    assert abs(field.area_fraction - sec.area_fraction) < 0.002


def test_small_fraction_threshold_stays_at_half_contrast():
    # 1 % of particles: the automatic threshold must still sit near the midpoint of the
    # matrix and particle levels (Ridler & Calvard intermeans principle).
    sec = make_section(overlap=False, seed=41, size_px=768, fraction=0.01, noise=0.02)
    field = measure_particles(from_array(sec.image, pixel_size_um=PX_UM))
    seg = field.segmentation
    mid = 0.5 * (seg.matrix_level + seg.particle_level)
    assert seg.threshold == pytest.approx(mid)
    assert abs(field.area_fraction - sec.area_fraction) < 0.002


def test_manual_threshold_is_used_and_recorded(hard_section):
    sec, _ = hard_section
    mg = from_array(sec.image, pixel_size_um=PX_UM)
    low = measure_particles(mg, threshold=0.3)
    high = measure_particles(mg, threshold=0.7)
    assert low.options["threshold"] == 0.3 and low.options["threshold_method"] == "manual"
    assert low.area_fraction > high.area_fraction


def test_empty_field_reports_zero():
    rng = np.random.default_rng(0)
    img = 0.4 + 0.02 * rng.standard_normal((256, 256))
    field = measure_particles(from_array(img, pixel_size_um=0.05))
    assert field.area_fraction == 0.0
    assert field.particle_count == 0 and field.particles_per_um2 == 0.0
    assert field.mean_ecd_um is None
    assert "no particles found" in field.flags


def test_wrong_phase_is_flagged():
    # Dark particles measured as "bright": nothing bright stands out, but many clearly
    # dark features do.
    sec = make_section(overlap=False, seed=51, size_px=512, phase="dark")
    field = measure_particles(from_array(sec.image, pixel_size_um=PX_UM), phase="bright")
    assert field.area_fraction < 0.01
    assert any("wrong --phase" in f for f in field.flags)
    right = measure_particles(from_array(sec.image, pixel_size_um=PX_UM), phase="dark")
    assert not any("wrong --phase" in f for f in right.flags)


def test_mostly_particle_is_flagged():
    # Bright "particles" covering most of the field (the matrix measured as the phase).
    img = np.full((256, 256), 0.8)
    yy, xx = np.mgrid[0:256, 0:256]
    for cy, cx in [(60, 60), (60, 190), (190, 60), (190, 190)]:
        img[(yy - cy) ** 2 + (xx - cx) ** 2 < 40**2] = 0.2
    img += 0.01 * np.random.default_rng(1).standard_normal(img.shape)
    field = measure_particles(from_array(img, pixel_size_um=0.05), phase="bright",
                              threshold=0.5)
    assert field.area_fraction > 0.6
    assert any("mostly particle" in f for f in field.flags)
    # automatic threshold: the majority phase is taken as matrix; the dark discs are
    # reported as the likely phase instead
    auto = measure_particles(from_array(img, pixel_size_um=0.05), phase="bright")
    assert any("try --phase dark" in f for f in auto.flags)


def test_size_floor_removes_small_particles(hard_section):
    sec, field = hard_section
    mg = from_array(sec.image, pixel_size_um=PX_UM)
    floored = measure_particles(mg, min_size_um=0.2)
    assert floored.table.ecd_um.min() >= 0.2 - 1e-9
    assert field.table.ecd_um.min() < 0.2


def test_half_contrast_threshold_two_levels():
    # A clean two-level image: threshold exactly halfway between the levels.
    img = np.full((100, 100), 0.2)
    img[40:60, 40:60] = 0.8
    t, matrix, particle, _ = half_contrast_threshold(img)
    assert matrix == pytest.approx(0.2, abs=2e-3)
    assert particle == pytest.approx(0.8, abs=2e-3)
    assert t == pytest.approx(0.5, abs=2e-3)


def test_bad_options():
    img = np.zeros((64, 64))
    img[20:30, 20:30] = 1
    with pytest.raises(OptionError, match="--phase must be"):
        segment_particles(img, phase="grey")
    with pytest.raises(OptionError, match="--threshold 1.5 is outside"):
        segment_particles(img, threshold=1.5)
    with pytest.raises(OptionError, match="--min-size .* larger than half"):
        measure_particles(from_array(img, pixel_size_um=0.1), min_size_um=5.0)
    with pytest.raises(OptionError, match="--foil-thickness must be positive"):
        measure_particles(from_array(img, pixel_size_um=0.1), foil_thickness_um=-1.0)
