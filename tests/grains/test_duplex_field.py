"""Duplex flag and largest grain on rendered sections (exact synthetic truth: the label
map's own duplex test and largest grain; ASTM E1181 / E930 relations from memory, see
sectio.stereology._duplex)."""

import numpy as np
import pytest

from sectio.grains import measure_grains, summarize_grains
from sectio.micrograph import from_array
from sectio.stereology import duplex_grain_size, largest_grain_astm_g
from sectio.synth.grains import synthetic_grains

PX_UM = 0.5


@pytest.mark.slow
@pytest.mark.parametrize("ratio, seed", [(3.0, 61), (5.0, 62)])
def test_rendered_duplex_is_flagged(ratio, seed):
    img, truth = synthetic_grains((768, 768), 500, kind="duplex", rng=seed, n_scratches=0,
                                  structure=dict(duplex_size_ratio=ratio))
    true = duplex_grain_size(np.bincount(truth.labels.ravel())[1:] * PX_UM**2)
    assert true.duplex
    d = measure_grains(from_array(img, pixel_size_um=PX_UM)).to_dict()
    assert d["duplex"]
    modes = d["duplex_test"]["modes"]
    assert sum(m["area_fraction"] for m in modes) == pytest.approx(1.0)
    # coarse mode's area share close to the truth's (±0.1) and G of each mode ±0.5
    assert modes[1]["area_fraction"] == pytest.approx(true.modes[1].area_fraction, abs=0.1)
    for m, t in zip(modes, true.modes, strict=True):
        assert m["astm_g_planimetric"] == pytest.approx(t.astm_g_planimetric, abs=0.5)
    s = summarize_grains([d])
    assert s["duplex"] and s["duplex_fields"] == 1
    # ALA: E112 1d of the largest grain's area (within 10 % of the true largest area)
    big = np.bincount(truth.labels.ravel())[1:].max() * PX_UM**2
    assert d["largest_grain_area_um2"] == pytest.approx(big, rel=0.1)
    assert d["astm_g_largest_grain_ala"] == pytest.approx(largest_grain_astm_g(big), abs=0.15)


def test_ordinary_field_not_duplex():
    img, _ = synthetic_grains((512, 512), 250, kind="hardcore", rng=63)
    d = measure_grains(from_array(img, pixel_size_um=PX_UM)).to_dict()
    assert not d["duplex"] and len(d["duplex_test"]["modes"]) == 1
    assert d["astm_g_largest_grain_ala"] < d["astm_g_planimetric"]
