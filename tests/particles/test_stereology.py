"""Planar measurements against scikit-image, scipy and published stereological relations."""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest

from sectio.errors import DegenerateDataWarning
from sectio.stereology._fieldstats import field_statistics
from sectio.stereology._particles import (
    feret_diameters,
    intercept_density,
    measure_labels,
    miles_lantuejoul_weight,
    nearest_neighbour_distances,
    point_count,
)
from sectio.stereology._sizes import lognormal_fit, size_distribution, weighted_quantile


def _shapes():
    from skimage.draw import disk, ellipse, polygon

    lab = np.zeros((200, 260), np.int32)
    lab[disk((50, 50), 20.3, shape=lab.shape)] = 1
    lab[ellipse(140, 60, 12, 35, shape=lab.shape, rotation=0.6)] = 2
    lab[30:50, 120:200] = 3
    rr, cc = polygon([120, 180, 150], [150, 170, 240], shape=lab.shape)
    lab[rr, cc] = 4
    lab[100, 100] = 5
    return lab


def test_areas_and_centroids_match_regionprops():
    # scikit-image regionprops computes the same areas and centroids another way.
    from skimage.measure import regionprops

    lab = _shapes()
    t = measure_labels(lab, pixel_size_um=0.5)
    for p in regionprops(lab):
        i = list(t.label).index(p.label)
        assert t.area_um2[i] == pytest.approx(p.area * 0.25)
        assert t.centroid_row_px[i] == pytest.approx(p.centroid[0])
        assert t.centroid_col_px[i] == pytest.approx(p.centroid[1])
        assert t.ecd_um[i] == pytest.approx(p.equivalent_diameter_area * 0.5)


def test_feret_max_matches_regionprops():
    # skimage's feret_diameter_max takes calipers of the 0.5-level contour of the convex
    # hull image; ours of the 0.5-level edge midpoints: the same polygon up to the hull's
    # digitisation, so within 1 px.
    from skimage.measure import regionprops

    lab = _shapes()
    fmax, fmin = feret_diameters(lab)
    for p in regionprops(lab):
        if p.area < 10:
            continue
        assert abs(fmax[p.label - 1] - p.feret_diameter_max) < 1.0


def test_feret_closed_forms():
    # Rectangle of 20 x 80 pixels: its outline through the edge midpoints is the 20 x 80
    # rectangle with each corner cut at half a pixel, e.g. (10, 19.5)-(29, 99.5), so the
    # longest caliper is √(19² + 80²) and the shortest 20 (geometry).
    lab = np.zeros((60, 120), np.int32)
    lab[10:30, 20:100] = 1
    fmax, fmin = feret_diameters(lab)
    assert fmin[0] == pytest.approx(20.0, abs=0.02)
    assert fmax[0] == pytest.approx(math.hypot(19, 80), rel=1e-4)
    # a digital disc of radius 30 (pixel centres strictly inside) spans rows 21..79: its
    # axis-aligned caliper is exactly 59 px; no caliper exceeds the true diameter 60 + 1
    from skimage.draw import disk

    lab = np.zeros((100, 100), np.int32)
    lab[disk((50, 50), 30)] = 1
    fmax, fmin = feret_diameters(lab)
    assert fmin[0] == pytest.approx(59.0, abs=0.05)
    assert 59.0 <= fmax[0] < 61.0


def test_aspect_ratio_of_rectangle():
    lab = np.zeros((60, 120), np.int32)
    lab[10:30, 20:100] = 1
    t = measure_labels(lab, pixel_size_um=1.0)
    assert t.aspect_ratio[0] == pytest.approx(math.hypot(19, 80) / 20, rel=1e-3)


def test_miles_lantuejoul_weight_worked_example():
    # REFERENCES §3.6: 1000 x 800 px frame, 100 x 80 px box -> 800000/(900·720) = 1.2346
    # (Miles 1974; Lantuéjoul 1980).
    assert float(miles_lantuejoul_weight(1000, 800, 100, 80)) == pytest.approx(1.2346, abs=1e-4)
    assert np.isinf(miles_lantuejoul_weight(100, 100, 100, 10))


def test_edge_particles_get_zero_weight_and_are_flagged():
    lab = np.zeros((50, 50), np.int32)
    lab[0:5, 10:15] = 1
    lab[20:25, 20:25] = 2
    t = measure_labels(lab, pixel_size_um=1.0)
    assert list(t.edge) == [True, False]
    assert t.weight[0] == 0.0
    assert t.weight[1] == pytest.approx(50 * 50 / (44 * 44))  # discrete form, w + 1 = 6


def test_miles_lantuejoul_unbiased_count():
    # Randomly placed squares: the weighted count of whole squares estimates the number of
    # reference points (top-left corners) in the frame without bias (Miles 1974).
    rng = np.random.default_rng(0)
    est, true = [], []
    for _ in range(200):
        lab = np.zeros((100, 100), np.int32)
        n = 0
        for k in range(1, 6):
            r, c = rng.integers(0, 100, 2)
            lab[r:r + 30, c:c + 30] = np.where(lab[r:r + 30, c:c + 30] == 0, k,
                                               lab[r:r + 30, c:c + 30])
            n += 1
        t = measure_labels(lab, pixel_size_um=1.0)
        if len(t) == 5:  # no overlaps in this draw
            est.append(t.weight.sum())
            true.append(n)
    assert len(est) > 30
    assert abs(np.mean(est) / np.mean(true) - 1) < 0.2


