"""Synthetic sections through 3-D populations of spheres, with exact truth.

A population of spheres (log-normal radii) fills a box; a plane cuts it and every sphere
the plane meets leaves a disc of radius √(R² − z²) (Wicksell 1925). The discs are drawn
as bright (or dark) particles on a matrix, then the image is degraded as a microscope
would: uneven illumination, blur, noise and quantisation. The truth returned holds the
exact mask (pixel centres inside a disc), the disc list and the 3-D population, so that
area fraction, section sizes and the unfolded sphere-size distribution can be checked.

Two arrangements are offered:

* ``overlap=True`` — a Boolean model (Poisson centres, spheres may overlap), for which the
  volume fraction is 1 − exp(−N_V·v̄) (Matheron 1975; Chiu et al. 2013);
* ``overlap=False`` — hard spheres placed one at a time with rejection; a share of them
  (``touching``) is put in contact with an earlier sphere, so that sections show
  touching particles that the segmentation has to split.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._render import add_noise, blur, quantise, smooth_field, write_calibrated_tiff

__all__ = ["SpherePopulation", "ParticleSection", "sphere_population", "section_image",
           "add_info_strip", "projected_diameters", "write_section"]


@dataclass(frozen=True)
class SpherePopulation:
    """Spheres with centres in a box ``x0..x1 × y0..y1 × z0..z1`` (all lengths in µm)."""

    centres_um: np.ndarray  # (n, 3)
    radii_um: np.ndarray  # (n,)
    box_um: tuple[float, float, float, float, float, float]  # x0, x1, y0, y1, z0, z1
    field_um: tuple[float, float]  # the imaged field [0, sx) x [0, sy) at z = 0
    overlap: bool

    @property
    def volume_um3(self) -> float:
        x0, x1, y0, y1, z0, z1 = self.box_um
        return (x1 - x0) * (y1 - y0) * (z1 - z0)

    @property
    def number_per_um3(self) -> float:
        return len(self.radii_um) / self.volume_um3

    @property
    def mean_diameter_um(self) -> float:
        return float(2.0 * self.radii_um.mean())

    def to_dict(self) -> dict:
        return {"n_spheres": int(len(self.radii_um)), "box_um": list(self.box_um),
                "field_um": list(self.field_um),
                "overlap": self.overlap, "number_per_um3": self.number_per_um3,
                "mean_sphere_diameter_um": self.mean_diameter_um}


def _lognormal_radii(rng, n, median_um, sigma_ln):
    return median_um * np.exp(sigma_ln * rng.standard_normal(n))


def sphere_population(
    *,
    size_um: tuple[float, float],
    volume_fraction: float,
    median_radius_um: float,
    sigma_ln: float = 0.25,
    overlap: bool = False,
    touching: float = 0.3,
    rng=None,
) -> SpherePopulation:
    """Spheres with log-normal radii around the plane z = 0.

    Parameters
    ----------
    size_um : (float, float)
        Lateral size of the box (the field), x then y.
    volume_fraction : float
        Wanted V_V. With ``overlap=True`` this is the Boolean-model V_V = 1 − exp(−N_V·v̄);
        without overlap it is N_V·v̄ of the hard spheres.
    median_radius_um, sigma_ln : float
        Log-normal radius distribution: ln R ~ Normal(ln median, sigma_ln).
    overlap : bool
        Boolean model (True) or hard spheres (False).
    touching : float
        Without overlap, the share of spheres placed in contact with an earlier one.
    rng : seed or numpy Generator
    """
    rng = np.random.default_rng(rng)
    sx, sy = (float(v) for v in size_um)
    r_max = median_radius_um * np.exp(4.0 * sigma_ln)
    # Spheres whose centre is within r_max of the plane can reach it; a margin in x, y too.
    z0, z1 = -r_max, r_max
    box = (sx + 2 * r_max, sy + 2 * r_max, z1 - z0)
    volume = box[0] * box[1] * box[2]
    mean_v = 4.0 / 3.0 * np.pi * median_radius_um**3 * np.exp(4.5 * sigma_ln**2)
    nv_v = -np.log(1.0 - volume_fraction) if overlap else volume_fraction
    n = rng.poisson(nv_v * volume / mean_v)
    radii = np.minimum(_lognormal_radii(rng, n, median_radius_um, sigma_ln), r_max)
    lo = np.array([-r_max, -r_max, z0])
    if overlap:
        centres = lo + rng.random((n, 3)) * np.array(box)
    else:
        centres, radii = _hard_spheres(rng, radii, lo, np.array(box), touching)
    box_um = (-r_max, sx + r_max, -r_max, sy + r_max, z0, z1)
    return SpherePopulation(centres, radii, box_um, (sx, sy), overlap)


def _hard_spheres(rng, radii, lo, box, touching):
    """Random sequential addition of non-overlapping spheres (largest first).

    A candidate is rejected when it overlaps a sphere already placed or leaves the box;
    with probability ``touching`` it is put in contact with a random earlier sphere.
    """
    radii = np.sort(radii)[::-1]
    cell = 2.0 * radii.max()
    grid: dict[tuple[int, int, int], list[int]] = {}
    centres = np.empty((len(radii), 3))
    kept: list[int] = []
    near = [(a, b, c) for a in (-1, 0, 1) for b in (-1, 0, 1) for c in (-1, 0, 1)]

    def collides(c, r):
        key = (c // cell).astype(int)
        for dx, dy, dz in near:
            for k in grid.get((key[0] + dx, key[1] + dy, key[2] + dz), ()):
                if np.sum((centres[k] - c) ** 2) < (radii[k] + r) ** 2:
                    return True
        return False

    for i, r in enumerate(radii):
        for _ in range(60):
            if kept and rng.random() < touching:
                j = kept[rng.integers(len(kept))]
                v = rng.normal(size=3)
                c = centres[j] + v / np.linalg.norm(v) * (radii[j] + r) * 1.0005
                if np.any(c < lo) or np.any(c >= lo + box):
                    continue
            else:
                c = lo + rng.random(3) * box
            if not collides(c, r):
                centres[i] = c
                kept.append(i)
                grid.setdefault(tuple((c // cell).astype(int)), []).append(i)
                break
    kept_arr = np.array(kept, dtype=int)
    return centres[kept_arr], radii[kept_arr]


@dataclass(frozen=True)
class ParticleSection:
    """A rendered section and its exact truth."""

    image: np.ndarray  # uint8/uint16 rendered micrograph
    mask: np.ndarray  # bool, pixel centre inside a disc
    disc_centres_px: np.ndarray  # (m, 2) row, col
    disc_radii_px: np.ndarray  # (m,)
    pixel_size_um: float
    population: SpherePopulation

    @property
    def area_fraction(self) -> float:
        return float(self.mask.mean())

    def disc_diameters_um(self) -> np.ndarray:
        return 2.0 * self.disc_radii_px * self.pixel_size_um

    def discs_in_field(self) -> np.ndarray:
        """Boolean selector of discs whose centre lies inside the field."""
        h, w = self.mask.shape
        r, c = self.disc_centres_px[:, 0], self.disc_centres_px[:, 1]
        return (r >= -0.5) & (r < h - 0.5) & (c >= -0.5) & (c < w - 0.5)


def section_image(
    population: SpherePopulation,
    *,
    pixel_size_um: float,
    phase: str = "bright",
    matrix_level: float = 0.30,
    particle_level: float = 0.75,
    gradient: float = 0.25,
    blur_px: float = 1.0,
    noise: float = 0.03,
    bits: int = 8,
    rim: float = 0.0,
    rim_px: float = 1.5,
    channel: float = 0.0,
    channel_px: float = 6.0,
    rng=None,
) -> ParticleSection:
    """Render the section z = 0 of ``population`` as a micrograph.

    ``gradient`` is the peak-to-peak of the multiplicative illumination field, ``noise``
    the Gaussian read noise (grey units of a 0–1 image). ``phase="dark"`` swaps the levels.

    Secondary-electron looks: ``rim`` adds a bright edge rim of that height just outside
    every particle (Gaussian profile of width ``rim_px`` in the distance from the edge);
    ``channel`` brightens the matrix near particles, decaying over ``channel_px``, so that
    narrow matrix channels are brighter than wide matrix areas. The truth mask is the
    discs alone: rims and channels are matrix.
    """
    rng = np.random.default_rng(rng)
    sx, sy = population.field_um
    w, h = int(round(sx / pixel_size_um)), int(round(sy / pixel_size_um))
    z = population.centres_um[:, 2]
    rr = population.radii_um
    hit = np.abs(z) < rr
    rsec_px = np.sqrt(rr[hit] ** 2 - z[hit] ** 2) / pixel_size_um
    # pixel (i, j) has its centre at ((j + 0.5)·s, (i + 0.5)·s)
    cen_px = population.centres_um[hit][:, [1, 0]] / pixel_size_um - 0.5
    mask = np.zeros((h, w), bool)
    cover = np.zeros((h, w), np.float32)
    for (cr, cc), r in zip(cen_px, rsec_px, strict=True):
        r0, r1 = max(int(np.floor(cr - r - 1)), 0), min(int(np.ceil(cr + r + 2)), h)
        c0, c1 = max(int(np.floor(cc - r - 1)), 0), min(int(np.ceil(cc + r + 2)), w)
        if r0 >= r1 or c0 >= c1:
            continue
        yy, xx = np.ogrid[r0:r1, c0:c1]
        d = np.sqrt((yy - cr) ** 2 + (xx - cc) ** 2)
        mask[r0:r1, c0:c1] |= d < r
        # coverage of the pixel by the disc, to first order in the edge distance
        np.maximum(cover[r0:r1, c0:c1], np.clip(r - d + 0.5, 0, 1), out=cover[r0:r1, c0:c1])
    lo, hi = (matrix_level, particle_level) if phase == "bright" else (particle_level, matrix_level)
    img = lo + (hi - lo) * cover.astype(float)
    if rim > 0 or channel > 0:
        from scipy import ndimage as ndi

        d_out = ndi.distance_transform_edt(~mask)
        outside = 1.0 - cover
        if rim > 0:
            img = img + rim * outside * np.exp(-0.5 * ((d_out - 0.5) / rim_px) ** 2)
        if channel > 0:
            img = img + channel * outside * np.exp(-d_out / channel_px)
    img = blur(img, blur_px)
    img = img * smooth_field((h, w), rng, scale_px=max(h, w) / 3, amplitude=gradient)
    img = add_noise(img, rng, sigma=noise)
    keep = (cen_px[:, 0] > -rsec_px - 1) & (cen_px[:, 0] < h + rsec_px) & \
           (cen_px[:, 1] > -rsec_px - 1) & (cen_px[:, 1] < w + rsec_px)
    return ParticleSection(quantise(img, bits), mask, cen_px[keep], rsec_px[keep],
                           float(pixel_size_um), population)


def add_info_strip(image: np.ndarray, *, pixel_size_um: float, bar_um: float,
                   strip_px: int = 48, rng=None, ticks: bool = False) -> np.ndarray:
    """Append an instrument-style info strip (dark band, white bar, text-like marks).

    The bar is ``bar_um / pixel_size_um`` pixels long (its ends anti-aliased to sub-pixel
    length) and 4 px thick; the "text" is made of short blocks a few pixels wide.
    """
    rng = np.random.default_rng(rng)
    h, w = image.shape
    top = np.iinfo(image.dtype).max if image.dtype.kind in "ui" else 1.0
    strip = np.zeros((strip_px, w), float)
    length = bar_um / pixel_size_um
    c0 = 0.6 * w - length / 2 if length < 0.35 * w else 0.05 * w
    row = strip_px // 2
    cols = np.arange(w) + 0.5
    frac = np.clip(np.minimum(cols - c0, c0 + length - cols) + 0.5, 0, 1)
    strip[row - 2: row + 2] = frac
    if ticks:
        for c in (int(c0), int(c0 + length) - 1):
            strip[row - 6: row + 6, c] = 1.0
    # text-like glyphs: small blocks left of the bar
    x = int(0.04 * w)
    while x < c0 - 20 and x < 0.45 * w:
        gw = int(rng.integers(3, 7))
        gh = int(rng.integers(7, 11))
        strip[row - gh // 2: row + gh // 2, x: x + gw] = rng.uniform(0.6, 1.0)
        x += gw + int(rng.integers(2, 5))
    strip = np.round(strip * top).astype(image.dtype)
    return np.vstack([image, strip])


def projected_diameters(population: SpherePopulation, *, foil_thickness_um: float
                        ) -> np.ndarray:
    """Projected diameters of the spheres a foil ``0 ≤ z < t`` holds (wholly or in part).

    A sphere whose centre lies in the foil projects its full diameter; one cut by a
    foil surface projects its largest section inside the foil.
    """
    z = population.centres_um[:, 2]
    r = population.radii_um
    t = foil_thickness_um
    dz = np.where(z < 0, -z, np.where(z > t, z - t, 0.0))
    inside = dz < r
    return 2.0 * np.sqrt(r[inside] ** 2 - dz[inside] ** 2)


def write_section(path, section: ParticleSection, *, description: str = "") -> None:
    """Write the rendered section as a calibrated TIFF."""
    write_calibrated_tiff(path, section.image, section.pixel_size_um, description=description)
