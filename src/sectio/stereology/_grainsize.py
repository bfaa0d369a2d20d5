"""Grain size numbers from the mean lineal intercept or the grains per unit area.

ASTM E112 relations (lengths in mm, counts per mm² at 1×):

* planimetric:  G = 3.321928·log10(N_A) − 2.954   (N_A = 7.750·2^G; 2.954 = log2 7.75)
* intercept:    G = −6.643856·log10(ℓ̄) − 3.288   (ℓ̄ = 0.320 mm at G = 0, halving per 2 G)
* ISO 643:      m = 8·2^G grains per mm², so G_ISO = log2(m) − 3

References
----------
.. [1] ASTM E112, Standard Test Methods for Determining Average Grain Size.
.. [2] ISO 643, Steels — Micrographic determination of the apparent grain size.
"""

from __future__ import annotations

import numpy as np

LOG2_10 = 3.321928094887362  # 1 / log10(2)
_PLANIMETRIC_OFFSET = 2.954  # log2(7.75), E112
_INTERCEPT_SLOPE = -6.643856  # −2 / log10(2), E112
_INTERCEPT_OFFSET = 3.288  # E112 (from memory); 6.643856·log10(1/0.32) = 3.2877


def astm_g_from_intercept_um(mean_intercept_um):
    """ASTM E112 grain size number from the mean lineal intercept in micrometres.

    >>> round(float(astm_g_from_intercept_um(10.0)), 2)
    10.0
    """
    l_mm = np.asarray(mean_intercept_um, dtype=float) / 1000.0
    with np.errstate(divide="ignore", invalid="ignore"):
        return _INTERCEPT_SLOPE * np.log10(l_mm) - _INTERCEPT_OFFSET


def intercept_um_from_astm_g(g):
    """Inverse of :func:`astm_g_from_intercept_um`."""
    return 1000.0 * 10.0 ** ((np.asarray(g, dtype=float) + _INTERCEPT_OFFSET) / _INTERCEPT_SLOPE)


def astm_g_from_grains_per_mm2(n_a_per_mm2):
    """ASTM E112 planimetric grain size number from grains per mm² at 1×.

    >>> round(float(astm_g_from_grains_per_mm2(992.0)), 2)
    7.0
    """
    n = np.asarray(n_a_per_mm2, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return LOG2_10 * np.log10(n) - _PLANIMETRIC_OFFSET


def grains_per_mm2_from_astm_g(g):
    return 10.0 ** ((np.asarray(g, dtype=float) + _PLANIMETRIC_OFFSET) / LOG2_10)


def iso643_g_from_grains_per_mm2(n_a_per_mm2):
    """ISO 643 grain size index from grains per mm² (m = 8·2^G)."""
    n = np.asarray(n_a_per_mm2, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.log2(n) - 3.0


def astm_g_from_count_at_magnification(grains_per_in2: float, magnification: float) -> float:
    """E112 definition: N_M·(M/100)² = 2^(G−1), N_M grains per square inch at M×."""
    return float(np.log2(grains_per_in2 * (magnification / 100.0) ** 2) + 1.0)
