"""Grain size of one field and of a specimen: the high-level API behind ``sectio grains``.

>>> import sectio                                                     # doctest: +SKIP
>>> field = sectio.measure_grains(sectio.load("f1.tif", pixel_size="0.5um"))  # doctest: +SKIP
>>> field.mean_intercept_um, field.astm_g_intercept                   # doctest: +SKIP
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field, replace

import numpy as np

from ._display import Displayed, Summary
from .errors import DegenerateDataWarning, OptionError
from .micrograph import Micrograph
from .segment import GrainSegmentation, GrainSegmentOptions, segment_grains
from .segment.twins import merge_twins
from .stereology import (
    InterceptCount,
    area_um2,
    astm_g_from_grains_per_mm2,
    astm_g_from_intercept_um,
    count_crossings,
    field_statistics,
    grain_sizes,
    iso643_g_from_grains_per_mm2,
    planimetric_count,
    stats_to_dict,
    subregion_intercepts_um,
)
from .units import parse_length_um

SCHEMA = "sectio/grains@1"


@dataclass(frozen=True)
class GrainOptions:
    """Measurement options (segmentation options plus test-line layout)."""

    segment: GrainSegmentOptions = field(default_factory=GrainSegmentOptions)
    angles_deg: tuple[float, ...] = (0.0, 45.0, 90.0, 135.0)
    line_spacing_px: int = 4
    circle_radius_fraction: float = 0.2  # circle radius as a fraction of the shorter side
    min_grain_size_um: float | None = None  # minimum equivalent circle diameter (physical)
    subregions: int = 3  # n × n sub-regions for a one-field confidence interval
    twins: str = "exclude"  # "exclude": twin boundaries are not grain boundaries (E112)

    def to_dict(self) -> dict:
        d = {
            k: getattr(self, k)
            for k in (
                "twins",
                "angles_deg",
                "line_spacing_px",
                "circle_radius_fraction",
                "min_grain_size_um",
                "subregions",
            )
        }
        d["angles_deg"] = list(self.angles_deg)
        d["segmentation"] = self.segment.to_dict()
        return d


#: Directions of the straight test lines (degrees): rows, columns and the two diagonals.
TEST_LINE_ANGLES = (0.0, 45.0, 90.0, 135.0)


def check_angles(angles, *, shown: str | None = None) -> tuple[float, ...]:
    """The test-line directions as a tuple of finite degrees among 0, 45, 90, 135."""
    from ._checks import check_number

    if shown is None:
        shown = (",".join(str(a) for a in angles) if isinstance(angles, (list, tuple))
                 else str(angles))[:60]
    if isinstance(angles, (str, bytes)) or not isinstance(angles, (list, tuple)) or not angles:
        raise OptionError(f"--angles {shown!r}: give a list of test-line directions among "
                          "0, 45, 90 and 135 degrees.")
    out = []
    for a in angles:
        v = check_number(a, what="--angles entry", low=-1e6, high=1e6)
        if v % 45.0 != 0.0:
            raise OptionError(f"--angles {shown!r}: test lines run at 0, 45, 90 or 135 "
                              "degrees; choose among those.")
        v = v % 180.0 + 0.0  # 180 is 0 again (and -0.0 is 0)
        if v not in out:
            out.append(v)
    return tuple(out)


def make_options(
    *,
    boundaries: str = "dark",
    contrast: str = "boundaries",
    min_grain_size: str | float | None = None,
    line_spacing_px: int = 4,
    angles_deg=(0.0, 45.0, 90.0, 135.0),
    ridge_scale_px: float | None = None,
    gap_px: float = 3.0,
    remove_scratches: bool = True,
    threshold_high: float | None = None,
    threshold_low: float | None = None,
    subregions: int = 3,
    twins: str = "exclude",
) -> GrainOptions:
    """Build :class:`GrainOptions` from user-facing values (units accepted for sizes)."""
    from ._checks import check_number

    line_spacing_px = check_number(line_spacing_px, what="--line-spacing",
                                   name="line_spacing_px")
    subregions = check_number(subregions, what="--subregions", name="subregions")
    gap_px = check_number(gap_px, what="--gap", name="gap_px")
    if ridge_scale_px is not None:
        ridge_scale_px = check_number(ridge_scale_px, what="--ridge-scale",
                                      name="ridge_scale_px")
    if threshold_high is not None:
        threshold_high = check_number(threshold_high, what="threshold_high",
                                      name="threshold_high")
    if threshold_low is not None:
        threshold_low = check_number(threshold_low, what="threshold_low", name="threshold_low")
    angles_deg = check_angles(angles_deg)
    if twins not in ("exclude", "include"):
        raise OptionError(f"--twins must be exclude or include, got {twins!r}.")
    min_um = None
    if min_grain_size is not None:
        min_um = parse_length_um(
            min_grain_size,
            what="--min-grain-size",
            default_unit="um" if isinstance(min_grain_size, (int, float)) else None,
        )
    seg = GrainSegmentOptions(
        boundaries=boundaries,
        contrast=contrast,
        ridge_sigma_px=ridge_scale_px,
        gap_px=gap_px,
        remove_scratches=remove_scratches,
        threshold_high=threshold_high,
        threshold_low=threshold_low,
    )
    return GrainOptions(
        segment=seg,
        angles_deg=angles_deg,
        line_spacing_px=int(line_spacing_px),
        min_grain_size_um=min_um,
        subregions=int(subregions),
        twins=twins,
    )


@dataclass(frozen=True, repr=False)
class GrainField(Displayed):
    """Grain size measured on one field (one micrograph).

    Shown in a console or notebook as a few headline numbers (``repr``, ``_repr_html_``).
    """

    micrograph: Micrograph
    labels: np.ndarray
    counts: InterceptCount
    planimetric_inside: int
    planimetric_edge: int
    planimetric_corner: int
    grains_per_mm2: float
    subregion_intercepts_um: tuple[float, ...]
    segmentation: GrainSegmentation
    options: GrainOptions
    # Regions with every twin band its own region, and the counts with and without twins
    # (``labels``/``counts`` are the ones the grain size uses, per ``options.twins``).
    region_labels: np.ndarray | None = None
    counts_with_twins: InterceptCount | None = None
    counts_without_twins: InterceptCount | None = None

    # -- headline numbers -------------------------------------------------------------
    @property
    def pixel_size_um(self) -> float:
        return self.micrograph.pixel_size_um

    @property
    def mean_intercept_um(self) -> float:
        return self.counts.mean_intercept_um

    @property
    def circle_intercept_um(self) -> float:
        return self.counts.circle_intercept_um

    @property
    def astm_g_intercept(self) -> float:
        return float(astm_g_from_intercept_um(self.mean_intercept_um))

    @property
    def astm_g_planimetric(self) -> float:
        return float(astm_g_from_grains_per_mm2(self.grains_per_mm2))

    @property
    def grain_count(self) -> int:
        return int(np.count_nonzero(np.bincount(self.labels.ravel())[1:]))

    @property
    def direction_intercepts_um(self) -> dict[str, float]:
        v = self.counts.direction_intercepts_um
        return {f"{a:g}": float(x) for a, x in zip(self.counts.angles_deg, v, strict=True)}

    @property
    def anisotropy_index(self) -> float:
        """Largest over smallest per-direction mean intercept (1 = equiaxed)."""
        v = np.asarray(list(self.direction_intercepts_um.values()))
        v = v[np.isfinite(v)]
        return float(v.max() / v.min()) if v.size >= 2 else float("nan")

    @property
    def twin_boundary_fraction(self) -> float:
        """Twin boundary length over all boundary length (grain + twin). Boundary length per
        area is (π/2)·P_L (REFERENCES.md §3.1), so the share is 1 − P_L(without)/P_L(with)."""
        if self.counts_with_twins is None or self.counts_without_twins is None:
            return 0.0
        with_ = self.counts_with_twins.mean_intercept_px
        without = self.counts_without_twins.mean_intercept_px
        return float(max(0.0, 1.0 - with_ / without)) if without > 0 else 0.0

    def _display(self):
        from ._display import num

        return "grain-size field", [
            ("image", self.micrograph.path),
            ("pixel size", num(self.pixel_size_um, "µm")),
            ("mean lineal intercept", num(self.mean_intercept_um, "µm")),
            ("ASTM E112 G (intercept, planimetric)",
             f"{num(self.astm_g_intercept)}, {num(self.astm_g_planimetric)}"),
            ("grains", f"{self.grain_count} ({num(self.grains_per_mm2)} per mm²)"),
            ("anisotropy index", num(self.anisotropy_index)),
        ]

    def grain_table(self) -> list[dict]:
        """One row per grain: area, equivalent circle diameter, centroid, edge contact."""
        g = grain_sizes(self.labels, pixel_size_um=self.pixel_size_um)
        return [
            {
                "image": self.micrograph.path,
                "grain": int(i),
                "area_um2": float(a),
                "ecd_um": float(e),
                "centroid_x_um": float(x),
                "centroid_y_um": float(y),
                "touches_edge": bool(t),
            }
            for i, a, e, x, y, t in zip(g.ids, g.area_um2, g.ecd_um, g.centroid_x_um,
                                        g.centroid_y_um, g.touches_edge, strict=True)
        ]

    def to_dict(self) -> dict:
        g = grain_sizes(self.labels, pixel_size_um=self.pixel_size_um)
        inner = ~g.touches_edge
        a_um2, ecd = g.area_um2, g.ecd_um
        seg = self.segmentation
        px = self.pixel_size_um
        with_, without = self.counts_with_twins, self.counts_without_twins
        return {
            **self.micrograph.to_dict(),
            "mean_intercept_um": self.mean_intercept_um,
            "twins": self.options.twins,
            "astm_g_uses": (
                "mean intercept without twin boundaries"
                if self.options.twins == "exclude"
                else "mean intercept counting twin boundaries"
            ),
            "mean_intercept_without_twins_um": (
                without.mean_intercept_px * px if without else self.mean_intercept_um
            ),
            "mean_intercept_with_twins_um": (
                with_.mean_intercept_px * px if with_ else self.mean_intercept_um
            ),
            "twin_boundary_fraction": self.twin_boundary_fraction,
            "twin_pair_count": int(len(getattr(seg, "twin_pairs", ()))),
            "twinned": bool(self.twin_boundary_fraction > 0.02),
            "intercept_count": self.counts.total_crossings,
            "test_line_length_um": self.counts.line_length_um,
            "direction_intercepts_um": self.direction_intercepts_um,
            "direction_counts": {
                f"{a:g}": int(c)
                for a, c in zip(self.counts.angles_deg, self.counts.crossings, strict=True)
            },
            "anisotropy_index": self.anisotropy_index,
            "circle_intercept_um": self.circle_intercept_um,
            "circle_count": self.counts.circle_crossings,
            "circle_line_length_um": self.counts.circle_length_um,
            "grain_count": self.grain_count,
            "grains_inside": self.planimetric_inside,
            "grains_on_edge": self.planimetric_edge,
            "grains_on_corner": self.planimetric_corner,
            "grains_per_mm2": self.grains_per_mm2,
            "astm_g_intercept": self.astm_g_intercept,
            "astm_g_planimetric": self.astm_g_planimetric,
            "astm_g_circle": float(astm_g_from_intercept_um(self.circle_intercept_um)),
            "iso643_g_planimetric": float(iso643_g_from_grains_per_mm2(self.grains_per_mm2)),
            **self._size_spread(a_um2, inner),
            "mean_grain_area_um2": float(a_um2[inner].mean()) if inner.any() else None,
            "mean_ecd_um": float(ecd[inner].mean()) if inner.any() else None,
            "subregion_intercepts_um": list(self.subregion_intercepts_um),
            "segmentation": {
                "ridge_scale_px": seg.ridge_sigma_px,
                "threshold_high": seg.threshold_high,
                "threshold_low": seg.threshold_low,
                "min_grain_area_um2": area_um2(seg.min_grain_area_px, self.pixel_size_um),
                "scratches_removed": seg.n_scratches_removed,
                "regions_merged": seg.n_merged,
                "small_regions_absorbed": seg.n_small_removed,
                "scale_lowered_for_twins": seg.twin_rescaled,
            },
        }

    @staticmethod
    def _size_spread(a_um2: np.ndarray, inner: np.ndarray) -> dict:
        """Duplex test on the grains not cut by the field edge (all grains if none) and
        the largest grain (ASTM E930 ALA, from all grains: a cut grain is a lower bound)."""
        from .stereology import duplex_grain_size, largest_grain_astm_g

        dx = duplex_grain_size(a_um2[inner] if inner.sum() >= 20 else a_um2)
        big = float(a_um2.max()) if a_um2.size else float("nan")
        return {
            "duplex": dx.duplex,
            "duplex_test": dx.to_dict(),
            "largest_grain_area_um2": big,
            "astm_g_largest_grain_ala": largest_grain_astm_g(big),
        }

    def overlay(self, *, max_lines_per_direction: int = 12) -> np.ndarray:
        """RGB picture of the field with detected boundaries and test lines drawn on it."""
        from .report.grains import grain_overlay

        return grain_overlay(self, max_lines_per_direction=max_lines_per_direction)


def measure_grains(
    micrograph: Micrograph, options: GrainOptions | None = None, **kwargs
) -> GrainField:
    """Segment the grains of one micrograph and measure them by standard stereology.

    Parameters
    ----------
    micrograph : Micrograph
        From :func:`sectio.load` or :func:`sectio.micrograph.from_array`.
    options : GrainOptions, optional
        Or keyword arguments of :func:`make_options` (``boundaries="bright"``, ...).

    Returns
    -------
    GrainField

    Notes
    -----
    Mean lineal intercept ℓ̄ = 1 / P_L from systematic straight lines in four directions
    and, separately, from circular test lines; planimetric (Jeffries) count with grains cut
    by the field edge weighted ½ and corner grains ¼; grain size numbers by the ASTM E112
    relations and the ISO 643 index.
    """
    if options is None:
        options = make_options(**kwargs)
    elif kwargs:
        raise TypeError("give either options or keyword arguments, not both")
    seg_opts = options.segment
    if options.min_grain_size_um is not None:
        d_px = options.min_grain_size_um / micrograph.pixel_size_um
        seg_opts = replace(seg_opts, min_grain_area_px=float(np.pi * d_px**2 / 4))
    seg = segment_grains(micrograph.image, seg_opts)
    return grain_field_from_labels(micrograph, seg.labels, options, seg)


def grain_field_from_labels(
    micrograph: Micrograph,
    labels: np.ndarray,
    options: GrainOptions,
    segmentation: GrainSegmentation,
) -> GrainField:
    """Measure a grain label map (from the segmentation, possibly corrected by hand).

    Label 0 marks pixels left out of the field (see :mod:`sectio.stereology._intercepts`).
    Twin pairs (``segmentation.twin_pairs``) refer to the labels of this map: with
    ``options.twins == "exclude"`` each twin joins its parent before counting.
    """
    regions = labels
    found = segmentation.twin_pairs if segmentation is not None else ()
    pairs = np.asarray(found, np.int64).reshape(-1, 2)
    if len(pairs) and regions is not segmentation.labels:
        # an edited map: keep the pairs whose two regions are still there
        present = np.bincount(regions.ravel(), minlength=int(pairs.max()) + 1) > 0
        pairs = pairs[present[pairs].all(axis=1) & (pairs.max(axis=1) <= regions.max())]
    grains = merge_twins(regions, pairs) if len(pairs) else regions
    labels = grains if options.twins == "exclude" else regions
    radius = options.circle_radius_fraction * min(labels.shape) / 2.0
    counts = count_crossings(
        labels,
        angles_deg=options.angles_deg,
        line_spacing_px=options.line_spacing_px,
        circle_radius_px=radius,
        pixel_size_um=micrograph.pixel_size_um,
    )
    other = count_crossings(
        regions if options.twins == "exclude" else grains,
        angles_deg=options.angles_deg,
        line_spacing_px=options.line_spacing_px,
    ) if len(pairs) else counts
    with_, without = (other, counts) if options.twins == "exclude" else (counts, other)
    left_out = labels == 0  # pixels left out of the field by hand
    pc = planimetric_count(labels, left_out=left_out if left_out.any() else None)
    return GrainField(
        micrograph=micrograph,
        labels=labels,
        counts=counts,
        planimetric_inside=pc.inside,
        planimetric_edge=pc.edge,
        planimetric_corner=pc.corner,
        grains_per_mm2=pc.grains_per_mm2(micrograph.pixel_size_um),
        subregion_intercepts_um=subregion_intercepts_um(
            labels, subregions=options.subregions, pixel_size_um=micrograph.pixel_size_um,
            angles_deg=options.angles_deg, line_spacing_px=options.line_spacing_px),
        segmentation=segmentation,
        options=options,
        region_labels=regions,
        counts_with_twins=with_,
        counts_without_twins=without,
    )


def summarize_grains(fields: list[GrainField] | list[dict], *, target_pct: float = 10.0) -> dict:
    """Specimen summary over fields: mean, s, 95 % CI (Student t), % relative accuracy, G.

    With a single field the interval comes from its sub-regions and is labelled so.
    G is computed from the mean intercept (not by averaging per-field G); its interval by
    converting the end points of the intercept interval (ASTM E112 practice).
    """
    dicts = [f.to_dict() if isinstance(f, GrainField) else f for f in fields]
    n = len(dicts)
    if n == 0:
        return {"n_fields": 0}
    li = [d["mean_intercept_um"] for d in dicts]
    na = [d["grains_per_mm2"] for d in dicts]
    if n >= 2:
        basis = "fields"
        s_l = field_statistics(li)
        s_n = field_statistics(na)
    else:
        basis = "sub-regions of one field"
        sub = dicts[0]["subregion_intercepts_um"]
        s_sub = field_statistics(sub, basis=basis)
        # Centre the interval on the whole-field value; width from the sub-region spread.
        hw = s_sub.half_width
        mean = li[0]
        s_l = replace(
            s_sub, mean=mean, ci95=(mean - hw, mean + hw), relative_accuracy_pct=100 * hw / mean
        )
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", DegenerateDataWarning)
            s_n = field_statistics(na)
    out = {
        "n_fields": n,
        "ci_basis": basis,
        "dof": s_l.n - 1 if s_l.n > 1 else None,
        "t_value": s_l.t,
    }
    out.update(stats_to_dict("mean_intercept_um", s_l, target_pct=target_pct))
    out["relative_accuracy_pct"] = out["mean_intercept_relative_accuracy_pct"]
    out["fields_for_10pct_relative_accuracy"] = (
        s_l.fields_for_accuracy(10.0) if basis == "fields" else None
    )
    out.update(stats_to_dict("grains_per_mm2", s_n, target_pct=target_pct))
    g = float(astm_g_from_intercept_um(s_l.mean))
    lo, hi = s_l.ci95
    out["astm_g"] = g
    out["astm_g_ci95"] = [
        float(astm_g_from_intercept_um(hi)) if hi and hi > 0 else None,
        float(astm_g_from_intercept_um(lo)) if lo and lo > 0 else None,
    ]
    out["astm_g_planimetric"] = float(astm_g_from_grains_per_mm2(s_n.mean))
    out["iso643_g_planimetric"] = float(iso643_g_from_grains_per_mm2(s_n.mean))
    n_duplex = int(sum(bool(d.get("duplex")) for d in dicts))
    out["duplex_fields"] = n_duplex
    out["duplex"] = n_duplex > 0
    big = [d["largest_grain_area_um2"] for d in dicts if d.get("largest_grain_area_um2")]
    if big:
        from .stereology import largest_grain_astm_g

        out["largest_grain_area_um2"] = float(max(big))
        out["astm_g_largest_grain_ala"] = largest_grain_astm_g(max(big))
    out["twins"] = dicts[0].get("twins", "exclude")
    out["astm_g_uses"] = dicts[0].get("astm_g_uses", "mean intercept")
    for key in (
        "mean_intercept_without_twins_um",
        "mean_intercept_with_twins_um",
        "twin_boundary_fraction",
    ):
        vals = [d[key] for d in dicts if d.get(key) is not None]
        out[key] = float(np.mean(vals)) if vals else None
    out["intercept_count_total"] = int(sum(d["intercept_count"] for d in dicts))
    out["grain_count_total"] = int(sum(d["grain_count"] for d in dicts))
    return Summary(out, kind="grains")
