"""Grain size of mosaics too large to hold in memory, band by band (on one machine or Dask).

>>> from sectio.tiles import measure_grains_tiled, should_tile          # doctest: +SKIP
>>> if should_tile("stage_mosaic.tif"):                                  # doctest: +SKIP
...     field = measure_grains_tiled("stage_mosaic.tif", pixel_size="0.5um")
>>> field.to_dict()["mean_intercept_um"]                                 # doctest: +SKIP

The image is read from the TIFF band by band (strips or tiles decoded only where needed),
scratch arrays live on disk, and every measurement is combined exactly as for the whole
image (:mod:`sectio.tiles._grains` lists how, and the seam tolerance).
"""

from __future__ import annotations

import os
from dataclasses import dataclass, replace

import numpy as np

from ..errors import CalibrationError, ImageReadError, OptionError
from ..stereology import (
    InterceptCount,
    astm_g_from_grains_per_mm2,
    astm_g_from_intercept_um,
    iso643_g_from_grains_per_mm2,
)
from ._grains import TileOptions, segment_and_count
from ._io import DiskArray, TiffRows

__all__ = ["TileOptions", "MosaicGrainField", "measure_grains_tiled", "should_tile",
           "DEFAULT_TILE_PIXELS", "TiffRows", "DiskArray"]

#: Images with more pixels than this are measured in bands by the commands (64 MP).
DEFAULT_TILE_PIXELS = 64 * 2**20


def tiff_shape(path: str) -> tuple[int, int] | None:
    """(rows, columns) of page 1 of a TIFF from its header, or None for other files."""
    if os.path.splitext(str(path))[1].lower() not in (".tif", ".tiff"):
        return None
    try:
        import tifffile

        with tifffile.TiffFile(path) as tif:
            page = tif.pages[0]
            dims = dict(zip(str(page.axes), page.shape, strict=False))
            return int(dims.get("Y", page.shape[0])), int(dims.get("X", page.shape[1]))
    except Exception:  # unreadable files get their message from the ordinary loader
        return None


def should_tile(path, max_pixels: int | None = DEFAULT_TILE_PIXELS) -> bool:
    """True for a TIFF with more pixels than ``max_pixels`` (None or 0: never)."""
    shape = tiff_shape(str(path))
    return (max_pixels is not None and max_pixels > 0 and shape is not None
            and shape[0] * shape[1] > max_pixels)


class _GreyRows:
    """Grey rows of a TIFF page as :mod:`sectio._decode` converts whole images."""

    def __init__(self, path: str, crop_bottom: int = 0):
        import tifffile

        self.path = str(path)
        self.rows = TiffRows(self.path)
        with tifffile.TiffFile(self.path) as tif:
            page = tif.pages[0]
            self.axes = str(page.axes)
            self.photometric = int(page.photometric)  # type: ignore[union-attr]
            self.colormap = page.colormap if self.photometric == 3 else None  # type: ignore[union-attr]
        shape = tiff_shape(self.path)
        if shape is None:
            raise OptionError(f"{path} could not be read as a TIFF; check the file.")
        self.full_shape: tuple[int, int] = shape
        self.crop_bottom = int(crop_bottom or 0)
        if self.crop_bottom < 0 or self.crop_bottom >= self.full_shape[0] - 16:
            raise OptionError(f"--crop-bottom {crop_bottom} does not fit {path} "
                              f"({self.full_shape[0]} rows); give the height of the info strip.")

    @property
    def shape(self) -> tuple[int, int]:
        return self.full_shape[0] - self.crop_bottom, self.full_shape[1]

    def grey(self, r0: int, r1: int) -> np.ndarray:
        from .._decode import _tiff_grey

        return _tiff_grey(self.rows.read(r0, r1), self.axes, self.photometric, self.colormap,
                          self.path, [])


def _pixel_size(path: str, pixel_size) -> tuple[float, str]:
    if pixel_size is not None:
        from ..units import parse_length_um

        return parse_length_um(pixel_size, what="--pixel-size",
                               default_unit="um" if isinstance(pixel_size, (int, float))
                               else None), "given"
    import tifffile

    from ..calibration import file_sizes

    with tifffile.TiffFile(path) as tif:
        found, _ = file_sizes(tif, tif.pages[0])
    square = [f for f in found if f.square]
    if not square:
        raise CalibrationError(f"{path} carries no pixel size; give one with --pixel-size "
                               "(e.g. 0.5um) for a mosaic measured in bands.")
    return float(square[0].width_um), square[0].source


