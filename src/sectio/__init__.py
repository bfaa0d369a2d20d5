"""sectio: grain size, particle statistics and yield-strength estimates from micrographs.

Three lines from a notebook::

    import sectio
    field = sectio.measure_grains(sectio.load("field1.tif", pixel_size="0.5um"))
    field.mean_intercept_um, field.astm_g_intercept; field.overlay()

Heavy libraries (scikit-image, matplotlib) are imported lazily so that the command line
starts quickly.
"""

from __future__ import annotations

__version__ = "0.1.0"

__all__ = ["__version__", "load", "measure_grains", "measure_particles"]


def __getattr__(name: str):
    # Lazy public API: keeps `import sectio` (and `sectio --help`) light.
    if name == "load":
        from .micrograph import load

        return load
    if name == "measure_grains":
        from .grains import measure_grains

        return measure_grains
    if name == "measure_particles":
        from .particles import measure_particles

        return measure_particles
    raise AttributeError(f"module 'sectio' has no attribute {name!r}")
