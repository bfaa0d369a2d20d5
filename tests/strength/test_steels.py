"""Pickering-type regressions (REFERENCES §4.4 worked numbers, ±0.1 MPa)."""

import pytest

from sectio.errors import OptionError
from sectio.strength import gladman_ferrite_pearlite_yield_mpa, pickering_ferrite_yield_mpa


def test_pickering_examples():
    # REFERENCES §4.4: 306.0 and 392.5 MPa (Pickering 1978, coefficients from memory).
    assert pickering_ferrite_yield_mpa(
        mn_wt=1.0, si_wt=0.25, free_n_wt=0.005, grain_size_mm=0.010
    ) == pytest.approx(306.0, abs=0.1)
    assert pickering_ferrite_yield_mpa(
        mn_wt=1.4, si_wt=0.30, free_n_wt=0.004, grain_size_mm=0.005
    ) == pytest.approx(392.5, abs=0.1)


def test_gladman_mcivor_pickering_examples():
    # REFERENCES §4.4: f_α 0.8 -> 325.7 MPa; f_α 1 -> 312.8 MPa.
    kw = dict(mn_wt=1.0, si_wt=0.25, free_n_wt=0.005, grain_size_mm=0.010,
              pearlite_spacing_mm=0.0002)
    assert gladman_ferrite_pearlite_yield_mpa(ferrite_fraction=0.8, **kw) == pytest.approx(
        325.7, abs=0.1)
    assert gladman_ferrite_pearlite_yield_mpa(ferrite_fraction=1.0, **kw) == pytest.approx(
        312.8, abs=0.1)


def test_steel_errors():
    with pytest.raises(OptionError, match="grain_size_mm must be positive"):
        pickering_ferrite_yield_mpa(mn_wt=1, si_wt=0.2, free_n_wt=0.005, grain_size_mm=0.0)
    with pytest.raises(OptionError, match=r"ferrite_fraction must lie in \[0, 1\]"):
        gladman_ferrite_pearlite_yield_mpa(ferrite_fraction=1.2, mn_wt=1, si_wt=0.2,
                                           free_n_wt=0.005, grain_size_mm=0.01,
                                           pearlite_spacing_mm=0.0002)
