"""Duplex grain size (ASTM E1181-style, from memory) and the largest grain (ASTM E930 ALA).

Checks: exact synthetic truth (label maps of power-diagram duplex structures whose large
grains are a known share of the seeds, and of ordinary Poisson- and hard-core Voronoi
structures), the E112 planimetric relation 1d (REFERENCES.md §1.1-1.2) for each mode's G
and for the ALA number.
"""

from __future__ import annotations

import numpy as np
import pytest

from sectio.stereology import (
    astm_g_from_grains_per_mm2,
    duplex_grain_size,
    largest_grain_astm_g,
)
from sectio.synth.grains import grain_structure


def _areas(kind, seed, **kw):
    truth, _ = grain_structure((768, 768), 400, kind=kind, rng=seed, **kw)
    return np.bincount(truth.labels.ravel())[1:].astype(float)  # 1 px = 1 µm²


@pytest.mark.parametrize("ratio, fraction", [(3.0, 0.08), (4.0, 0.08), (6.0, 0.03),
                                             (3.0, 0.2)])
def test_bimodal_structures_are_duplex(ratio, fraction):
    a = _areas("duplex", 11, duplex_size_ratio=ratio, duplex_fraction=fraction)
    r = duplex_grain_size(a)
    assert r.duplex, (r.separation, r.minor_share)
    fine, coarse = r.modes
    # area shares add up to the whole section (exact: every pixel is in one grain)
    assert fine.area_fraction + coarse.area_fraction == pytest.approx(1.0)
    assert min(fine.area_fraction, coarse.area_fraction) >= 0.10
    assert fine.n_grains + coarse.n_grains == a.size
    assert coarse.mean_area_um2 > 4 * fine.mean_area_um2
    # each mode's G is E112 relation 1d of its mean grain area
    assert coarse.astm_g_planimetric == pytest.approx(
        float(astm_g_from_grains_per_mm2(1e6 / coarse.mean_area_um2)))
    assert fine.astm_g_planimetric > coarse.astm_g_planimetric + 2.0


@pytest.mark.parametrize("kind, kw", [("voronoi", {}), ("hardcore", {}),
                                      ("voronoi", {"stretch": 2.0})])
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_ordinary_structures_are_not_duplex(kind, kw, seed):
    r = duplex_grain_size(_areas(kind, seed, **kw))
    assert not r.duplex and len(r.modes) == 1
    assert r.modes[0].area_fraction == pytest.approx(1.0)


def test_two_lognormal_populations_recovered():
    # drawn populations: 300 grains of median 100 µm², 40 of median 3000 µm² (σ_ln 0.25)
    rng = np.random.default_rng(4)
    small = 100 * np.exp(rng.normal(0, 0.25, 300))
    big = 3000 * np.exp(rng.normal(0, 0.25, 40))
    r = duplex_grain_size(np.r_[small, big])
    assert r.duplex
    assert r.modes[1].n_grains == 40 and r.modes[0].n_grains == 300
    share = big.sum() / (small.sum() + big.sum())
    assert r.modes[1].area_fraction == pytest.approx(share)


def test_too_few_grains_and_ala():
    r = duplex_grain_size([10.0, 1000.0])
    assert not r.duplex
    # E930 ALA from the largest grain's area by E112 1d: 1008 µm² is the mean area of
    # G 7 in the E112 table (REFERENCES.md §1.2); 64 516 µm² that of G 1
    assert largest_grain_astm_g(1008.0) == pytest.approx(7.0, abs=0.01)
    assert largest_grain_astm_g(64516.0) == pytest.approx(1.0, abs=0.01)
