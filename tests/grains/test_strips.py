"""The strip-wise watershed of large images equals one whole-image flood.

Check against scikit-image's own ``watershed`` on the whole image (an outside
implementation computing the same thing another way).
"""

import numpy as np
from scipy import ndimage as ndi
from skimage.segmentation import watershed

from sectio.segment.grains import _watershed_in_strips
from sectio.synth.grains import synthetic_grains


def test_strips_equal_whole_image_flood():
    img, truth = synthetic_grains((1100, 600), 900, rng=7)
    strength = ndi.gaussian_filter(255.0 - img, 1.5)
    # markers: one per true grain, a small disc at each grain's pixel farthest from its edge
    dist = ndi.distance_transform_edt(ndi.binary_erosion(truth.labels > 0) &
                                      (ndi.grey_erosion(truth.labels, size=3) == truth.labels))
    markers = np.zeros_like(truth.labels)
    for g, sl in enumerate(ndi.find_objects(truth.labels), start=1):
        if sl is None:
            continue
        d = np.where(truth.labels[sl] == g, dist[sl], -1)
        r, c = np.unravel_index(np.argmax(d), d.shape)
        markers[sl][r, c] = g
    whole = watershed(strength, markers=markers)
    strips = _watershed_in_strips(strength, markers, strip_rows=256, margin_rows=128)
    # 1100 rows > 1.5 * 256: the strip path is taken (5 strips, two at a time)
    assert strips.shape == whole.shape
    assert np.mean(strips == whole) > 0.999  # measured: identical (1.0)
