"""Synthetic multi-phase sections with exact truth (for :mod:`sectio.phases`).

Phase regions are level sets of smoothed Gaussian random fields: the brightest phase
where field B is above its quantile, the darkest where field A is below its quantile
(outside the brightest), the middle phase elsewhere; so every pair of phases touches.
The truth is the label image before blur and noise.
"""

from __future__ import annotations

import numpy as np
from scipy import ndimage as ndi

from ._render import add_noise, blur, quantise, smooth_field

__all__ = ["phase_section"]


def phase_section(shape=(512, 512), *, dark: float = 0.3, bright: float = 0.2,
                  levels=(0.2, 0.5, 0.8), scale_px: float = 12.0, blur_px: float = 1.0,
                  noise: float = 0.03, gradient: float = 0.0, rng=None):
    """``(image, truth)``: an 8-bit-like image in [0, 1] and labels 0, 1, 2 (darkest first).

    ``dark`` and ``bright`` are the target shares of phases 0 and 2 (the realised shares are
    those of ``truth``); ``scale_px`` the correlation length of the regions.
    """
    rng = np.random.default_rng(rng)
    h, w = shape
    a = ndi.gaussian_filter(rng.standard_normal(shape), scale_px)
    b = ndi.gaussian_filter(rng.standard_normal(shape), scale_px)
    truth = np.ones(shape, np.uint8)
    top = b > np.quantile(b, 1 - bright)
    rest = ~top
    cut = np.quantile(a[rest], dark / max(1 - bright, 1e-9))
    truth[rest & (a < cut)] = 0
    truth[top] = 2
    img = np.asarray(levels, float)[truth]
    img = blur(img, blur_px)
    if gradient > 0:
        img = img * smooth_field((h, w), rng, scale_px=max(h, w) / 3, amplitude=gradient)
    img = add_noise(img, rng, sigma=noise)
    return quantise(img, 8), truth
