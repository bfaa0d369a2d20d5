"""Rendering pieces shared by the synthetic grain and particle images.

Optical and SEM artefacts: uneven illumination (a smooth multiplicative field), Gaussian
blur (the optics' point spread), shot + read noise, quantisation to 8 or 16 bits.
"""

from __future__ import annotations

import numpy as np
from scipy import ndimage as ndi


def smooth_field(
    shape, rng: np.random.Generator, *, scale_px: float, amplitude: float
) -> np.ndarray:
    """Smooth random field of mean 1 and peak-to-peak about ``amplitude`` (0 = flat).

    A tilted plane plus low-frequency noise, like the vignetting and tilt of a real
    microscope's illumination.
    """
    h, w = shape
    if amplitude <= 0:
        return np.ones(shape)
    yy, xx = np.mgrid[0:h, 0:w].astype(float)
    angle = rng.uniform(0, 2 * np.pi)
    plane = np.cos(angle) * (xx / w - 0.5) + np.sin(angle) * (yy / h - 0.5)
    small = (max(2, int(h / scale_px) + 2), max(2, int(w / scale_px) + 2))
    coarse = rng.normal(size=small)
    lowfreq = ndi.zoom(coarse, (h / small[0], w / small[1]), order=3)[:h, :w]
    lowfreq = lowfreq / (np.ptp(lowfreq) + 1e-12)
    field = plane + 0.5 * lowfreq
    field = field / (np.ptp(field) + 1e-12)
    return 1.0 + amplitude * (field - field.mean())


def add_noise(
    img: np.ndarray, rng: np.random.Generator, *, sigma: float, shot_photons: float | None = None
) -> np.ndarray:
    """Add Gaussian read noise (``sigma`` in grey units of a 0–1 image) and optional shot noise."""
    out = img.astype(float, copy=True)
    if shot_photons:
        out = rng.poisson(np.clip(out, 0, None) * shot_photons) / shot_photons
    if sigma > 0:
        out = out + rng.normal(0.0, sigma, size=out.shape)
    return out


def blur(img: np.ndarray, sigma_px: float) -> np.ndarray:
    return ndi.gaussian_filter(img, sigma_px) if sigma_px > 0 else img


def quantise(img: np.ndarray, bits: int = 8) -> np.ndarray:
    """Clip to [0, 1] and quantise to an unsigned integer image of ``bits`` (8 or 16)."""
    top = 2**bits - 1
    dtype = np.uint8 if bits == 8 else np.uint16
    return np.round(np.clip(img, 0.0, 1.0) * top).astype(dtype)


def write_calibrated_tiff(path, image: np.ndarray, pixel_size_um: float, *, description: str = ""):
    """Write a TIFF whose resolution tags carry the pixel size (ResolutionUnit = centimetre)."""
    import tifffile

    px_per_cm = 1e4 / pixel_size_um
    tifffile.imwrite(
        str(path),
        image,
        resolution=(px_per_cm, px_per_cm),
        resolutionunit="CENTIMETER",
        description=description or None,
        metadata=None,
    )
