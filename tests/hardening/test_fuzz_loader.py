"""Property: a mutated TIFF/PNG/JPEG/BMP file gives a Micrograph or one InputError sentence.

Never another exception, never a non-finite pixel, never more memory than the budget asks
(the budget here is small, 64 MiB, so a mutated header that declares a huge image is
refused cheaply). Examples are bounded and derandomized so the suite cannot flake; the long
run is ``benchmarks/bench_fuzz.py``.
"""

from __future__ import annotations

import functools
import warnings

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from sectio.errors import CalibrationWarning, InputError
from sectio.micrograph import load

from .seeds import mutate, seed_files

SETTINGS = settings(max_examples=25, deadline=None, derandomize=True, database=None,
                    suppress_health_check=[HealthCheck.too_slow,
                                           HealthCheck.function_scoped_fixture])


@functools.lru_cache(maxsize=1)
def _seeds():
    return seed_files()


EDITS = st.lists(st.tuples(st.integers(0, 2), st.integers(0, 2**20), st.integers(0, 2**11)),
                 min_size=1, max_size=6)


def check_loads_or_refuses(path) -> None:
    try:
        with warnings.catch_warnings():  # mutated tags may disagree with the typed size
            warnings.simplefilter("ignore", CalibrationWarning)
            mg = load(path, pixel_size="1um", max_image_memory="64MiB")
    except InputError as exc:
        text = str(exc)
        assert text and "\n" not in text and "Traceback" not in text
        return
    img = mg.image
    assert img.ndim == 2 and img.dtype == np.float32
    assert np.isfinite(img).all() and img.min() >= 0.0 and img.max() <= 1.0


@pytest.mark.parametrize("name", sorted(seed_files()))
@SETTINGS
@given(edits=EDITS, cut=st.one_of(st.none(), st.integers(0, 255)))
def test_mutated_file(tmp_path, name, edits, cut):
    p = tmp_path / name
    p.write_bytes(mutate(_seeds()[name], edits, cut=cut))
    with np.errstate(all="raise"):  # an unguarded overflow would surface here
        check_loads_or_refuses(p)


@SETTINGS
@given(data=st.binary(min_size=0, max_size=300),
       suffix=st.sampled_from([".tif", ".png", ".jpg", ".bmp"]))
def test_random_bytes(tmp_path, data, suffix):
    p = tmp_path / f"junk{suffix}"
    p.write_bytes(data)
    check_loads_or_refuses(p)


def test_seeds_themselves_load(tmp_path):
    for name, data in seed_files().items():
        p = tmp_path / name
        p.write_bytes(data)
        with warnings.catch_warnings():  # the seeds' tags say 0.5 µm, typed 1 µm
            warnings.simplefilter("ignore", CalibrationWarning)
            assert load(p, pixel_size="1um").shape == (24, 32), name
