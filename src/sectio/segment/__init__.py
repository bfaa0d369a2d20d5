"""Segmentation: micrograph -> grain label map, or particle mask and labels."""

from .grains import GrainSegmentation, GrainSegmentOptions, segment_grains
from .particles import (
    MOSTLY_PARTICLE,
    ParticleSegmentation,
    partial_area_fraction,
    segment_particles,
    split_lines,
)

__all__ = [
    "MOSTLY_PARTICLE",
    "GrainSegmentOptions",
    "GrainSegmentation",
    "ParticleSegmentation",
    "partial_area_fraction",
    "segment_grains",
    "segment_particles",
    "split_lines",
]