def test_point_count_e562_worked_example():
    # REFERENCES §2 (ASTM E562): 10 fields x 100 points, hits 12, 9, 11, 10, 13, 8, 11, 10,
    # 12, 9.5 -> P_P = 0.1055, CI ±0.0110, %RA 10.4 — through our field statistics.
    hits = [12, 9, 11, 10, 13, 8, 11, 10, 12, 9.5]
    s = field_statistics([h / 100 for h in hits])
    assert s.mean == pytest.approx(0.1055, abs=5e-4)
    assert s.half_width == pytest.approx(0.0110, abs=5e-4)
    assert s.relative_accuracy_pct == pytest.approx(10.4, abs=0.1)


def test_delesse_point_count_agrees_with_area_fraction(hard_section):
    # Delesse (1847) / Glagolev (1933): A_A = P_P. The point estimate must lie within
    # 3 binomial standard errors √(P(1 − P)/P_T) of the area fraction (REFERENCES §2).
    _, field = hard_section
    se = math.sqrt(field.area_fraction * (1 - field.area_fraction) / field.point_total)
    assert abs(field.point_fraction - field.area_fraction) < 3 * se
    assert field.point_total == 400


def test_point_count_on_half_plane():
    mask = np.zeros((100, 100), bool)
    mask[:, :50] = True
    p, hits, total = point_count(mask, points_per_side=10, rng=1)
    assert p == 0.5 and total == 100


def test_intercepts_and_mean_free_path():
    # Discs of diameter D on a square lattice: horizontal + vertical lines, and the
    # Fullman relations lambda = (1 − V_V)/N_L and L3 = V_V/N_L (Fullman 1953).
    from skimage.draw import disk

    mask = np.zeros((400, 400), bool)
    for r in range(25, 400, 50):
        for c in range(25, 400, 50):
            mask[disk((r, c), 10)] = True
    n, length = intercept_density(mask)
    # each disc is crossed by about 2·D lines (rows + columns), D ≈ 20 px
    assert n == pytest.approx(64 * 2 * 19, rel=0.05)
    l3 = mask.mean() / (n / length)
    # mean chord of a disc = (pi/4)·D for lines parallel to a direction (Cauchy)
    assert l3 == pytest.approx(math.pi / 4 * 20, rel=0.05)


def test_intercept_halves_at_line_ends():
    # ASTM E112 convention for line ends: an intercept cut by the end of a test line
    # counts 1/2. Rows: 1/2 (touches left end) + 1 (inside) + 1/2 (whole line) = 2.
    mask = np.zeros((3, 10), bool)
    mask[0, 0:3] = True
    mask[1, 4:6] = True
    mask[2, :] = True
    n, length = intercept_density(mask)
    assert length == 60
    assert n == pytest.approx(2.0 + _line_count(mask.T))
    assert _line_count(mask) == 2.0


def _line_count(mask):
    """Independent run counter, line by line (each line a row of ``mask``)."""
    total = 0.0
    for line in mask:
        i = 0
        while i < len(line):
            if line[i]:
                j = i
                while j < len(line) and line[j]:
                    j += 1
                total += 0.5 if (i == 0 or j == len(line)) else 1.0
                i = j
            else:
                i += 1
    return total


def test_nearest_neighbours_match_brute_force():
    rng = np.random.default_rng(3)
    pts = rng.uniform(0, 100, (60, 2))
    nn, safe = nearest_neighbour_distances(pts[:, 0], pts[:, 1], (100, 100))
    d = np.sqrt(((pts[:, None] - pts[None]) ** 2).sum(-1))
    np.fill_diagonal(d, np.inf)
    assert np.allclose(nn, d.min(axis=1))
    assert safe.any() and not safe.all()


def test_clark_evans_ratio_of_random_points():
    # Poisson points: mean NN distance = 0.5/√density (Clark & Evans 1954, Ecology 35:445;
    # from memory). Border-corrected mean over 4000 points within 4 %.
    rng = np.random.default_rng(4)
    pts = rng.uniform(0, 1000, (4000, 2))
    nn, safe = nearest_neighbour_distances(pts[:, 0], pts[:, 1], (1000, 1000))
    assert nn[safe].mean() / (0.5 / math.sqrt(4000 / 1000**2)) == pytest.approx(1.0, abs=0.04)


def test_weighted_quantile_equals_numpy_hazen():
    x = np.random.default_rng(5).lognormal(size=101)
    q = weighted_quantile(x, [0.1, 0.5, 0.9])
    assert np.allclose(q, np.quantile(x, [0.1, 0.5, 0.9], method="hazen"))


def test_lognormal_fit_matches_scipy():
    from scipy import stats

    x = np.random.default_rng(6).lognormal(mean=-1.0, sigma=0.3, size=500)
    fit = lognormal_fit(x)
    shape, loc, scale = stats.lognorm.fit(x, floc=0)
    assert fit["sigma_ln"] == pytest.approx(shape, rel=1e-6)
    assert fit["median_um"] == pytest.approx(scale, rel=1e-6)


def test_size_distribution_histograms_hold_all_particles():
    x = np.random.default_rng(7).lognormal(mean=-1.0, sigma=0.4, size=300)
    sd = size_distribution(x)
    assert sd.linear_counts.sum() == 300 and sd.log_counts.sum() == 300
    assert sd.linear_edges_um[0] == 0 and sd.linear_edges_um[-1] > x.max()
    assert sd.d50_um == pytest.approx(np.quantile(x, 0.5, method="hazen"))
    assert sd.cumulative_fraction[-1] == pytest.approx(1.0)


def test_field_statistics_single_value_warns():
    with pytest.warns(DegenerateDataWarning, match="Only one value"):
        field_statistics([0.1])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        field_statistics([0.1, 0.2])
