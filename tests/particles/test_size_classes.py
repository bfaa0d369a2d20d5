"""Two size classes (coarse and fine particles) from the size distribution.

Truth: synthetic sections of two sphere populations (sectio.synth.particles), exact
section discs per population; a single log-normal population must stay one class.
"""

from __future__ import annotations

import numpy as np
import pytest

from sectio.micrograph import from_array
from sectio.particles import measure_particles
from sectio.stereology._size_classes import size_classes
from sectio.synth.particles import SpherePopulation, section_image, sphere_population

PX = 0.02


def _bimodal(seed):
    kw = {"size_um": (1024 * PX, 1024 * PX), "sigma_ln": 0.15}
    a = sphere_population(volume_fraction=0.25, median_radius_um=0.35, overlap=False,
                          touching=0.0, rng=seed, **kw)
    b = sphere_population(volume_fraction=0.03, median_radius_um=0.07, overlap=True,
                          rng=seed + 1, **kw)
    # fine spheres overlapping a coarse one are left out (they would merge with it)
    gap = np.sqrt(((a.centres_um[None] - b.centres_um[:, None]) ** 2).sum(-1))
    keep = np.all(gap > a.radii_um[None] + b.radii_um[:, None], axis=1)
    pop = SpherePopulation(np.vstack([a.centres_um, b.centres_um[keep]]),
                           np.concatenate([a.radii_um, b.radii_um[keep]]), a.box_um,
                           a.field_um, False)
    return pop, len(a.radii_um)


def test_coarse_and_fine_classes_recovered():
    pop, n_coarse = _bimodal(1)
    sec = section_image(pop, pixel_size_um=PX, rng=11)
    f = measure_particles(from_array(sec.image, pixel_size_um=PX))
    sc = f.size_classes
    assert sc["detected"] is True
    fine, coarse = sc["classes"]
    # exact truth per population: section discs and sphere diameters
    z, r = pop.centres_um[:, 2], pop.radii_um
    hit = np.abs(z) < r
    is_fine = (np.arange(r.size) >= n_coarse)
    d_sec = 2 * np.sqrt(r[hit] ** 2 - z[hit] ** 2)
    for cls, sel in ((fine, is_fine), (coarse, ~is_fine)):
        truth_ecd = d_sec[sel[hit]].mean()
        assert cls["mean_ecd_um"] == pytest.approx(truth_ecd, rel=0.08)
        assert cls["mean_sphere_diameter_um"] == pytest.approx(2 * r[sel].mean(), rel=0.10)
    # the class fractions add up to the field's area fraction
    assert fine["area_fraction"] + coarse["area_fraction"] == pytest.approx(
        f.area_fraction, abs=1e-9)
    assert 0.005 < fine["area_fraction"] < 0.03


@pytest.mark.parametrize("sigma", [0.2, 0.5])
def test_single_lognormal_stays_one_class(sigma):
    rng = np.random.default_rng(0)
    d = np.exp(sigma * rng.standard_normal(2000))
    assert size_classes(d) is None
    # two well separated log-normal populations are found, with the cut between them
    d2 = np.concatenate([d, 8 * np.exp(0.2 * rng.standard_normal(500))])
    sc = size_classes(d2)
    if sigma == 0.2:
        assert sc is not None and 2.0 < sc.cut_um < 6.0
        assert sc.fine_share == pytest.approx(0.8, abs=0.03)
