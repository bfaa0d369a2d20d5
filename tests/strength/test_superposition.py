"""Superposition rules (REFERENCES §7 worked numbers, ±0.1 MPa)."""

import numpy as np
import pytest

from sectio.errors import OptionError
from sectio.strength import superpose


@pytest.mark.parametrize(
    ("a", "b", "linear", "q18", "rss"),
    [(100.0, 100.0, 200.0, 147.0, 141.4), (150.0, 60.0, 210.0, 165.4, 161.6)],
)
def test_reference_numbers(a, b, linear, q18, rss):
    # REFERENCES §7: q = 1 / 1.8 (Lagerpusch, Mohles & Nembach) / 2 (root-sum-square).
    assert superpose([a, b], rule="linear") == pytest.approx(linear, abs=0.1)
    assert superpose({"x": a, "y": b}, rule="power", exponent=1.8) == pytest.approx(q18, abs=0.1)
    assert superpose([a, b], rule="rss") == pytest.approx(rss, abs=0.1)
    assert superpose([a, b], rule="power", exponent=2.0) == pytest.approx(
        superpose([a, b], rule="rss"), rel=1e-12)


def test_vectorised_draws():
    out = superpose({"a": np.array([3.0, 6.0]), "b": np.array([4.0, 8.0])}, rule="rss")
    assert out == pytest.approx([5.0, 10.0])  # 3-4-5 triangles


def test_empty_is_zero():
    assert superpose({}, rule="rss") == 0.0


def test_errors():
    with pytest.raises(OptionError, match="needs --exponent"):
        superpose([1.0, 2.0], rule="power")
    with pytest.raises(OptionError, match="between 1 .* and 2"):
        superpose([1.0, 2.0], rule="power", exponent=2.5)
    with pytest.raises(OptionError, match="Unknown superposition rule 'sum'"):
        superpose([1.0], rule="sum")