@dataclass(frozen=True)
class MosaicGrainField:
    """Grain size of one mosaic measured in bands (the numbers of a GrainField, no maps)."""

    path: str
    pixel_size_um: float
    pixel_size_source: str
    shape: tuple[int, int]
    original_shape: tuple[int, int]
    crop_bottom_px: int
    counts: InterceptCount
    subregion_intercepts_um: tuple[float, ...]
    grain_ids: np.ndarray
    areas_px: np.ndarray
    centroid_row_px: np.ndarray
    centroid_col_px: np.ndarray
    on_edge: np.ndarray
    planimetric_inside: int
    planimetric_edge: int
    planimetric_corner: int
    segmentation: dict
    tiling: dict

    @property
    def grain_count(self) -> int:
        return int(self.grain_ids.size)

    @property
    def mean_intercept_um(self) -> float:
        return self.counts.mean_intercept_px * self.pixel_size_um

    @property
    def grains_per_mm2(self) -> float:
        area_mm2 = self.shape[0] * self.shape[1] * (self.pixel_size_um * 1e-3) ** 2
        w = self.planimetric_inside + 0.5 * self.planimetric_edge + 0.25 * self.planimetric_corner
        return w / area_mm2

    def grain_table(self) -> list[dict]:
        px = self.pixel_size_um
        a_um2 = self.areas_px * px * px
        ecd = np.sqrt(4 * a_um2 / np.pi)
        return [{"image": self.path, "grain": int(g), "area_um2": float(a), "ecd_um": float(e),
                 "centroid_x_um": float(cx * px), "centroid_y_um": float(cy * px),
                 "touches_edge": bool(t)}
                for g, a, e, cx, cy, t in zip(self.grain_ids, a_um2, ecd, self.centroid_col_px,
                                              self.centroid_row_px, self.on_edge, strict=True)]

    def to_dict(self) -> dict:
        """The keys of :meth:`sectio.grains.GrainField.to_dict`, plus ``tiling``."""
        px = self.pixel_size_um
        c = self.counts
        v = c.direction_intercepts_px * px
        dirs = {f"{a:g}": float(x) for a, x in zip(c.angles_deg, v, strict=True)}
        fin = np.asarray([x for x in dirs.values() if np.isfinite(x)])
        a_um2 = self.areas_px * px * px
        ecd = np.sqrt(4 * a_um2 / np.pi)
        inner = ~self.on_edge
        circle_um = c.circle_intercept_px * px
        from ..grains import GrainField  # the duplex test and largest grain, one rule

        return {
            "image": self.path, "pixel_size_um": px, "pixel_size_source": self.pixel_size_source,
            "crop_bottom_px": self.crop_bottom_px, "crop_top_px": 0, "shape_px": list(self.shape),
            "original_shape_px": list(self.original_shape), "notes": [
                f"measured in {self.tiling['bands']} bands of {self.tiling['band_rows']} rows "
                "(mosaic larger than the tile size); scratches and annealing twins not "
                "looked for (every boundary counts as a grain boundary)"],
            "mean_intercept_um": self.mean_intercept_um,
            "intercept_count": c.total_crossings,
            "test_line_length_um": float(sum(c.length_px)) * px,
            "direction_intercepts_um": dirs,
            "direction_counts": {f"{a:g}": int(n) for a, n in zip(c.angles_deg, c.crossings,
                                                                    strict=True)},
            "anisotropy_index": float(fin.max() / fin.min()) if fin.size >= 2 else float("nan"),
            "circle_intercept_um": circle_um,
            "circle_count": c.circle_crossings,
            "circle_line_length_um": c.circle_length_px * px,
            "grain_count": self.grain_count,
            "grains_inside": self.planimetric_inside,
            "grains_on_edge": self.planimetric_edge,
            "grains_on_corner": self.planimetric_corner,
            "grains_per_mm2": self.grains_per_mm2,
            "astm_g_intercept": float(astm_g_from_intercept_um(self.mean_intercept_um)),
            "astm_g_planimetric": float(astm_g_from_grains_per_mm2(self.grains_per_mm2)),
            "astm_g_circle": float(astm_g_from_intercept_um(circle_um)),
            "iso643_g_planimetric": float(iso643_g_from_grains_per_mm2(self.grains_per_mm2)),
            "mean_grain_area_um2": float(a_um2[inner].mean()) if inner.any() else None,
            "mean_ecd_um": float(ecd[inner].mean()) if inner.any() else None,
            "subregion_intercepts_um": list(self.subregion_intercepts_um),
            "segmentation": {**self.segmentation, "scale_lowered_for_twins": False},
            "tiling": dict(self.tiling),
            # annealing twins are not looked for in bands: say so rather than report none
            "twins": "not looked for in bands",
            "astm_g_uses": "mean intercept, every boundary counted (twins not looked for)",
            "mean_intercept_with_twins_um": self.mean_intercept_um,
            "mean_intercept_without_twins_um": None,
            "twin_boundary_fraction": None,
            "twin_pair_count": None,
            "twinned": None,
            **GrainField._size_spread(a_um2, inner),
        }


