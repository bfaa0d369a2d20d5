"""Second-phase particles of one field, and statistics over fields.

``measure_particles(micrograph)`` segments the particles (:mod:`sectio.segment.particles`)
and measures them (:mod:`sectio.stereology._particles`, ``_sizes``, ``_unfolding``):

* area fraction A_A, which equals the volume fraction V_V by the Delesse principle, and a
  systematic point count P_P (ASTM E562) on the same mask as a cross-check;
* particles per µm² with the Miles–Lantuéjoul edge weighting, per-particle ECD, Feret
  diameters, aspect ratio and centroid;
* intercepts per µm N_L, mean free path λ = (1 − V_V)/N_L (Fullman 1953), nearest-
  neighbour distances and the planar centre-to-centre spacing N_A^(−1/2);
* size distribution of ECD, Schwartz–Saltykov unfolding to sphere diameters.

``summarize_particles(fields)`` gives the field-to-field statistics of ASTM E562/E1245
(mean, s, 95 % CI by Student t, % relative accuracy, fields for 10 %), from sub-regions
when there is only one field.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ._display import Displayed, Summary
from .micrograph import Micrograph
from .segment import (
    MOSTLY_PARTICLE,
    ParticleSegmentation,
    partial_area_fraction,
    segment_particles,
)
from .stereology import (
    ParticleTable,
    SizeDistribution,
    Unfolding,
    centre_spacing_um,
    clark_evans_ratio,
    field_area_um2,
    foil_volume_fraction,
    intercept_density,
    intercepts_per_um,
    mean_free_path_um,
    mean_nn_distance_um,
    mean_particle_intercept_um,
    measure_labels,
    nearest_neighbour_distances,
    particle_subregions,
    point_count,
    size_distribution,
    unfold_sections,
    weighted_mean,
)
from .stereology._size_classes import size_class_table

__all__ = ["ParticleField", "measure_particles", "summarize_particles"]

SCHEMA = "sectio/particles@1"
#: Overlay colours (RGB): counted particles, particles cut by the edge, split lines.
OUTLINE_RGB = (0, 230, 255)
EDGE_RGB = (255, 200, 0)
SPLIT_RGB = (255, 40, 160)


@dataclass(frozen=True, repr=False)
class ParticleField(Displayed):
    """Particle measurements of one field; lengths in µm, areas in µm².

    Shown in a console or notebook as a few headline numbers (``repr``, ``_repr_html_``).
    """

    micrograph: Micrograph
    segmentation: ParticleSegmentation
    table: ParticleTable
    area_fraction: float
    volume_fraction: float
    point_fraction: float
    point_hits: int
    point_total: int
    particle_count: int
    particles_counted: int
    particles_per_um2: float
    mean_ecd_um: float | None
    mean_feret_max_um: float | None
    mean_aspect_ratio: float | None
    intercepts_per_um: float
    mean_free_path_um: float | None
    mean_intercept_um: float | None
    mean_nn_distance_um: float | None
    nn_count: int
    clark_evans_ratio: float | None
    centre_spacing_um: float | None
    sizes: SizeDistribution
    unfolding: Unfolding | None
    subregions: dict
    flags: tuple[str, ...]
    options: dict = field(default_factory=dict)
    #: flags that mean the result is probably wrong (a subset of ``flags``)
    suspect: tuple[str, ...] = ()
    area_fraction_edge_corrected: float | None = None
    notes: tuple[str, ...] = ()
    size_classes: dict = field(default_factory=lambda: {"detected": False})

    @property
    def image(self) -> str:
        return self.micrograph.path

    def _display(self):
        from ._display import _flags, num

        return "particle field", [
            ("image", self.micrograph.path),
            ("pixel size", num(self.micrograph.pixel_size_um, "µm")),
            ("volume fraction (area)", num(100 * self.volume_fraction, "%")),
            ("particles", f"{self.particle_count} ({self.particles_counted} whole; "
                          f"{num(self.particles_per_um2)} per µm²)"),
            ("mean ECD", num(self.mean_ecd_um, "µm")),
            ("mean sphere diameter", num(self.mean_sphere_diameter_um, "µm")),
            ("flags", _flags(self.flags)),
        ]

    def whole_sections(self) -> tuple[np.ndarray, np.ndarray]:
        """ECD (µm) and Miles–Lantuéjoul weight of the particles not cut by the field edge."""
        whole = ~self.table.edge
        return self.table.ecd_um[whole], self.table.weight[whole]

    @property
    def mean_sphere_diameter_um(self) -> float | None:
        """Mean sphere diameter of this field's own Saltykov unfolding."""
        return None if self.unfolding is None else self.unfolding.mean_sphere_diameter_um

    def to_dict(self, *, particles: bool = False) -> dict:
        u = self.unfolding
        d = {
            "image": self.micrograph.path,
            "pixel_size_um": self.micrograph.pixel_size_um,
            "calibration": self.micrograph.to_dict(),
            "field_area_um2": self.micrograph.area_um2,
            "area_fraction": self.area_fraction,
            "volume_fraction": self.volume_fraction,
            "point_fraction": self.point_fraction,
            "point_count": {"hits": self.point_hits, "points": self.point_total,
                            "binomial_se": _binomial_se(self.point_fraction, self.point_total)},
            "particle_count": self.particle_count,
            "particles_counted": self.particles_counted,
            "particles_cut_by_edge": int(self.particle_count - self.particles_counted),
            "particles_split": self.segmentation.n_split,
            "particles_per_um2": self.particles_per_um2,
            "mean_ecd_um": self.mean_ecd_um,
            "mean_feret_max_um": self.mean_feret_max_um,
            "mean_aspect_ratio": self.mean_aspect_ratio,
            "intercepts_per_um": self.intercepts_per_um,
            "mean_free_path_um": self.mean_free_path_um,
            "mean_intercept_um": self.mean_intercept_um,
            "mean_nn_distance_um": self.mean_nn_distance_um,
            "nn_distances_used": self.nn_count,
            "clark_evans_ratio": self.clark_evans_ratio,
            "centre_spacing_um": self.centre_spacing_um,
            "mean_sphere_diameter_um": None if u is None else u.mean_sphere_diameter_um,
            "spheres_per_um3": None if u is None else u.number_per_um3,
            "area_fraction_edge_corrected": self.area_fraction_edge_corrected,
            "phase": self.segmentation.phase,
            "phase_requested": self.segmentation.options.get("phase_requested"),
            "method": self.segmentation.options.get("method"),
            "threshold": self.segmentation.threshold,
            "threshold_method": self.segmentation.threshold_method,
            "segmentation": {
                "method": self.segmentation.options.get("method"),
                "level": self.segmentation.threshold,
                "level_scale": "flattened, denoised image, 0-1",
                "region_particle_fraction": self.segmentation.region_fraction,
                "particle_continuity": self.segmentation.particle_continuity,
                "matrix_continuity": self.segmentation.matrix_continuity,
                "region_separability": self.segmentation.region_separability,
                "region_significance": self.segmentation.region_significance,
            },
            "matrix_level": self.segmentation.matrix_level,
            "particle_level": self.segmentation.particle_level,
            "size_distribution_ecd": self.sizes.to_dict(),
            "unfolding": None if u is None else u.to_dict(),
            "subregions": self.subregions,
            "flags": list(self.flags),
            "suspect_flags": list(self.suspect),
            "probably_wrong": bool(self.suspect),
            "notes": list(self.notes),
            "size_classes": self.size_classes,
        }
        if particles:
            d["particles"] = self.table.rows(self.micrograph.pixel_size_um)
        return d

    def overlay(self) -> np.ndarray:
        """RGB uint8 picture: grey image, counted particles outlined, edge-cut particles
        in a second colour, split lines in a third."""
        from skimage.segmentation import find_boundaries

        grey = np.clip(self.micrograph.image * 255.0, 0, 255).astype(np.uint8)
        rgb = np.repeat(grey[..., None], 3, axis=2)
        labels = self.segmentation.labels
        outer = find_boundaries(labels, mode="inner") & ~self.segmentation.split_lines
        edge_labels = np.zeros(int(labels.max()) + 1, bool)
        edge_labels[self.table.label[self.table.edge]] = True
        cut = outer & edge_labels[labels]
        rgb[outer & ~cut] = OUTLINE_RGB
        rgb[cut] = EDGE_RGB
        rgb[self.segmentation.split_lines] = SPLIT_RGB
        return rgb


