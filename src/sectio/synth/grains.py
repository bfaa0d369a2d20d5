"""Synthetic grain structures rendered as etched optical micrographs, with exact truth.

Structures
    ``voronoi``   Poisson–Voronoi tessellation (seeds uniform at random).
    ``hardcore``  Voronoi of a hard-core (Poisson-disc) point pattern: more uniform grains.
    ``duplex``    a power (Laguerre) diagram with a few large and many small grains.
Any of them can be stretched (``stretch=2`` gives 2:1 "rolled" grains along x).

Rendering imitates an etched, polished section under a light microscope: a shade per
grain (orientation-dependent etching), dark grooves at the boundaries with a depth per
boundary (some faint), blur, shot and read noise, uneven illumination, a few scratches
and pits. ``contrast="grains"`` renders shade contrast only, without grooves.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.spatial import cKDTree

from ._render import add_noise, blur, quantise, smooth_field


@dataclass(frozen=True)
class GrainTruth:
    """Exact answer of a synthetic grain image."""

    labels: np.ndarray  # (M, N) int32, grains numbered 1..n
    seeds_px: np.ndarray  # (n, 2) seed positions (row, col) in pixels
    params: dict = field(default_factory=dict)
    # With twins (sectio.synth.twins.add_twins): every twin band and parent part its own
    # region, i.e. the truth counting twin boundaries; ``labels`` stays twin-free.
    twin_labels: np.ndarray | None = None

    @property
    def n_grains(self) -> int:
        return int(self.labels.max())


def _poisson_disc(n: int, shape, rng: np.random.Generator, min_dist: float) -> np.ndarray:
    """Random sequential adsorption of up to ``n`` points at least ``min_dist`` apart."""
    h, w = shape
    pts: list[tuple[float, float]] = []
    cell = min_dist / np.sqrt(2)
    grid: dict[tuple[int, int], int] = {}
    tries = 0
    while len(pts) < n and tries < 60 * n:
        tries += 1
        p = (rng.uniform(0, h), rng.uniform(0, w))
        gi, gj = int(p[0] / cell), int(p[1] / cell)
        ok = True
        for di in range(-2, 3):
            for dj in range(-2, 3):
                k = grid.get((gi + di, gj + dj))
                if k is not None:
                    q = pts[k]
                    if (q[0] - p[0]) ** 2 + (q[1] - p[1]) ** 2 < min_dist**2:
                        ok = False
                        break
            if not ok:
                break
        if ok:
            grid[(gi, gj)] = len(pts)
            pts.append(p)
    return np.array(pts)


def grain_structure(
    shape: tuple[int, int],
    n_grains: int,
    *,
    kind: str = "voronoi",
    stretch: float = 1.0,
    hardcore_fraction: float = 0.7,
    duplex_fraction: float = 0.08,
    duplex_size_ratio: float = 4.0,
    rng=None,
) -> tuple[GrainTruth, dict]:
    """Exact grain label map of a tessellation and the geometry needed to render it.

    Parameters
    ----------
    shape : (rows, cols)
    n_grains : int
        Number of seeds in the image (the number of grains, up to edge effects).
    kind : {"voronoi", "hardcore", "duplex"}
    stretch : float
        Elongation along x (columns); 2 gives a 2:1 "rolled" structure.
    hardcore_fraction : float
        Hard-core distance as a fraction of the mean seed spacing (``kind="hardcore"``).
    duplex_fraction, duplex_size_ratio : float
        Fraction of seeds that grow large, and their diameter relative to the small ones.
    rng : seed or numpy Generator

    Returns
    -------
    truth : GrainTruth
    geometry : dict
        Seeds in scaled coordinates, weights and scale, for :func:`render_etched`.
    """
    rng = np.random.default_rng(rng)
    h, w = shape
    if kind not in ("voronoi", "hardcore", "duplex"):
        raise ValueError(f"kind must be voronoi, hardcore or duplex, got {kind!r}")
    # Work in scaled coordinates x' = x / stretch so that cells come out stretched along x.
    sx, sy = float(stretch), 1.0
    hs, ws = h / sy, w / sx
    # Seeds over a margin so that cells at the border are genuine cut cells.
    margin = 2.0 * np.sqrt(hs * ws / n_grains)
    area_ext = (hs + 2 * margin) * (ws + 2 * margin)
    n_ext = int(round(n_grains * area_ext / (hs * ws)))
    ext_shape = (hs + 2 * margin, ws + 2 * margin)
    if kind == "hardcore":
        spacing = np.sqrt(area_ext / n_ext)
        seeds = _poisson_disc(n_ext, ext_shape, rng, hardcore_fraction * spacing)
    else:
        seeds = np.column_stack(
            [rng.uniform(0, ext_shape[0], n_ext), rng.uniform(0, ext_shape[1], n_ext)]
        )
    seeds = seeds - margin
    weights = np.zeros(len(seeds))
    if kind == "duplex":
        # Power diagram: large grains get weight ~ r^2 so their cells grow (Laguerre cells).
        spacing = np.sqrt(hs * ws / n_grains)
        big = rng.random(len(seeds)) < duplex_fraction
        weights[big] = (0.5 * duplex_size_ratio * spacing) ** 2 * rng.uniform(0.6, 1.0, big.sum())
    labels, dist_px, pair_id = _assign(
        shape, seeds, weights, sx, sy, k=8 if kind != "duplex" else 40
    )
    # Keep only grains present in the image, numbered 1..n in raster order of first pixel.
    used, first = np.unique(labels.ravel(), return_index=True)
    order = used[np.argsort(first)]
    remap = np.zeros(len(seeds), dtype=np.int32)
    remap[order] = np.arange(1, len(order) + 1, dtype=np.int32)
    labels = remap[labels]
    seeds_px = np.column_stack([seeds[order, 0] * sy, seeds[order, 1] * sx])
    truth = GrainTruth(
        labels=labels,
        seeds_px=seeds_px,
        params={"kind": kind, "n_seeds": int(n_grains), "stretch": stretch},
    )
    geometry = {"boundary_distance_px": dist_px, "pair_id": pair_id, "remap": remap}
    return truth, geometry


def _assign(shape, seeds, weights, sx, sy, k: int = 8, chunk_rows: int = 256):
    """Nearest seed in the power metric and the pixel distance to the nearest cell edge."""
    h, w = shape
    tree = cKDTree(seeds)
    labels = np.empty(shape, dtype=np.int64)
    dist = np.empty(shape, dtype=np.float32)
    pair = np.empty(shape, dtype=np.int64)
    k = min(k, len(seeds))
    cols = (np.arange(w) + 0.5) / sx
    for r0 in range(0, h, chunk_rows):
        r1 = min(h, r0 + chunk_rows)
        rows = (np.arange(r0, r1) + 0.5) / sy
        pts = np.column_stack([np.repeat(rows, w), np.tile(cols, r1 - r0)])
        _, idx = tree.query(pts, k=k)
        diff = pts[:, None, :] - seeds[idx]
        power = (diff**2).sum(-1) - weights[idx]
        order = np.argsort(power, axis=1)
        best = np.take_along_axis(idx, order[:, :1], 1)[:, 0]
        p_best = np.take_along_axis(power, order[:, :1], 1)
        # Signed distance (scaled units) to each bisector with the other candidates.
        d_seed = seeds[idx] - seeds[best][:, None, :]
        norm = np.sqrt((d_seed**2).sum(-1))
        with np.errstate(divide="ignore", invalid="ignore"):
            f = (power - p_best) / (2 * norm)
            # Convert to pixel units: the bisector's normal in pixel space.
            nx = d_seed[..., 1] / sx
            ny = d_seed[..., 0] / sy
            npx = np.sqrt(nx**2 + ny**2) / norm
            dpx = f / npx
        dpx[norm == 0] = np.inf
        j = np.argmin(dpx, axis=1)
        other = idx[np.arange(len(idx)), j]
        labels[r0:r1] = best.reshape(r1 - r0, w)
        dist[r0:r1] = dpx[np.arange(len(idx)), j].reshape(r1 - r0, w)
        lo, hi = np.minimum(best, other), np.maximum(best, other)
        pair[r0:r1] = (lo * 1_000_003 + hi).reshape(r1 - r0, w)
    return labels, dist, pair


def _distinct_shades(labels: np.ndarray, rng, lo: float, hi: float) -> np.ndarray:
    """A shade per grain; neighbouring grains always differ in shade."""
    n = int(labels.max())
    a = np.concatenate([labels[:, :-1].ravel(), labels[:-1, :].ravel()])
    b = np.concatenate([labels[:, 1:].ravel(), labels[1:, :].ravel()])
    m = a != b
    pairs = np.unique(np.sort(np.column_stack([a[m], b[m]]), axis=1), axis=0)
    nbrs: list[list[int]] = [[] for _ in range(n + 1)]
    for i, j in pairs:
        nbrs[i].append(j)
        nbrs[j].append(i)
    # Greedy colouring with 8 grey levels: a neighbour never gets the same level, so every
    # boundary shows at least one level step ((hi - lo) / 7) of contrast.
    levels = np.linspace(lo, hi, 8)
    level_of = np.full(n + 1, -1)
    for g in rng.permutation(np.arange(1, n + 1)):
        used = set(level_of[nbrs[g]].tolist())
        free = [k for k in range(8) if k not in used] or list(range(8))
        level_of[g] = rng.choice(free)
    shades = levels[level_of] + rng.uniform(-0.2, 0.2, n + 1) * (hi - lo) / 7
    shades[0] = (lo + hi) / 2
    return shades


def render_etched(
    truth: GrainTruth,
    geometry: dict,
    *,
    rng=None,
    contrast: str = "boundaries",
    boundary_width_px: float = 2.0,
    boundary_depth: float = 0.55,
    faint_fraction: float = 0.1,
    faint_depth_factor: float = 0.35,
    shade_range: tuple[float, float] = (0.55, 0.85),
    blur_px: float = 0.7,
    noise_sigma: float = 0.025,
    illumination: float = 0.3,
    n_scratches: int = 2,
    n_pits: int = 10,
    bright_boundaries: bool = False,
    bits: int = 8,
) -> np.ndarray:
    """Render the grain structure as an etched optical micrograph (uint8 or uint16).

    ``boundary_width_px`` is the full width at half depth of a boundary groove.
    ``contrast="grains"`` draws no grooves; neighbouring grains then differ in shade.
    """
    rng = np.random.default_rng(rng)
    labels = truth.labels
    shape = labels.shape
    if contrast == "grains":
        shades = _distinct_shades(labels, rng, 0.15, 0.9)
    else:
        shades = rng.uniform(shade_range[0], shade_range[1], labels.max() + 1)
    img = shades[labels]
    if geometry.get("twins"):
        from .twins import render_twins

        img = render_twins(img, labels, geometry["twins"], boundary_width_px=boundary_width_px,
                           boundary_depth=boundary_depth if contrast != "grains" else 0.0,
                           bright=bright_boundaries)
    if contrast != "grains":
        d = geometry["boundary_distance_px"].astype(float)
        sigma = boundary_width_px / 2.3548
        pair = geometry["pair_id"]
        # One depth per boundary (pair of grains): some boundaries etch faintly.
        u = ((pair * 2654435761) % 1_000_003) / 1_000_003.0
        rs = np.random.default_rng(int(rng.integers(1 << 31)))
        salt = rs.uniform()
        u = (u + salt) % 1.0
        depth = np.where(
            u < faint_fraction,
            boundary_depth * faint_depth_factor,
            boundary_depth * (0.75 + 0.5 * ((u * 7.31) % 1.0)),
        )
        groove = depth * np.exp(-0.5 * (d / sigma) ** 2)
        if bright_boundaries:
            img = img + (1.0 - img) * groove * 1.2
        else:
            img = img * (1.0 - groove)
    img = _scratches_and_pits(img, rng, n_scratches, n_pits, bright_boundaries)
    img = img * smooth_field(shape, rng, scale_px=max(shape) / 3, amplitude=illumination)
    img = blur(img, blur_px)
    img = add_noise(img, rng, sigma=noise_sigma, shot_photons=400.0)
    return quantise(img, bits)


def _scratches_and_pits(img, rng, n_scratches, n_pits, bright):
    h, w = img.shape
    yy, xx = np.mgrid[0:h, 0:w]
    out = img.copy()
    for _ in range(n_scratches):
        ang = rng.uniform(0, np.pi)
        cy, cx = rng.uniform(0, h), rng.uniform(0, w)
        d = np.abs((yy - cy) * np.cos(ang) - (xx - cx) * np.sin(ang))
        along = (yy - cy) * np.sin(ang) + (xx - cx) * np.cos(ang)
        half_len = rng.uniform(0.3, 0.8) * max(h, w)
        mask = np.exp(-0.5 * (d / 0.6) ** 2) * (np.abs(along) < half_len)
        out = out * (1 - rng.uniform(0.12, 0.25) * mask)
    for _ in range(n_pits):
        r = rng.uniform(1.5, 4.0)
        cy, cx = rng.uniform(0, h), rng.uniform(0, w)
        y0, y1 = int(max(0, cy - 3 * r)), int(min(h, cy + 3 * r + 1))
        x0, x1 = int(max(0, cx - 3 * r)), int(min(w, cx + 3 * r + 1))
        dd = np.hypot(yy[y0:y1, x0:x1] - cy, xx[y0:y1, x0:x1] - cx)
        pit = np.clip(r + 0.5 - dd, 0, 1) * 0.75
        out[y0:y1, x0:x1] = out[y0:y1, x0:x1] * (1 - pit)
    return out


def synthetic_grains(
    shape=(768, 768),
    n_grains: int = 300,
    *,
    rng=None,
    kind: str = "voronoi",
    stretch: float = 1.0,
    twins: dict | bool | None = None,
    structure: dict | None = None,
    **render_options,
) -> tuple[np.ndarray, GrainTruth]:
    """Structure and rendering in one call: returns ``(image, truth)``.

    ``twins``: True or keyword arguments of :func:`sectio.synth.twins.add_twins` to draw
    annealing twins (``truth.twin_labels`` then holds the truth counting them);
    ``structure``: further keyword arguments of :func:`grain_structure`.
    """
    rng = np.random.default_rng(rng)
    truth, geometry = grain_structure(
        shape, n_grains, kind=kind, stretch=stretch, rng=rng, **(structure or {})
    )
    if twins:
        from .twins import add_twins

        truth, bands = add_twins(truth, rng=rng, **(twins if isinstance(twins, dict) else {}))
        geometry = {**geometry, "twins": bands}
    image = render_etched(truth, geometry, rng=rng, **render_options)
    return image, truth
