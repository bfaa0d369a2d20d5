"""Micron marker and caption of every overlay."""

import numpy as np
import pytest

from sectio.report._overlay import draw_micron_marker, marker_length_um


@pytest.mark.parametrize(("width_um", "expected"), [
    (256.0, 50.0),   # 20 % of 256 µm = 51.2 µm -> 50 µm
    (5.12, 1.0),     # 1.02 µm -> 1 µm
    (2048.0, 200.0),  # 409.6 µm -> 200 µm
    (0.9, 0.1),      # 0.18 µm -> 0.1 µm (100 nm)
])
def test_marker_length_is_a_round_fifth_of_the_field(width_um, expected):
    assert marker_length_um(width_um) == pytest.approx(expected)


def test_marker_bar_has_the_stated_length_in_pixels():
    # 512 px at 0.5 µm: a 50 µm bar must be 100 white pixels long (exact by construction
    # of the pixel size, the only input).
    img = np.full((512, 512, 3), 128, np.uint8)
    out = draw_micron_marker(img, 0.5)
    white = np.all(out == 255, axis=2)
    rows = white.sum(axis=1)
    assert rows.max() == 100
    assert white[:256].sum() == 0  # in the lower part only
    assert not np.shares_memory(out, img)
