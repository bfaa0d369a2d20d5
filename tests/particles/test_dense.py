"""Dense and secondary-electron-like synthetic sections (exact truth: the disc mask).

The renderings vary what real SEM images vary: fractions from 0.1 % to 50 %, bright or
dark particles, bright edge rims just outside the particles, matrix channels brighter
near particles, uneven illumination. Truth: the exact mask of the section discs
(sectio.synth.particles); rims and channel brightening are matrix in the truth.
"""

from __future__ import annotations

import numpy as np
import pytest

from sectio.micrograph import from_array
from sectio.particles import measure_particles
from sectio.segment._regions import weighted_otsu
from sectio.synth.particles import section_image, sphere_population

PX = 0.02


def _section(*, fraction, phase, overlap, seed, size_px=512, **render):
    pop = sphere_population(size_um=(size_px * PX, size_px * PX), volume_fraction=fraction,
                            median_radius_um=0.25, sigma_ln=0.3, overlap=overlap,
                            touching=0.3, rng=seed)
    return section_image(pop, pixel_size_um=PX, phase=phase, gradient=0.3, rng=seed + 100,
                         **render)


@pytest.mark.parametrize("fraction,phase,overlap,render,mask_tol,edge_tol", [
    # measured errors (points): mask -0.8 / edge-corrected +0.04, and so on
    (0.30, "bright", False, {}, 0.012, 0.003),
    (0.30, "dark", False, {"blur_px": 2.0}, 0.015, 0.003),
    # channel brightening decays over 6 px: the outside level of the edge band is still
    # rising there, and the edge count reads +1.0 point
    (0.50, "dark", True, {"channel": 0.15}, 0.012, 0.013),
    (0.50, "bright", True, {}, 0.008, 0.004),
])
def test_dense_area_fraction_and_auto_phase(fraction, phase, overlap, render, mask_tol,
                                            edge_tol):
    sec = _section(fraction=fraction, phase=phase, overlap=overlap, seed=7, **render)
    f = measure_particles(from_array(sec.image, pixel_size_um=PX), phase="auto")
    assert f.segmentation.phase == phase
    assert f.options["method"] == "regions"
    assert abs(f.area_fraction - sec.area_fraction) < mask_tol
    # grey-level count of the edge band (blur conserves the grey integral)
    assert abs(f.area_fraction_edge_corrected - sec.area_fraction) < edge_tol
    assert not f.suspect


@pytest.mark.parametrize("fraction,phase", [(0.001, "bright"), (0.01, "dark"),
                                            (0.1, "dark")])
def test_sparse_auto_phase_keeps_half_contrast(fraction, phase):
    sec = _section(fraction=fraction, phase=phase, overlap=False, seed=3, size_px=768)
    f = measure_particles(from_array(sec.image, pixel_size_um=PX), phase="auto")
    assert f.segmentation.phase == phase
    assert f.options["method"] == "half-contrast"
    assert abs(f.area_fraction - sec.area_fraction) < 0.002


def test_dark_particles_with_bright_edge_rims():
    # secondary-electron rim 0.3 high just outside dark particles: the rim is outline,
    # not particle; measured -1.6 points (the blurred rim spills over the edge)
    sec = _section(fraction=0.3, phase="dark", overlap=False, seed=1, rim=0.3)
    f = measure_particles(from_array(sec.image, pixel_size_um=PX), phase="auto")
    assert f.segmentation.phase == "dark"
    assert f.options["edge_rim_depth"] > 0.05  # the rim was seen
    assert abs(f.area_fraction - sec.area_fraction) < 0.025


def test_weighted_otsu_matches_scikit_image():
    # scikit-image's threshold_otsu on the expanded sample is the outside reference
    from skimage.filters import threshold_otsu

    rng = np.random.default_rng(0)
    v = np.round(np.concatenate([rng.normal(50, 5, 300), rng.normal(120, 8, 200)]))
    vals, counts = np.unique(v, return_counts=True)
    t, eta = weighted_otsu(vals, counts)
    t_ref = threshold_otsu(v)
    # the same partition (any cut in the gap between the classes has the same criterion)
    assert np.array_equal(v > t, v > t_ref)
    assert eta > 0.9
    # a single normal population has eta = 2/pi (Otsu 1979)
    x = np.sort(rng.normal(0, 1, 20000))
    assert weighted_otsu(x, np.ones_like(x))[1] == pytest.approx(2 / np.pi, abs=0.01)


def test_pure_noise_has_no_structure():
    rng = np.random.default_rng(2)
    img = 0.5 + 0.03 * rng.standard_normal((384, 384))
    f = measure_particles(from_array(img, pixel_size_um=PX), phase="auto")
    assert f.area_fraction < 0.001
    assert f.options["method"] == "half-contrast"
