"""Yield strength from measured microstructure: Hall–Petch, Orowan, superposition, Monte Carlo.

Pure functions of numbers (no file or terminal I/O apart from reading a materials file).
The main entry point for a study runner is :func:`estimate_from_summaries`::

    from sectio.strength import estimate_from_summaries
    est = estimate_from_summaries(grains["summary"], particles["summary"],
                                  material="steel-ferritic-lowc", seed=0, draws=20000,
                                  orowan_form="ashby_orowan", superposition="linear")
    est.median_mpa, est.yield_ci95_mpa, est.to_dict()   # sectio/strength@1 document

Every estimate carries :data:`CAUTION`: a model estimate, not a measured property, and no
substitute for tensile testing (ASTM E8/E8M, ISO 6892-1) nor a design allowable.
"""

from __future__ import annotations

from .choices import (
    CONVENTION_CHOICES,
    OROWAN_CHOICES,
    SCOPE_CHOICES,
    SPACING_CHOICES,
    SUPERPOSITION_CHOICES,
)
from .estimate import (
    CAUTION,
    SCHEMA,
    StrengthOptions,
    YieldEstimate,
    estimate_from_summaries,
    predict_yield,
)
from .fit import FIT_CAUTION, FitDataError, HallPetchFit, fit_hall_petch, york_line
from .hall_petch import (
    GRAIN_SIZE_CONVENTIONS,
    GrainSizeConvention,
    convert_k_convention,
    convert_k_units,
    get_convention,
    grain_boundary_term_mpa,
    grain_size_flags,
    hall_petch_mpa,
    intercept_to_grain_size_um,
)
from .materials import (
    Material,
    MaterialsFileError,
    Quantity,
    burgers_vector_nm,
    get_material,
    load_materials,
    material_toml,
    shear_modulus_from_elastic_gpa,
)
from .measured import (
    MeasuredValue,
    ParticleMeasurements,
    SummaryError,
    grain_intercept_um,
    particle_measurements,
)
from .montecarlo import UncertainInput, first_order_sd, propagate
from .orowan import (
    OROWAN_FORMS,
    orowan_ashby_gladman_mpa,
    orowan_ashby_mpa,
    orowan_classic_mpa,
    orowan_line_tension_mpa,
    taylor_dislocation_mpa,
)
from .spacing import (
    SPACING_FORMULAS,
    centre_spacing_planar_nm,
    centre_spacing_spheres_nm,
    edge_spacing_planar_nm,
    edge_spacing_spheres_mean_nm,
    edge_spacing_spheres_rms_nm,
    fullman_mean_free_path_nm,
    sections_per_area_from_spheres,
    triangular_centre_spacing_nm,
)
from .steels import gladman_ferrite_pearlite_yield_mpa, pickering_ferrite_yield_mpa
from .superposition import SUPERPOSITION_RULES, superpose, superposition_exponent

__all__ = [
    "CAUTION",
    "CONVENTION_CHOICES",
    "FIT_CAUTION",
    "GRAIN_SIZE_CONVENTIONS",
    "OROWAN_CHOICES",
    "OROWAN_FORMS",
    "SCHEMA",
    "SCOPE_CHOICES",
    "SPACING_CHOICES",
    "SPACING_FORMULAS",
    "SUPERPOSITION_CHOICES",
    "SUPERPOSITION_RULES",
    "FitDataError",
    "GrainSizeConvention",
    "HallPetchFit",
    "Material",
    "MaterialsFileError",
    "MeasuredValue",
    "ParticleMeasurements",
    "Quantity",
    "StrengthOptions",
    "SummaryError",
    "UncertainInput",
    "YieldEstimate",
    "burgers_vector_nm",
    "centre_spacing_planar_nm",
    "centre_spacing_spheres_nm",
    "convert_k_convention",
    "convert_k_units",
    "edge_spacing_planar_nm",
    "edge_spacing_spheres_mean_nm",
    "edge_spacing_spheres_rms_nm",
    "estimate_from_summaries",
    "first_order_sd",
    "fit_hall_petch",
    "fullman_mean_free_path_nm",
    "get_convention",
    "get_material",
    "gladman_ferrite_pearlite_yield_mpa",
    "grain_boundary_term_mpa",
    "grain_intercept_um",
    "grain_size_flags",
    "hall_petch_mpa",
    "intercept_to_grain_size_um",
    "load_materials",
    "material_toml",
    "orowan_ashby_gladman_mpa",
    "orowan_ashby_mpa",
    "orowan_classic_mpa",
    "orowan_line_tension_mpa",
    "particle_measurements",
    "pickering_ferrite_yield_mpa",
    "predict_yield",
    "propagate",
    "sections_per_area_from_spheres",
    "shear_modulus_from_elastic_gpa",
    "superpose",
    "superposition_exponent",
    "taylor_dislocation_mpa",
    "triangular_centre_spacing_nm",
    "york_line",
]
