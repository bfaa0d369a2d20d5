# %% [markdown]
# # sectio in a notebook
#
# Grain size, particle statistics and a yield estimate from Python, cell by cell (the
# `# %%` markers make cells in Jupyter, VS Code or Spyder; `python docs/notebook_example.py`
# runs it top to bottom). The micrographs are made here by `sectio.synth`, so the exact
# answer is known and printed beside the measurement. Every result shows a few headline
# lines when printed and a small table in a notebook (`_repr_html_`); the full numbers are
# on the object and in its `to_dict()`. The test suite runs this file
# (`tests/test_notebook_example.py`).

# %%
import os
import tempfile
from pathlib import Path

import numpy as np

import sectio
from sectio.synth import write_calibrated_tiff
from sectio.synth.grains import synthetic_grains
from sectio.synth.particles import section_image, sphere_population

folder = Path(os.environ.get("SECTIO_EXAMPLE_DIR") or tempfile.mkdtemp(prefix="sectio_"))
print(sorted(sectio.__all__))

# %% [markdown]
# ## Two grain fields (0.5 µm pixels) and their grain size

# %%
truths = []
for i in (1, 2):
    image, truth = synthetic_grains((384, 384), 220, rng=10 + i, kind="hardcore")
    write_calibrated_tiff(folder / f"grains_{i}.tif", image, 0.5, description="example")
    truths.append(truth)

fields = [sectio.measure_grains(sectio.load(folder / f"grains_{i}.tif")) for i in (1, 2)]
fields[0]  # in a notebook: a small table; print() gives the same lines as text

# %%
# The exact answer: the same test lines on the true grain map.
true_um = np.mean([sectio.stereology.mean_lineal_intercept(t.labels, pixel_size_um=0.5)
                   for t in truths])
grains = sectio.summarize_grains(fields)
print(grains)
print(f"true mean lineal intercept {true_um:.3f} µm; measured {grains['mean_intercept_um']:.3f}")

# %% [markdown]
# ## Two particle fields (10 nm pixels): volume fraction, sizes, sphere diameter

# %%
particle_fields = []
for i in (1, 2):
    spheres = sphere_population(size_um=(3.0, 3.0), volume_fraction=0.06,
                                median_radius_um=0.035, sigma_ln=0.2, rng=20 + i)
    section = section_image(spheres, pixel_size_um=0.01, rng=30 + i)
    write_calibrated_tiff(folder / f"particles_{i}.tif", section.image, 0.01,
                          description="example")
    particle_fields.append(sectio.measure_particles(sectio.load(folder / f"particles_{i}.tif")))
    print(f"field {i}: true area fraction {section.mask.mean():.4f}")
particles = sectio.summarize_particles(particle_fields, bootstrap=50)
particles

# %% [markdown]
# ## A yield-strength estimate from the grain size
#
# With its 95 % interval, the terms it includes and leaves out, its assumptions and the
# caution that it replaces no tensile test.

# %%
estimate = sectio.estimate_strength(grains, None, material="steel-ferritic-lowc",
                                    draws=4000, seed=1)
print(estimate)