def _binomial_se(p: float, n: int) -> float | None:
    return math.sqrt(p * (1 - p) / n) if n > 0 else None


def measure_particles(
    micrograph: Micrograph,
    *,
    phase: str = "bright",
    threshold: float | None = None,
    min_size_um: float | None = None,
    split: bool = True,
    points_per_side: int = 20,
    n_classes: int = 10,
    foil_thickness_um: float | None = None,
    seed: int | None = 0,
    method: str = "auto",
) -> ParticleField:
    """Segment and measure the second-phase particles of one field.

    Parameters
    ----------
    micrograph : Micrograph
    phase : {"bright", "dark", "auto"}
        Particles brighter (default) or darker than the matrix; ``auto`` takes the
        continuous phase as the matrix and says which it chose.
    method : {"auto", "half-contrast", "regions"}
        Threshold method (:func:`sectio.segment.particles.segment_particles`).
    threshold : float, optional
        Manual threshold in (0, 1) of the flattened image; default automatic.
    min_size_um : float, optional
        Size floor as an equivalent circle diameter; default 3 pixels.
    split : bool
        Split touching particles (distance-transform watershed).
    points_per_side : int
        Systematic point-count grid (points along the longer side).
    n_classes : int
        Diameter classes of the Saltykov unfolding.
    foil_thickness_um : float, optional
        Projected thin-foil image of this thickness: the unfolding and the volume fraction
        are corrected for projection.
    seed : int
        Offset of the point-count grid.

    Returns
    -------
    ParticleField
    """
    from .errors import OptionError

    s = micrograph.pixel_size_um
    floor_um = float(min_size_um) if min_size_um else 3.0 * s
    if floor_um / s > 0.5 * min(micrograph.shape):
        raise OptionError(f"--min-size {floor_um:g} µm is larger than half of "
                          f"{micrograph.name}; give a smaller size floor.")
    if foil_thickness_um is not None and not foil_thickness_um > 0:
        raise OptionError("--foil-thickness must be positive, e.g. 80nm.")
    min_area_px = math.pi / 4.0 * (floor_um / s) ** 2
    seg = segment_particles(micrograph.image, phase=phase, threshold=threshold,
                            min_area_px=min_area_px, split=split, method=method)
    return particle_field_from_segmentation(
        micrograph, seg, phase=phase, floor_um=floor_um, points_per_side=points_per_side,
        n_classes=n_classes, foil_thickness_um=foil_thickness_um, seed=seed)


