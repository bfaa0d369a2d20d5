"""Synthetic micrographs with exact ground truth (grain structures, particle dispersions).

Every generator takes ``rng`` (seed or Generator) and returns the rendered image together
with the exact truth (label map or mask, and the 3-D population where there is one).
"""

from __future__ import annotations

from ._render import write_calibrated_tiff

__all__ = ["grains", "particles", "write_calibrated_tiff"]
