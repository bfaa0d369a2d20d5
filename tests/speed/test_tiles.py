"""Mosaics measured band by band give the untiled measurement (the outside reference here
is the whole-image pipeline itself, checked against exact truth in tests/grains), read any
TIFF layout as tifffile does, and give the same on a Dask cluster as locally."""

from __future__ import annotations

import numpy as np
import pytest
import tifffile

from sectio.grains import make_options, measure_grains
from sectio.micrograph import load
from sectio.synth._render import write_calibrated_tiff
from sectio.synth.grains import synthetic_grains
from sectio.tiles import TiffRows, TileOptions, measure_grains_tiled, should_tile

OPTS = make_options(remove_scratches=False)  # scratches are not looked for in bands
SKIP = {"notes", "tiling", "calibration", "crop_top_px"}
# annealing twins are not looked for in bands (the tiled document says so with None values)
SKIP |= {"twins", "astm_g_uses", "mean_intercept_without_twins_um", "twin_boundary_fraction",
         "twin_pair_count", "twinned"}


@pytest.fixture(scope="module")
def mosaic(tmp_path_factory):
    img, _ = synthetic_grains((700, 520), 700, rng=21, noise_sigma=0.03, illumination=0.3)
    path = tmp_path_factory.mktemp("mosaic") / "m.tif"
    write_calibrated_tiff(path, img, 0.5)
    untiled = measure_grains(load(path, keep_strip=True), OPTS).to_dict()
    return path, untiled


def _same(a: dict, b: dict) -> None:
    for k in set(a) - SKIP:
        assert b[k] == a[k], k


@pytest.mark.parametrize("band_rows,margin,workers", [(128, 64, 1), (100, 96, 2), (4096, 256, 1)])
def test_bands_equal_the_whole_image(mosaic, band_rows, margin, workers):
    path, untiled = mosaic
    field = measure_grains_tiled(path, OPTS, tile_options=TileOptions(
        band_rows=band_rows, margin_rows=margin, workers=workers))
    d = field.to_dict()
    assert d["tiling"]["seams_exact"]
    _same(untiled, d)  # identical intercept counts, grain count, areas, G, thresholds
    assert len(field.grain_table()) == untiled["grain_count"]


def test_dask_local_cluster_equals_local(mosaic):
    distributed = pytest.importorskip("dask.distributed")
    path, untiled = mosaic
    with distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                                  host="127.0.0.1", dashboard_address=None,
                                  protocol="tcp") as cluster:
        topts = TileOptions(band_rows=352, margin_rows=128, workers=2,
                            scheduler=cluster.scheduler_address)
        d = measure_grains_tiled(path, OPTS, tile_options=topts).to_dict()
    assert d["tiling"]["bands"] == 2
    _same(untiled, d)


@pytest.mark.parametrize("layout", [dict(), dict(compression="zlib", rowsperstrip=7),
                                    dict(compression="zlib", tile=(32, 48)),
                                    dict(photometric="rgb")])
def test_band_reads_match_tifffile(tmp_path, layout):
    rng = np.random.default_rng(3)
    shape = (101, 77, 3) if layout.get("photometric") == "rgb" else (101, 77)
    data = rng.integers(0, 65535, size=shape, dtype=np.uint16)
    path = tmp_path / "l.tif"
    tifffile.imwrite(path, data, **layout)
    rows = TiffRows(str(path))
    for r0, r1 in ((0, 101), (5, 6), (30, 90), (96, 101)):
        assert np.array_equal(rows.read(r0, r1), tifffile.imread(path)[r0:r1])


def test_should_tile(tmp_path, mosaic):
    path, _ = mosaic
    assert should_tile(path, max_pixels=700 * 520 - 1)
    assert not should_tile(path, max_pixels=700 * 520)
    assert not should_tile(tmp_path / "x.png")
