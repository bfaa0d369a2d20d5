"""sectio: grain size, particle statistics and yield-strength estimates from micrographs.

Three lines from a notebook::

    import sectio
    field = sectio.measure_grains(sectio.load("field1.tif", pixel_size="0.5um"))
    field.mean_intercept_um, field.astm_g_intercept; field.overlay()

Results print as a few headline lines and show as small tables in a notebook; several
fields give a specimen summary (``sectio.summarize_grains(fields)``,
``sectio.summarize_particles``), summaries a yield estimate (``sectio.estimate_strength``,
module ``sectio.strength``). ``docs/notebook_example.py`` walks through all of it.

Heavy libraries (scikit-image, matplotlib) are imported lazily so that the command line
starts quickly.
"""

from __future__ import annotations

__version__ = "0.1.0"

__all__ = [
    "__version__",
    "estimate_strength",
    "load",
    "measure_grains",
    "measure_particles",
    "stereology",
    "strength",
    "study",
    "summarize_grains",
    "summarize_particles",
    "synth",
]

# name -> (module, attribute or None for the module itself)
_LAZY = {
    "load": (".micrograph", "load"),
    "measure_grains": (".grains", "measure_grains"),
    "summarize_grains": (".grains", "summarize_grains"),
    "measure_particles": (".particles", "measure_particles"),
    "summarize_particles": (".particles", "summarize_particles"),
    "estimate_strength": (".strength", "estimate_from_summaries"),
    "strength": (".strength", None),
    "stereology": (".stereology", None),
    "study": (".study", None),
    "synth": (".synth", None),
}


def __getattr__(name: str):
    # Lazy public API: keeps `import sectio` (and `sectio --help`) light.
    if name in _LAZY:
        from importlib import import_module

        module, attr = _LAZY[name]
        mod = import_module(module, __name__)
        return mod if attr is None else getattr(mod, attr)
    raise AttributeError(f"module 'sectio' has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(__all__))