def particle_field_from_segmentation(
    micrograph: Micrograph,
    seg: ParticleSegmentation,
    *,
    phase: str,
    floor_um: float,
    points_per_side: int = 20,
    n_classes: int = 10,
    foil_thickness_um: float | None = None,
    seed: int | None = 0,
    left_out: np.ndarray | None = None,
) -> ParticleField:
    """Measure a particle segmentation (automatic, or corrected by hand).

    ``left_out`` marks pixels left out of the field by hand: the field area, the area
    fraction, the point count and the test lines cover the rest only, and particles that
    touch a left-out region are treated like particles cut by the field edge.
    """
    s = micrograph.pixel_size_um
    table = measure_labels(seg.labels, pixel_size_um=s)
    area_um2 = field_area_um2(seg.mask.shape, pixel_size_um=s)
    a_a = float(seg.mask.mean())
    p_p, hits, total = point_count(seg.mask, points_per_side=points_per_side, rng=seed)
    n_int, line_px = intercept_density(seg.mask)
    if left_out is not None and left_out.any():
        from scipy import ndimage as ndi

        valid = ~left_out
        area_um2 = field_area_um2(seg.mask.shape, pixel_size_um=s, valid=valid)
        a_a = float(seg.mask[valid].mean()) if valid.any() else 0.0
        p_p, hits, total = point_count(seg.mask, points_per_side=points_per_side, rng=seed,
                                       valid=valid)
        line_px *= float(np.count_nonzero(valid)) / valid.size
        rim = ndi.binary_dilation(left_out, structure=np.ones((3, 3), bool))
        near = np.unique(seg.labels[rim & (seg.labels > 0)])
        table.edge[np.isin(table.label, near)] = True
        table.weight[table.edge] = 0.0
    whole = ~table.edge
    wts = table.weight[whole]
    n_a = float(wts.sum() / area_um2)
    n_l = intercepts_per_um(n_int, line_px, pixel_size_um=s)
    nn, safe = nearest_neighbour_distances(table.centroid_row_px, table.centroid_col_px,
                                           seg.mask.shape)
    mean_nn = mean_nn_distance_um(nn, safe, pixel_size_um=s)
    unf = None
    v_v = a_a
    if whole.sum() >= 1:
        unf = unfold_sections(table.ecd_um[whole], area_um2=area_um2, weights=wts,
                              n_classes=n_classes, min_diameter_um=floor_um,
                              foil_thickness_um=foil_thickness_um or 0.0)
        m2, m3 = unf.moment_um(2), unf.moment_um(3)
        if foil_thickness_um and unf.number_per_um3 > 0 and m2 is not None and m3 is not None:
            v_v = foil_volume_fraction(a_a, foil_thickness_um=foil_thickness_um,
                                       mean_d2_um2=m2, mean_d3_um3=m3)
    flags, suspect, notes = _field_flags(seg, table, a_a, whole,
                                         seg.options.get("phase_requested", phase), area_um2)
    img_bright = seg.flattened if seg.phase == "bright" else 1.0 - seg.flattened
    a_pv = partial_area_fraction(img_bright, seg.mask)[0] if seg.mask.any() else 0.0
    tiles = 3 if whole.sum() >= 90 else 2
    options = {**seg.options, "min_size_um": floor_um, "points_per_side": points_per_side,
               "n_classes": n_classes, "foil_thickness_um": foil_thickness_um, "seed": seed,
               "edge_correction": "Miles-Lantuejoul weighting of whole particles"}
    return ParticleField(
        micrograph=micrograph, segmentation=seg, table=table, area_fraction=a_a,
        volume_fraction=float(v_v), point_fraction=p_p, point_hits=hits, point_total=total,
        particle_count=len(table), particles_counted=int(whole.sum()), particles_per_um2=n_a,
        mean_ecd_um=weighted_mean(table.ecd_um[whole], wts),
        mean_feret_max_um=weighted_mean(table.feret_max_um[whole], wts),
        mean_aspect_ratio=weighted_mean(table.aspect_ratio[whole], wts),
        intercepts_per_um=n_l,
        mean_free_path_um=mean_free_path_um(a_a, n_l),
        mean_intercept_um=mean_particle_intercept_um(a_a, n_l),
        mean_nn_distance_um=mean_nn, nn_count=int(safe.sum()),
        clark_evans_ratio=clark_evans_ratio(mean_nn, n_a),
        centre_spacing_um=centre_spacing_um(n_a),
        sizes=size_distribution(table.ecd_um[whole], wts), unfolding=unf,
        subregions=particle_subregions(seg.mask, table, tiles, pixel_size_um=s),
        flags=tuple(flags), options=options,
        suspect=tuple(suspect), area_fraction_edge_corrected=float(a_pv), notes=tuple(notes),
        size_classes=size_class_table(table.ecd_um, table.area_um2, table.edge, table.weight,
                                      field_area_um2=area_um2, floor_um=floor_um,
                                      n_classes=n_classes),
    )