def measure_grains_tiled(path, options=None, *, pixel_size=None, crop_bottom: int = 0,
                         tile_options: TileOptions | None = None, **kwargs) -> MosaicGrainField:
    """Measure the grains of a (large) TIFF band by band; see :mod:`sectio.tiles`.

    ``options``: :class:`sectio.grains.GrainOptions` (or keyword arguments of
    :func:`sectio.grains.make_options`). ``tile_options``: band size, margin, workers and
    an optional Dask scheduler (``"local"`` or ``"tcp://host:port"``).
    """
    from ..grains import make_options

    path = str(path)
    if not os.path.isfile(path):
        raise ImageReadError(f"Cannot find the image file {path}; check the path and spelling.")
    if tiff_shape(path) is None:
        raise ImageReadError(f"{path}: mosaics are measured in bands from TIFF files only; "
                             "save the mosaic as TIFF.")
    if options is None:
        options = make_options(**kwargs)
    elif kwargs:
        raise TypeError("give either options or keyword arguments, not both")
    topts = tile_options or TileOptions()
    px, source = _pixel_size(path, pixel_size)
    src = _GreyRows(path, crop_bottom)
    seg_opts = options.segment
    if options.min_grain_size_um is not None:
        d_px = options.min_grain_size_um / px
        seg_opts = replace(seg_opts, min_grain_area_px=float(np.pi * d_px**2 / 4))
    h, w = src.shape
    radius = options.circle_radius_fraction * min(h, w) / 2.0
    r = segment_and_count(src, (h, w), seg_opts, topts, angles=options.angles_deg,
                          line_spacing_px=options.line_spacing_px, circle_radius_px=radius,
                          subregions=options.subregions)
    n = r["n_grains"]
    npx = r["areas_px"][: n + 1]
    ids = np.flatnonzero(npx)
    ids = ids[ids > 0]
    border = r["border"][r["border"] > 0]
    corners = r["corners"][r["corners"] > 0]
    on_edge = np.isin(ids, border)
    return MosaicGrainField(
        path=path, pixel_size_um=px, pixel_size_source=source, shape=(h, w),
        original_shape=src.full_shape, crop_bottom_px=src.crop_bottom,
        counts=r["counts"],
        subregion_intercepts_um=tuple(c.mean_intercept_px * px for c in r["subregion_counts"]),
        grain_ids=ids, areas_px=npx[ids].astype(float),
        centroid_row_px=r["sum_row"][ids] / npx[ids], centroid_col_px=r["sum_col"][ids] / npx[ids],
        on_edge=on_edge,
        planimetric_inside=int(ids.size - border.size),
        planimetric_edge=int(np.setdiff1d(border, corners).size),
        planimetric_corner=int(corners.size),
        segmentation={
            "ridge_scale_px": r["sigma"], "threshold_high": r["threshold_high"],
            "threshold_low": r["threshold_low"],
            "min_grain_area_um2": r["min_area_px"] * px * px, "scratches_removed": 0,
            "regions_merged": r["n_merged"], "small_regions_absorbed": r["n_small"]},
        tiling={"bands": r["bands"], "band_rows": topts.band_rows,
                "margin_rows": topts.margin_rows, "seams_exact": r["seams_exact"],
                "scheduler": topts.scheduler or "local"},
    )
