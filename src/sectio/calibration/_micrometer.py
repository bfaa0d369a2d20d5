"""Pixel size from an image of a stage micrometer (a ruling of equally spaced lines).

1. The ruling's direction comes from the strongest peak of the image's 2-D power spectrum
   (any harmonic of a line grating points along the lines' normal), refined by making the
   projection of the image onto that normal as sharp as possible (largest variance).
2. The projection, in quarter-pixel bins, is the line profile; its autocorrelation gives a
   first period (the first peak after the central lobe at least half as high as the
   highest: longer lines every fifth division make five periods stand out).
3. Every line's centre is the centroid of its peak in the profile; the centres are fitted
   by least squares against their line numbers: the slope is the period in pixels, with
   its standard error, and the residuals say how regular the ruling looks.

Refused (one sentence) when fewer than 5 lines are found, when the lines are irregular
(residual scatter above 5 % of the period), or when the profile shows no clear period.
The method is the textbook way of reading a grating's pitch from its centres (common
practice); the check is exact synthetic truth (``tests/calibration/test_micrometer.py``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import ndimage as ndi

from ..errors import CalibrationError

BIN_PX = 0.25
MIN_LINES = 5


@dataclass(frozen=True)
class RulingMeasurement:
    """The ruling as measured: period in pixels, its direction and how regular it is."""

    period_px: float
    period_se_px: float
    angle_deg: float  # direction of the lines' normal, degrees from the image x axis
    lines: int
    residual_rms_px: float
    dark_lines: bool

    def to_dict(self) -> dict:
        return {"period_px": self.period_px, "period_se_px": self.period_se_px,
                "normal_angle_deg": self.angle_deg, "lines": self.lines,
                "residual_rms_px": self.residual_rms_px, "dark_lines": self.dark_lines}


def _spectrum_direction(img: np.ndarray) -> float:
    h, w = img.shape
    win = np.outer(np.hanning(h), np.hanning(w))
    f = np.fft.fftshift(np.abs(np.fft.fft2((img - img.mean()) * win)) ** 2)
    cy, cx = h // 2, w // 2
    yy, xx = np.mgrid[0:h, 0:w]
    r = np.hypot((yy - cy) / h, (xx - cx) / w)
    f[r < 2.5 / min(h, w)] = 0  # the mean and the illumination's slow change
    f[r > 0.45] = 0
    ky, kx = np.unravel_index(int(np.argmax(f)), f.shape)
    return float(np.arctan2((ky - cy) / h, (kx - cx) / w))


def _profile(img: np.ndarray, theta: float, bin_px: float = BIN_PX) -> np.ndarray:
    """Mean grey level in bins of ``bin_px`` along the normal at ``theta``.

    Bins that few pixels fall in (near the image corners, or between the pixel columns
    when the lines run almost along an axis) are filled by linear interpolation.
    """
    h, w = img.shape
    yy, xx = np.mgrid[0:h, 0:w]
    u = xx * np.cos(theta) + yy * np.sin(theta)
    u = u - u.min()
    idx = (u / bin_px).astype(np.int64).ravel()
    count = np.bincount(idx).astype(float)
    total = np.bincount(idx, weights=img.ravel())
    full = np.flatnonzero(count >= 0.5 * np.percentile(count[count > 0], 90))
    k0, k1 = full[0], full[-1]
    count, total = count[k0: k1 + 1], total[k0: k1 + 1]
    ok = count >= 0.25 * np.percentile(count, 90)
    x = np.arange(count.size)
    return np.interp(x, x[ok], total[ok] / count[ok])


def _sharpest_direction(img: np.ndarray, theta0: float) -> float:
    best = theta0
    for span, step in ((np.deg2rad(2.0), np.deg2rad(0.25)), (np.deg2rad(0.3), np.deg2rad(0.02))):
        thetas = best + np.arange(-span, span + step / 2, step)
        scores = [np.var(_profile(img, t, 1.0)) for t in thetas]
        best = float(thetas[int(np.argmax(scores))])
    return best


def _first_period(sig: np.ndarray) -> float | None:
    s = sig - sig.mean()
    n = len(s)
    acf = np.fft.irfft(np.abs(np.fft.rfft(s, 2 * n)) ** 2)[:n]
    acf = acf / acf[0]
    neg = np.flatnonzero(acf < 0)
    if neg.size == 0:
        return None
    lag0 = int(neg[0])
    stop = n // 3
    if lag0 >= stop:
        return None
    seg = acf[lag0:stop]
    top = float(seg.max())
    if top < 0.2:
        return None
    # the first clear peak: longer lines every few divisions make a multiple of the period
    # (e.g. 5 divisions) stand out, so the highest peak is not always the period itself
    local = np.flatnonzero((seg[1:-1] >= seg[:-2]) & (seg[1:-1] >= seg[2:])
                           & (seg[1:-1] >= 0.5 * top)) + 1
    k = lag0 + int(local[0] if local.size else np.argmax(seg))
    # parabolic refinement of the peak
    peak = float(k)
    if 0 < k < n - 1:
        a, b, c = acf[k - 1], acf[k], acf[k + 1]
        den = a - 2 * b + c
        peak = k + (0.5 * (a - c) / den if den else 0.0)
    return float(peak)


def measure_ruling(image, *, path: str = "<array>") -> RulingMeasurement:
    """Measure the line period of a stage-micrometer image (see the module docstring).

    Parameters
    ----------
    image : (M, N) ndarray
        Grey image of the ruling (either polarity), any grey range.
    path : str
        File name, for messages.
    """
    img = np.asarray(image, dtype=np.float64)
    if img.ndim != 2 or min(img.shape) < 32:
        raise CalibrationError(f"{path}: a stage-micrometer image must be a 2-D image at least "
                               "32 pixels on each side.")
    img = img - ndi.gaussian_filter(img, max(img.shape) / 8)  # slow illumination out
    theta = _sharpest_direction(img, _spectrum_direction(img))
    prof = _profile(img, theta)
    dark = float(np.mean((prof - np.median(prof)) ** 3)) < 0  # lines are the minority
    sig = -prof if dark else prof
    sig = sig - ndi.median_filter(sig, size=max(5, len(sig) // 8), mode="nearest")
    sig = ndi.gaussian_filter1d(sig, 2.0)  # half a pixel: the ripple of the bin grid out
    p0 = _first_period(ndi.gaussian_filter1d(sig, 3.0))
    refuse = (f"{path}: no regular ruling of at least {MIN_LINES} lines was found; "
              "photograph the stage micrometer's ruling filling most of the field, in focus.")
    if p0 is None or p0 * BIN_PX < 3:
        raise CalibrationError(refuse)
    # centres: centroid of each peak above half the typical peak height
    half = int(round(p0 / 4))
    peaks = []
    thr = 0.5 * np.percentile(ndi.maximum_filter1d(sig, size=int(p0)), 50)
    i = int(np.argmax(sig[: int(p0) + 1]))
    pos = float(i)
    while pos < len(sig):
        lo_, hi_ = max(0, int(pos - half)), min(len(sig), int(pos + half) + 1)
        seg = sig[lo_:hi_]
        if seg.size and seg.max() > thr:
            j = lo_ + int(np.argmax(seg))
            a, b = max(0, j - half), min(len(sig), j + half + 1)
            wgt = np.clip(sig[a:b] - 0.5 * sig[j], 0, None)
            if wgt.sum() > 0 and a > 0 and b < len(sig):
                c = float(np.sum(np.arange(a, b) * wgt) / wgt.sum())
                peaks.append(c)
                pos = c
        pos += p0
    centres = np.array(peaks) * BIN_PX
    if centres.size < MIN_LINES:
        raise CalibrationError(refuse)
    period = p0 * BIN_PX
    for _ in range(2):
        n = np.round((centres - centres[0]) / period)
        A = np.vstack([np.ones_like(n), n]).T
        coef, *_ = np.linalg.lstsq(A, centres, rcond=None)
        period = float(coef[1])
    resid = centres - A @ coef
    dof = max(centres.size - 2, 1)
    s2 = float(resid @ resid) / dof
    se = float(np.sqrt(s2 / np.sum((n - n.mean()) ** 2)))
    rms = float(np.sqrt(np.mean(resid**2)))
    if rms > 0.05 * period or len(np.unique(n)) != n.size:
        raise CalibrationError(
            f"{path}: the ruling's lines are irregular (scatter {rms:.2f} px for a "
            f"{period:.2f} px period); check the image shows the micrometer's ruling only."
        )
    angle = (float(np.rad2deg(theta)) + 90.0) % 180.0 - 90.0  # in [-90, 90)
    return RulingMeasurement(period, se, angle, int(centres.size), rms, dark)
