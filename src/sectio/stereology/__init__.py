"""Stereology: pure functions of label maps, masks and numbers (no file or terminal I/O).

Grain size (ASTM E112 / E1382, ISO 643): mean lineal intercept by straight and circular
test lines, planimetric (Jeffries) count, grain size numbers. Particles (ASTM E562 /
E1245): area and point fractions, sizes, Feret diameters, Miles–Lantuéjoul edge weights,
spacing, Schwartz–Saltykov unfolding. Field-to-field statistics (Student t, % relative
accuracy).
"""

from ._duplex import DuplexResult, GrainMode, duplex_grain_size, largest_grain_astm_g
from ._fieldstats import (
    FieldStats,
    field_statistics,
    split_unit,
    stat_key,
    stats_to_dict,
    t_critical,
)
from ._grainsize import (
    astm_g_from_count_at_magnification,
    astm_g_from_grains_per_mm2,
    astm_g_from_intercept_um,
    grains_per_mm2_from_astm_g,
    intercept_um_from_astm_g,
    iso643_g_from_grains_per_mm2,
)
from ._intercepts import (
    InterceptCount,
    circle_centres,
    count_crossings,
    cyclic_crossings,
    intercept_lengths_px,
    intercept_lengths_um,
    mean_lineal_intercept,
    subregion_intercepts_um,
)
from ._particle_summary import subregion_statistics, summarize_particle_fields
from ._particles import (
    ParticleTable,
    feret_diameters,
    intercept_density,
    measure_labels,
    miles_lantuejoul_weight,
    nearest_neighbour_distances,
    point_count,
)
from ._planimetric import (
    GrainSizes,
    PlanimetricCount,
    area_um2,
    edge_and_corner_labels,
    grain_areas_px,
    grain_sizes,
    planimetric_count,
)
from ._sizes import SizeDistribution, lognormal_fit, size_distribution, weighted_quantile
from ._spacing import (
    centre_spacing_um,
    clark_evans_ratio,
    field_area_um2,
    intercepts_per_um,
    mean_free_path_um,
    mean_nn_distance_um,
    mean_particle_intercept_um,
    particle_subregions,
    weighted_mean,
)
from ._unfolding import Unfolding, foil_volume_fraction, saltykov_matrix, unfold_sections

__all__ = [
    "centre_spacing_um",
    "clark_evans_ratio",
    "field_area_um2",
    "intercepts_per_um",
    "mean_free_path_um",
    "mean_nn_distance_um",
    "mean_particle_intercept_um",
    "particle_subregions",
    "weighted_mean",
    "FieldStats",
    "GrainSizes",
    "DuplexResult",
    "GrainMode",
    "InterceptCount",
    "ParticleTable",
    "PlanimetricCount",
    "SizeDistribution",
    "Unfolding",
    "area_um2",
    "astm_g_from_count_at_magnification",
    "astm_g_from_grains_per_mm2",
    "astm_g_from_intercept_um",
    "circle_centres",
    "cyclic_crossings",
    "count_crossings",
    "duplex_grain_size",
    "edge_and_corner_labels",
    "feret_diameters",
    "field_statistics",
    "foil_volume_fraction",
    "grain_areas_px",
    "grain_sizes",
    "grains_per_mm2_from_astm_g",
    "intercept_density",
    "intercept_lengths_px",
    "intercept_lengths_um",
    "intercept_um_from_astm_g",
    "iso643_g_from_grains_per_mm2",
    "largest_grain_astm_g",
    "lognormal_fit",
    "mean_lineal_intercept",
    "measure_labels",
    "miles_lantuejoul_weight",
    "nearest_neighbour_distances",
    "planimetric_count",
    "point_count",
    "saltykov_matrix",
    "size_distribution",
    "split_unit",
    "stat_key",
    "stats_to_dict",
    "subregion_intercepts_um",
    "subregion_statistics",
    "summarize_particle_fields",
    "t_critical",
    "unfold_sections",
    "weighted_quantile",
]
