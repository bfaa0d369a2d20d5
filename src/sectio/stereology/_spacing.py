"""Field-level particle measures in physical units: test area, intercepts per length, mean
free path, nearest-neighbour spacing and its Clark–Evans ratio, sub-region values.

The pixel size enters here and nowhere else in the particle path: callers pass pixel
counts and the pixel size, and get micrometres back.
"""

from __future__ import annotations

import math

import numpy as np

from ._particles import ParticleTable


def field_area_um2(shape: tuple[int, int], *, pixel_size_um: float,
                   valid: np.ndarray | None = None) -> float:
    """Area of the test field, µm² (only the ``valid`` pixels when a mask is given)."""
    s = pixel_size_um
    if valid is not None:
        return float(np.count_nonzero(valid)) * s * s
    h, w = shape
    return h * w * s * s


def intercepts_per_um(n_intercepts: float, line_length_px: float, *,
                      pixel_size_um: float) -> float:
    """N_L: particle intercepts per µm of test line (from :func:`intercept_density`)."""
    return float(n_intercepts / (line_length_px * pixel_size_um))


def mean_free_path_um(volume_fraction: float, n_l_per_um: float) -> float | None:
    """Mean free path between particles λ = (1 − V_V) / N_L (Fullman 1953)."""
    return float((1 - volume_fraction) / n_l_per_um) if n_l_per_um > 0 else None


def mean_particle_intercept_um(volume_fraction: float, n_l_per_um: float) -> float | None:
    """Mean intercept length through particles L̄₃ = V_V / N_L (Fullman 1953)."""
    return float(volume_fraction / n_l_per_um) if n_l_per_um > 0 else None


def mean_nn_distance_um(nn_px: np.ndarray, safe: np.ndarray, *,
                        pixel_size_um: float) -> float | None:
    """Mean of the edge-safe nearest-neighbour distances (from
    :func:`nearest_neighbour_distances`), µm; None when none is edge-safe."""
    return float(nn_px[safe].mean() * pixel_size_um) if safe.any() else None


def clark_evans_ratio(mean_nn_um: float | None, n_a_per_um2: float) -> float | None:
    """R = mean NN distance / (0.5 / √N_A): 1 random, < 1 clustered, > 1 ordered.

    The mean nearest-neighbour distance of a Poisson pattern of intensity N_A is
    0.5 / √N_A (Clark & Evans 1954).
    """
    return (mean_nn_um / (0.5 / math.sqrt(n_a_per_um2))) if mean_nn_um and n_a_per_um2 > 0 \
        else None


def centre_spacing_um(n_a_per_um2: float) -> float | None:
    """Planar centre-to-centre spacing N_A^(−1/2), µm."""
    return float(n_a_per_um2 ** -0.5) if n_a_per_um2 > 0 else None


def weighted_mean(x, w) -> float | None:
    """Σ w·x / Σ w, or None when the weights sum to zero."""
    s = float(np.sum(w))
    return float(np.sum(np.asarray(x) * w) / s) if s > 0 else None


def particle_subregions(mask: np.ndarray, table: ParticleTable, tiles: int, *,
                        pixel_size_um: float) -> dict:
    """Area fraction, particles per µm² and mean ECD in tiles × tiles sub-regions.

    A particle belongs to the tile holding its centroid (a unique reference point, so
    every particle is counted once); counts include particles cut by the field edge, whose
    centroids are inside the field; the mean ECD uses whole particles, edge-weighted.
    """
    h, w = mask.shape
    rows = np.linspace(0, h, tiles + 1)
    cols = np.linspace(0, w, tiles + 1)
    ti = np.clip(np.searchsorted(rows, table.centroid_row_px, side="right") - 1, 0, tiles - 1)
    tj = np.clip(np.searchsorted(cols, table.centroid_col_px, side="right") - 1, 0, tiles - 1)
    out: dict = {"tiles": f"{tiles}x{tiles}", "area_fraction": [], "particles_per_um2": [],
                 "mean_ecd_um": []}
    for i in range(tiles):
        for j in range(tiles):
            r0, r1, c0, c1 = int(rows[i]), int(rows[i + 1]), int(cols[j]), int(cols[j + 1])
            out["area_fraction"].append(float(mask[r0:r1, c0:c1].mean()))
            sel = (ti == i) & (tj == j)
            out["particles_per_um2"].append(float(sel.sum() / ((r1 - r0) * (c1 - c0)
                                                               * pixel_size_um**2)))
            sel &= ~table.edge
            out["mean_ecd_um"].append(weighted_mean(table.ecd_um[sel], table.weight[sel]))
    return out
