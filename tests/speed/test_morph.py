"""The frontier reconstruction gives exactly scikit-image's h-maxima (the outside reference)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import ndimage as ndi
from skimage.morphology import h_maxima as sk_h_maxima
from skimage.morphology import reconstruction as sk_reconstruction

from sectio.segment._morph import h_maxima, reconstruct_by_dilation


@pytest.mark.parametrize("seed", range(12))
def test_h_maxima_equals_scikit_image(seed):
    rng = np.random.default_rng(seed)
    shape = tuple(rng.integers(3, 90, size=2))
    img = ndi.gaussian_filter(rng.random(shape), rng.uniform(0.5, 4.0))
    if seed % 3 == 1:  # plateaus and ties
        img = np.round(img * rng.integers(3, 40)) / 7.0
    if seed % 3 == 2:  # a distance map: a wide flat background, as in the particle split
        img = np.log1p(ndi.distance_transform_edt(img > np.median(img)) / 3.0)
    h = float(rng.uniform(0.01, 0.6) * max(np.ptp(img), 1e-9))
    assert np.array_equal(h_maxima(img, h), sk_h_maxima(img, h))


def test_reconstruction_equals_scikit_image():
    rng = np.random.default_rng(5)
    mask = ndi.gaussian_filter(rng.random((70, 50)), 2.0)
    marker = mask - rng.uniform(0, 0.05, mask.shape)
    assert np.array_equal(reconstruct_by_dilation(marker, mask),
                          sk_reconstruction(marker, mask, method="dilation"))