#: Particle phase "continuous" when its largest piece holds at least this share and the
#: other phase is broken into islands (common practice: the matrix is continuous).
CONTINUOUS = 0.9
#: A particle larger than this share of the field is probably matrix or merged particles.
LARGEST_SHARE = 0.1


def _field_flags(seg, table, a_a, whole, phase_requested, field_area_um2):
    """Flags of one field; the second list holds those that make it probably wrong."""
    flags, suspect, notes = [], [], []

    def add(text, wrong):
        flags.append(text)
        if wrong:
            suspect.append(text)

    phase = seg.phase
    other = "dark" if phase == "bright" else "bright"
    if phase_requested == "auto":
        notes.append(f"phase chosen: {phase} (the {other} phase is continuous: the matrix)"
                     if seg.matrix_continuity - seg.particle_continuity >= 0.3 else
                     f"phase chosen: {phase} (the larger phase taken as the matrix)")
    if a_a > MOSTLY_PARTICLE:
        add(f"mostly particle ({100 * a_a:.0f} % of the field is {phase}er than the "
            f"matrix): probably the wrong --phase or the wrong matrix; check the overlay",
            True)
    if (seg.particle_continuity >= CONTINUOUS and seg.matrix_continuity < 0.5
            and a_a > 0.2):
        add(f"the {phase} phase is continuous and the other one is islands: the "
            f"{phase} phase is probably the matrix (try --phase {other} or --phase auto)",
            True)
    if seg.opposite_fraction > max(0.01, 2.0 * a_a) and seg.options.get("method") != "regions":
        add(f"{100 * seg.opposite_fraction:.1f} % of the field is clearly {other}er "
            f"than the matrix but only {100 * a_a:.1f} % is {phase}er: probably the "
            f"wrong --phase (try --phase {other} or --phase auto)", True)
    if table.label.size == 0:
        strong = seg.region_significance >= 6.0 and 0.01 < seg.region_fraction < 0.99
        add("no particles found" + (" although the image has strong two-phase "
            "structure: probably a wrong threshold or --phase" if strong else ""), strong)
    elif whole.sum() < 30:
        flags.append(f"only {int(whole.sum())} whole particles: sizes and unfolding are rough")
    if table.label.size:
        big = float(table.area_um2.max()) / field_area_um2
        if big > LARGEST_SHARE:
            add(f"one particle covers {100 * big:.0f} % of the field (more than "
                f"{100 * LARGEST_SHARE:.0f} %): probably merged particles or matrix "
                "counted as particle", True)
    return flags, suspect, notes


def summarize_particles(fields, *, bootstrap: int = 200, seed: int = 0) -> dict:
    """Statistics over live :class:`ParticleField` results.

    See :func:`sectio.stereology.summarize_particle_fields`; a specimen's fields are
    summarised from their records by :func:`sectio.specimen.particles_document`.
    """
    from .stereology import summarize_particle_fields

    fields = list(fields)
    return Summary(summarize_particle_fields(
        [f.to_dict() for f in fields], [f.options for f in fields],
        [f.whole_sections() for f in fields], bootstrap=bootstrap, seed=seed), kind="particles")
