"""Grain size of an image too large to hold: the grain pipeline band by band.

The image is cut into full-width bands of ``band_rows`` rows. Every step of
:func:`sectio.segment.grains.segment_grains` is either local (filters, read with a margin
of rows above and below, exact) or global; each global step is split into a per-band part
and a combination that gives the whole-image value:

* grey range, flattening background (the wide blur works on a subsampled image anyway),
  flattened range: per-band minima and maxima;
* ridge scale: the same central 512² crop as the untiled path;
* Otsu level: per-band histograms over the global strength range (scikit-image's
  ``threshold_otsu`` on the summed histogram);
* noise level: the same positional subsample of the background (bands are in raster
  order), the median pixel noise over all bands;
* hysteresis, pits, seeds: band labellings stitched across the seams (:mod:`._stitch`),
  numbered in raster order as on the whole image;
* watershed: per band with ``margin_rows`` of context (as the untiled path floods images
  taller than 1536 rows);
* merging and absorbing small regions: summed pair tables and pixel counts, the same
  label maps as the untiled path;
* counts: intercepts on rows, columns, diagonals and circles, planimetric and areas,
  summed over bands (each band reads one row of the next so no pair is lost at a seam).

Seam tolerance: the result equals the untiled measurement except where a grain reaches
further than ``margin_rows`` beyond a band (the watershed) or a grain interior is wider
than the margin (its distance to the boundary); both are checked and reported
(``seams_exact``). Scratches are not looked for (the Hough search needs the whole image).

Bands run one after the other, in a thread pool, or as Dask tasks (``scheduler``); the
scratch arrays (strength, labels) live on disk in ``workdir``. Peak memory is set by the
band size: about 60 bytes per pixel of a band with its margins, times the workers.
"""

from __future__ import annotations

import os
import shutil
import tempfile
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
from scipy import ndimage as ndi

from ..errors import MeasurementError, OptionError
from ..segment import grains as sg
from ..stereology import InterceptCount, circle_centres, cyclic_crossings
from ._io import DiskArray
from ._stitch import BandLabels, components, offsets

ONES = np.ones((3, 3), bool)


@dataclass(frozen=True)
class TileOptions:
    band_rows: int = 1024  # rows per band (the untiled watershed strips are 1024 rows)
    margin_rows: int = 256  # context above and below for the watershed and seeds
    workers: int = 1  # bands at once (threads, or Dask tasks in flight)
    scheduler: str | None = None  # Dask scheduler address, or "local" for a LocalCluster
    workdir: str | None = None  # scratch folder (default: a temporary folder)

    def __post_init__(self):
        if self.band_rows < 64:
            raise OptionError(f"--tile-rows must be at least 64, got {self.band_rows}.")
        if self.margin_rows < 16:
            raise OptionError(f"the tile margin must be at least 16 rows, got {self.margin_rows}.")


@dataclass
class _Ctx:
    """Everything a band task needs (small and picklable: file paths and a few numbers)."""

    src: Any  # sectio.tiles._GreyRows: .grey(r0, r1), .path
    shape: tuple[int, int]
    band_rows: int
    margin: int
    crop_bottom: int = 0
    grey_lo: float = 0.0
    grey_hi: float = 1.0
    bg_small: np.ndarray | None = None
    flat_min: np.float32 = np.float32(0)
    flat_den: float = 1.0
    sigma: float = 1.5
    opts: sg.GrainSegmentOptions = field(default_factory=sg.GrainSegmentOptions)
    arrays: dict = field(default_factory=dict)

    def band(self, k: int) -> tuple[int, int]:
        return k * self.band_rows, min(self.shape[0], (k + 1) * self.band_rows)

    @property
    def n_bands(self) -> int:
        return -(-self.shape[0] // self.band_rows)


# -- reading --------------------------------------------------------------------------
def _grey(ctx: _Ctx, r0: int, r1: int) -> np.ndarray:
    return ctx.src.grey(r0, r1)


def _img(ctx: _Ctx, r0: int, r1: int) -> np.ndarray:
    """Rows of the image as ``load`` gives it (grey, scaled to [0, 1], float32)."""
    r0, r1 = max(0, r0), min(ctx.shape[0], r1)
    return ((_grey(ctx, r0, r1) - ctx.grey_lo) / (ctx.grey_hi - ctx.grey_lo)).astype(np.float32)


def _flat_raw(ctx: _Ctx, r0: int, r1: int) -> np.ndarray:
    r0, r1 = max(0, r0), min(ctx.shape[0], r1)
    assert ctx.bg_small is not None  # set by step 2 before any band is flattened
    bg = sg.upsample_rows(ctx.bg_small, ctx.shape, r0, r1)
    return _img(ctx, r0, r1) / np.maximum(bg, 1e-3)


def _flat(ctx: _Ctx, r0: int, r1: int) -> np.ndarray:
    return (_flat_raw(ctx, r0, r1) - ctx.flat_min) / ctx.flat_den


def _window(ctx: _Ctx, k: int, extra: int) -> tuple[int, int, int, int]:
    a, b = ctx.band(k)
    return a, b, max(0, a - extra), min(ctx.shape[0], b + extra)


def _filter_margin(sigma: float) -> int:
    return int(4.0 * sigma + 0.5) + 2  # scipy's Gaussian radius (truncate 4) and spare


# -- band tasks (top-level functions: they run in threads or on Dask workers) ----------
def _t_grey_range(ctx: _Ctx, k: int):
    a, b = ctx.band(k)
    g = _grey(ctx, a, b)
    return float(g.min()), float(g.max()), bool(np.isfinite(g).all())


def _t_flat_range(ctx: _Ctx, k: int):
    a, b = ctx.band(k)
    f = _flat_raw(ctx, a, b)
    return f.min(), f.max()


def _t_strength(ctx: _Ctx, k: int):
    a, b, wa, wb = _window(ctx, k, _filter_margin(ctx.sigma))
    flat = _flat(ctx, wa, wb)
    st = sg.strength_of_flat(flat, ctx.opts, ctx.sigma)[a - wa : b - wa]
    ctx.arrays["strength"].write(a, st)
    # pixel noise (horizontal neighbour differences on even rows, as _noise_sigma)
    core = flat[a - wa : b - wa][(a % 2) :: 2]
    d = np.abs(core[:, 1::2].astype(np.float32) - core[:, 0:-1:2].astype(np.float32))
    return st.min(), st.max(), d.ravel()


def _t_hist(ctx: _Ctx, k: int, lo, hi):
    a, b = ctx.band(k)
    return np.histogram(ctx.arrays["strength"].read(a, b), bins=256, range=(lo, hi))[0]


def _far(ctx: _Ctx, k: int, hi: float):
    reach = 2 * int(np.ceil(3.0 * ctx.sigma + 2.0)) + 1
    a, b, wa, wb = _window(ctx, k, reach)
    st = ctx.arrays["strength"].read(wa, wb)
    strong = st > hi
    far = ~ndi.maximum_filter(strong.view(np.uint8), size=reach).astype(bool)
    return st[a - wa : b - wa], strong[a - wa : b - wa], far[a - wa : b - wa]


def _t_far_count(ctx: _Ctx, k: int, hi: float):
    _, strong, far = _far(ctx, k, hi)
    return int(np.count_nonzero(far)), int(np.count_nonzero(~strong))


def _t_far_sample(ctx: _Ctx, k: int, hi: float, use_far: bool, start: int, step: int):
    st, strong, far = _far(ctx, k, hi)
    vals = st[far] if use_far else st[~strong]
    first = (-start) % step
    return vals[first::step]


def _band_labels(lab: np.ndarray) -> BandLabels:
    return BandLabels(int(lab.max()) if lab.size else 0, lab[0].copy(), lab[-1].copy())


def _t_low_label(ctx: _Ctx, k: int, lo: float, hi: float):
    a, b = ctx.band(k)
    st = ctx.arrays["strength"].read(a, b)
    lab, n = ndi.label(st > lo)  # 4-connected, as skimage's apply_hysteresis_threshold
    ctx.arrays["work"].write(a, lab)
    high = np.bincount(lab[st > hi], minlength=n + 1)[1:] > 0
    return _band_labels(lab), high


def _t_mask_label(ctx: _Ctx, k: int, keep: np.ndarray, off: int):
    a, b = ctx.band(k)
    low = ctx.arrays["work"].read(a, b).astype(np.int64)
    mask = np.where(low > 0, keep[np.where(low > 0, low + off, 0)], False)
    lab, n = ndi.label(mask, structure=ONES)
    ctx.arrays["work"].write(a, lab)
    n_mask = int(np.count_nonzero(mask))
    objs = ndi.find_objects(lab)
    ext = np.array([[s[0].start + a, s[0].stop + a, s[1].start, s[1].stop] for s in objs],
                   np.int64).reshape(-1, 4)
    return _band_labels(lab), ext, n_mask


def _t_write_mask(ctx: _Ctx, k: int, keep: np.ndarray, off: int):
    a, b = ctx.band(k)
    lab = ctx.arrays["work"].read(a, b).astype(np.int64)
    mask = (lab > 0) & keep[np.where(lab > 0, lab + off, 0)]
    ctx.arrays["mask"].write(a, mask.view(np.uint8))
    return int(np.count_nonzero(mask))


def _t_seeds(ctx: _Ctx, k: int):
    g = int(np.ceil(ctx.opts.gap_px))
    a, b, wa, wb = _window(ctx, k, ctx.margin + g)
    mask = ctx.arrays["mask"].read(wa, wb).astype(bool)
    dist = ndi.distance_transform_edt(~mask).astype(np.float32)
    peaks = (dist >= ndi.maximum_filter(dist, size=2 * g + 1)) & (dist >= 1.0)
    # exact where the nearest boundary lies inside the window: true for core rows (± g)
    # whose distance stays below the margin (a nearer one outside would be farther)
    ia, ib = max(0, a - g - wa), min(wb - wa, b + g - wa)
    open_edge = (wa > 0) or (wb < ctx.shape[0])
    exact = (not open_edge) or float(dist[ia:ib].max(initial=0.0)) <= ctx.margin
    lab, _ = ndi.label(peaks[a - wa : b - wa], structure=ONES)
    ctx.arrays["work"].write(a, lab)
    return _band_labels(lab), exact


def _t_watershed(ctx: _Ctx, k: int, marker_lut: np.ndarray, band_off: np.ndarray):
    from skimage.segmentation import watershed

    a, b, wa, wb = _window(ctx, k, ctx.margin)
    st = ctx.arrays["strength"].read(wa, wb)
    local = ctx.arrays["work"].read(wa, wb).astype(np.int64)
    band_of_row = np.arange(wa, wb) // ctx.band_rows
    glob = np.where(local > 0, local + band_off[band_of_row][:, None], 0)
    markers = marker_lut[glob].astype(np.int32)
    lab = watershed(st, markers=markers).astype(np.int32)
    ctx.arrays["labels"].write(a, lab[a - wa : b - wa])
    # the untiled check: a grain reaching the window's open edge may be cut there
    open_rows = ([lab[0]] if wa > 0 else []) + ([lab[-1]] if wb < ctx.shape[0] else [])
    core = lab[a - wa : b - wa]
    reach = np.intersect1d(np.unique(core), np.unique(np.concatenate(open_rows))) if open_rows \
        else np.zeros(0)
    return bool(reach.size == 0)


def _support(ctx: _Ctx, wa: int, wb: int, lo: float) -> np.ndarray:
    st = ctx.arrays["strength"].read(wa, wb)
    sup = st > lo
    if ctx.opts.contrast == "grains":
        from skimage.morphology import skeletonize

        sup = ndi.binary_dilation(skeletonize(sup), iterations=1)
    return sup


def _pairs(lab: np.ndarray, values: np.ndarray, n_core: int):
    """(lo, hi, value) of 4-adjacent label pairs: horizontal on the core rows, vertical
    from each core row to the next (the row below the band included)."""
    los, his, vals = [], [], []
    core, vcore = lab[:n_core], values[:n_core]
    for x, y, vx, vy in (
        (core[:, :-1], core[:, 1:], vcore[:, :-1], vcore[:, 1:]),
        (lab[:-1][:n_core], lab[1:][:n_core], values[:-1][:n_core], values[1:][:n_core]),
    ):
        m = x != y
        los.append(np.minimum(x[m], y[m]))
        his.append(np.maximum(x[m], y[m]))
        vals.append(np.maximum(vx[m], vy[m]))
    return (np.concatenate(los).astype(np.int64), np.concatenate(his).astype(np.int64),
            np.concatenate(vals).astype(float))


def _t_pair_table(ctx: _Ctx, k: int, lut: np.ndarray, lo: float | None, nmax: int,
                  junction: int = 0):
    a, b = ctx.band(k)
    wb = min(ctx.shape[0], b + 1)
    lab = lut[ctx.arrays["labels"].read(a, wb)]
    if lo is None:
        values = np.zeros(lab.shape, np.float32)
    else:
        sa, sb = max(0, a - 8), min(ctx.shape[0], wb + 8)
        values = _support(ctx, sa, sb, lo)[a - sa : wb - sa].astype(np.float32)
    x, y, v = _pairs(lab, values, b - a)
    key = x * (nmax + 1) + y
    uk, inv = np.unique(key, return_inverse=True)
    counts = np.bincount(lab[: b - a].ravel(), minlength=nmax + 1)
    if junction <= 0 or lo is None:
        return uk, np.bincount(inv), np.bincount(inv, weights=v), counts
    # pixels away from third regions, as segment.grains._merge_unsupported judges them
    ja, jb = max(0, a - junction), min(ctx.shape[0], wb + junction)
    wide = lut[ctx.arrays["labels"].read(ja, jb)]
    inner = sg._two_label_pixels(wide, junction, n_labels=nmax + 1)[a - ja : wb - ja]
    _, _, vi = _pairs(lab, inner.astype(np.float32), b - a)
    _, _, vs = _pairs(lab, (inner & (values > 0)).astype(np.float32), b - a)
    return (uk, np.bincount(inv), np.bincount(inv, weights=v), counts,
            np.bincount(inv, weights=vi), np.bincount(inv, weights=vs))


def _combine_pairs(parts, nmax: int):
    keys = np.concatenate([p[0] for p in parts])
    uk, inv = np.unique(keys, return_inverse=True)
    total = np.bincount(inv, weights=np.concatenate([p[1] for p in parts]).astype(float))
    sup = np.bincount(inv, weights=np.concatenate([p[2] for p in parts]))
    counts = np.sum([p[3] for p in parts], axis=0)
    if len(parts[0]) > 4:  # inner-pixel contacts and their support (junction-aware merge)
        n_inner = np.bincount(inv, weights=np.concatenate([p[4] for p in parts]))
        sup_inner = np.bincount(inv, weights=np.concatenate([p[5] for p in parts]))
        total, sup = sg.judged_away_from_junctions(total, sup, n_inner, sup_inner)
    return uk, total.astype(np.int64), sup, counts


# -- counting -------------------------------------------------------------------------
def _region_counts(lab: np.ndarray, g0: int, n_core: int, region, s: int, angles):
    """Crossings and line lengths of count_crossings(labels[region]) for the pairs whose
    first pixel lies in this band's core rows (global rows g0 .. g0 + n_core)."""
    ra, rb, ca, cb = region
    i0, i1 = max(ra, g0), min(rb, g0 + n_core)  # core rows inside the region
    out_c, out_l = [], []
    if i1 <= i0:
        return [0] * len(angles), [0.0] * len(angles)
    sub = lab[i0 - g0 : min(rb, g0 + lab.shape[0]) - g0, ca:cb]  # + the next row if in region
    nr = i1 - i0  # first-pixel rows
    for ang in angles:
        a = int(round(ang)) % 180
        if a == 0:
            rows = sub[:nr][(-(i0 - ra)) % s :: s]
            out_c.append(int(np.count_nonzero(rows[:, 1:] != rows[:, :-1])))
            out_l.append(float(rows.shape[0] * (rows.shape[1] - 1)))
            continue
        npair = min(nr, sub.shape[0] - 1)
        if a == 90:
            cols = sub[:, ::s]
            c = int(np.count_nonzero(cols[1 : npair + 1] != cols[:npair]))
            out_c.append(c)
            out_l.append(float(npair * cols.shape[1]))
            continue
        m = sub[:, ::-1] if a == 45 else sub
        x, y = m[:npair, :-1], m[1 : npair + 1, 1:]
        c, pairs = 0, 0
        for r in range(s):  # region-relative (i - j) % s == 0
            rr = (r - (i0 - ra)) % s
            xr, yr = x[rr::s, r::s], y[rr::s, r::s]
            c += int(np.count_nonzero(xr != yr))
            pairs += xr.size
        out_c.append(c)
        out_l.append(float(pairs))  # steps; × √2 once summed over bands (as count_crossings)
    return out_c, out_l


def _t_measure(ctx: _Ctx, k: int, lut, regions, s: int, angles, circle_pts, nmax: int):
    a, b = ctx.band(k)
    wb = min(ctx.shape[0], b + 1)
    lab = lut[ctx.arrays["labels"].read(a, wb)]
    core = lab[: b - a]
    counts = [_region_counts(lab, a, b - a, reg, s, angles) for reg in regions]
    flat = core.ravel()
    n = np.bincount(flat, minlength=nmax + 1)
    rows = np.repeat(np.arange(a, b, dtype=float), core.shape[1])
    cy = np.bincount(flat, weights=rows, minlength=nmax + 1)
    cx = np.bincount(flat, weights=np.tile(np.arange(core.shape[1], dtype=float), b - a),
                     minlength=nmax + 1)
    yy, xx = circle_pts
    sel = (yy >= a) & (yy < b)
    samples = (np.flatnonzero(sel), core[yy[sel] - a, xx[sel]])
    edges = (core[:, 0].copy(), core[:, -1].copy(), core[0].copy(), core[-1].copy())
    return counts, n, cy, cx, samples, edges


# -- running the bands ----------------------------------------------------------------
class _Runner:
    def __init__(self, topts: TileOptions):
        self.topts = topts
        self.client = None
        self.cluster = None
        if topts.scheduler:
            from distributed import Client, LocalCluster

            if topts.scheduler == "local":
                self.cluster = LocalCluster(n_workers=max(1, topts.workers),
                                            threads_per_worker=1, host="127.0.0.1",
                                            processes=True, dashboard_address=None)
                self.client = Client(self.cluster)
            else:
                self.client = Client(topts.scheduler)

    def map(self, fn, ctx: _Ctx, args_per_band: list[tuple]):
        if self.client is not None:
            cfut = self.client.scatter(ctx, broadcast=True, hash=False)
            futs = [self.client.submit(fn, cfut, k, *args, pure=False)
                    for k, args in enumerate(args_per_band)]
            return self.client.gather(futs)
        if self.topts.workers > 1:
            from concurrent.futures import ThreadPoolExecutor

            with ThreadPoolExecutor(self.topts.workers) as pool:
                return list(pool.map(lambda ka: fn(ctx, ka[0], *ka[1]),
                                     enumerate(args_per_band)))
        return [fn(ctx, k, *args) for k, args in enumerate(args_per_band)]

    def close(self):
        if self.client is not None:
            self.client.close()
        if self.cluster is not None:
            self.cluster.close()


def _same(n: int, *args) -> list[tuple]:
    return [tuple(args)] * n


def segment_and_count(src, shape, seg_opts: sg.GrainSegmentOptions, topts: TileOptions,
                      *, angles, line_spacing_px: int, circle_radius_px: float,
                      subregions: int) -> dict:
    """Run the banded grain pipeline; returns the counts and per-grain numbers."""
    if seg_opts.contrast != "grains" and seg_opts.remove_scratches:
        seg_opts = replace(seg_opts, remove_scratches=False)
    work = topts.workdir or tempfile.mkdtemp(prefix="sectio-tiles-")
    os.makedirs(work, exist_ok=True)
    h, w = shape
    ctx = _Ctx(src=src, shape=(h, w), band_rows=topts.band_rows, margin=topts.margin_rows,
               opts=seg_opts)
    ctx.arrays = {
        "strength": DiskArray.create(os.path.join(work, "strength.f32"), (h, w), np.float32),
        "work": DiskArray.create(os.path.join(work, "work.i32"), (h, w), np.int32),
        "mask": DiskArray.create(os.path.join(work, "mask.u8"), (h, w), np.uint8),
        "labels": DiskArray.create(os.path.join(work, "labels.i32"), (h, w), np.int32),
    }
    runner = _Runner(topts)
    nb = ctx.n_bands
    try:
        return _run(ctx, runner, nb, seg_opts, angles, line_spacing_px, circle_radius_px,
                    subregions)
    finally:
        runner.close()
        for arr in ctx.arrays.values():
            arr.remove()
        if topts.workdir is None:
            shutil.rmtree(work, ignore_errors=True)


def _run(ctx: _Ctx, runner: _Runner, nb: int, opts, angles, spacing, radius, subregions):
    h, w = ctx.shape
    none = [()] * nb
    # 1. grey range (load() scales every image to [0, 1])
    rng = runner.map(_t_grey_range, ctx, none)
    if not all(r[2] for r in rng):
        raise MeasurementError(f"{ctx.src.path} holds non-finite pixel values; re-export it.")
    ctx.grey_lo, ctx.grey_hi = min(r[0] for r in rng), max(r[1] for r in rng)
    if ctx.grey_hi - ctx.grey_lo <= 1e-12 * max(1.0, abs(ctx.grey_hi)):
        raise MeasurementError(f"{ctx.src.path} is blank; check the file or the exposure.")
    # 2. flattening background from every f-th row and column, as _wide_blur
    sigma_bg = opts.flatten_sigma_px or max(h, w) / 8.0
    f = max(1, int(sigma_bg // 4))
    small = np.vstack([_img(ctx, r, r + 1)[:, ::f] for r in range(0, h, f)])
    ctx.bg_small = ndi.gaussian_filter(small, sigma_bg / f, mode="reflect")
    rng = runner.map(_t_flat_range, ctx, none)
    fmin, fmax = min(r[0] for r in rng), max(r[1] for r in rng)
    ctx.flat_min, ctx.flat_den = fmin, max(float(np.float32(fmax) - np.float32(fmin)), 1e-6)
    # 3. scale from the central crop (the same crop as the untiled path)
    ch, cw = h // 2, w // 2
    crop = _img(ctx, max(0, ch - 256), ch + 256)[:, max(0, cw - 256) : cw + 256]
    sigma, _typical = sg._choose_scale(crop, opts)
    ctx.sigma = sigma
    # 4. strength (to disk), its range, the pixel noise
    parts = runner.map(_t_strength, ctx, none)
    smin = min(p[0] for p in parts)
    smax = max(p[1] for p in parts)
    if float(smax - smin) <= 1e-9:
        raise MeasurementError("the image shows no boundaries (no contrast); check the image")
    d = np.concatenate([p[2] for p in parts])
    del parts
    noise = float(1.4826 * np.median(d) / np.sqrt(2.0))
    del d
    # 5. levels
    if opts.threshold_high is not None:
        hi = float(opts.threshold_high)
    else:
        from skimage.filters import threshold_otsu

        hist = np.sum(runner.map(_t_hist, ctx, _same(nb, smin, smax)), axis=0)
        edges = np.linspace(smin, smax, 257, endpoint=True, dtype=np.float32)
        hi = float(threshold_otsu(hist=(hist, (edges[:-1] + edges[1:]) / 2.0)))
    if opts.threshold_low is not None:
        lo = float(opts.threshold_low)
    else:
        cnt = runner.map(_t_far_count, ctx, _same(nb, hi))
        n_far = sum(c[0] for c in cnt)
        use_far = n_far > 1000
        per = [c[0] if use_far else c[1] for c in cnt]
        step = max(1, sum(per) // 400_000)
        starts = np.concatenate([[0], np.cumsum(per)[:-1]])
        args = [(hi, use_far, int(starts[k]), step) for k in range(nb)]
        sample = np.concatenate(runner.map(_t_far_sample, ctx, args))
        lo = sg._noise_low_level(sample, hi, opts, sigma, noise)
    hi, lo = sg._final_levels(hi, lo, opts)
    lo_h = min(lo, hi)  # apply_hysteresis_threshold clips low at high
    # 6. hysteresis: components above low holding a pixel above high
    res = runner.map(_t_low_label, ctx, _same(nb, lo_h, hi))
    bands = [r[0] for r in res]
    comp, m = components(bands, diagonal=False)
    has_high = np.concatenate([[False]] + [r[1] for r in res])
    comp_high = np.zeros(m + 1, bool)
    comp_high[comp[has_high]] = True
    keep = comp_high[comp]
    keep[0] = False
    off = offsets(bands)
    res = runner.map(_t_mask_label, ctx, [(keep, int(off[k])) for k in range(nb)])
    n_mask = sum(r[2] for r in res)
    if n_mask / (h * w) < 1e-4 or n_mask / (h * w) > 0.8:
        raise MeasurementError("no grain boundary network was found; "
                               "check --boundaries dark/bright or --contrast grains")
    bands = [r[0] for r in res]
    comp, m = components(bands, diagonal=True)
    ext = np.concatenate([r[1] for r in res])  # per global id 1..N
    keep2 = np.ones(comp.size, bool)
    keep2[0] = False
    if opts.remove_pits and m:
        lo_r = np.full(m + 1, h)
        hi_r = np.zeros(m + 1, np.int64)
        lo_c = np.full(m + 1, w)
        hi_c = np.zeros(m + 1, np.int64)
        c = comp[1:]
        np.minimum.at(lo_r, c, ext[:, 0])
        np.maximum.at(hi_r, c, ext[:, 1])
        np.minimum.at(lo_c, c, ext[:, 2])
        np.maximum.at(hi_c, c, ext[:, 3])
        small = np.maximum(hi_r - lo_r, hi_c - lo_c) <= 6 * sigma + 4
        keep2 = ~small[comp]
        keep2[0] = False
    off = offsets(bands)
    runner.map(_t_write_mask, ctx, [(keep2, int(off[k])) for k in range(nb)])
    # 7. seeds and watershed
    res = runner.map(_t_seeds, ctx, none)
    bands = [r[0] for r in res]
    seeds_exact = all(r[1] for r in res)
    marker_lut, n_markers = components(bands, diagonal=True)
    flood_exact = all(runner.map(_t_watershed, ctx, _same(nb, marker_lut, offsets(bands))))
    if n_markers < 1:
        raise MeasurementError("no grains were found; check the boundary contrast options")
    # 8. merge neighbours with unsupported dividing lines, absorb small regions
    ident = np.arange(n_markers + 1, dtype=np.int64)
    uk, total, sup, counts = _combine_pairs(
        runner.map(_t_pair_table, ctx,
                   _same(nb, ident, lo, n_markers, sg.junction_radius_px(ctx.sigma, opts))),
        n_markers)
    lut = ident
    n_merged = 0
    if n_markers >= 2:
        mlut, n_merged = sg._merge_lut(uk, n_markers, total, sup, opts.merge_support)
        if mlut is not None:
            lut = mlut.astype(np.int64)
    occupied = ident[counts > 0]

    def present(lt):
        return np.unique(lt[occupied])

    areas = np.bincount(lut, weights=counts)[1:]
    areas = areas[areas > 0]
    if opts.min_grain_area_px is not None:
        min_area = float(opts.min_grain_area_px)
    else:
        min_area = max(4.0, opts.min_grain_area_fraction * float(np.median(areas)))
    lut, n_small = _absorb_banded(ctx, runner, nb, lut, counts, min_area, present)
    # relabel 1..n
    ids = present(lut)
    ids = ids[ids > 0]
    seq = np.zeros(int(lut.max()) + 1, np.int64)
    seq[ids] = np.arange(1, ids.size + 1)
    lut = seq[lut]
    n = int(ids.size)
    if n < 2:
        raise MeasurementError("fewer than two grains were found; check the boundary options")
    # 9. counts
    regions = [(0, h, 0, w)] + [
        (i * h // subregions, (i + 1) * h // subregions, j * w // subregions,
         (j + 1) * w // subregions) for i in range(subregions) for j in range(subregions)]
    centres = circle_centres((h, w), radius) if radius else []
    npts = max(16, int(np.ceil(2 * np.pi * radius / 0.5))) if radius else 0
    t = np.linspace(0, 2 * np.pi, npts, endpoint=False)
    yy = np.concatenate([np.clip(np.round(cy + radius * np.sin(t)).astype(int), 0, h - 1)
                         for cy, _ in centres]) if centres else np.zeros(0, int)
    xx = np.concatenate([np.clip(np.round(cx + radius * np.cos(t)).astype(int), 0, w - 1)
                         for _, cx in centres]) if centres else np.zeros(0, int)
    res = runner.map(_t_measure, ctx, _same(nb, lut, regions, spacing, tuple(angles),
                                            (yy, xx), n))
    diag = np.where([int(round(a)) % 180 in (45, 135) for a in angles], np.sqrt(2.0), 1.0)
    counts = []
    for r_i in range(len(regions)):
        c = np.sum([np.asarray(r[0][r_i][0]) for r in res], axis=0)
        L = np.sum([np.asarray(r[0][r_i][1], float) for r in res], axis=0) * diag
        counts.append((tuple(int(v) for v in c), tuple(float(v) for v in L)))
    npx = np.sum([r[1] for r in res], axis=0)
    cy = np.sum([r[2] for r in res], axis=0)
    cx = np.sum([r[3] for r in res], axis=0)
    vals = np.zeros(yy.size, np.int64)
    for r in res:
        vals[r[4][0]] = r[4][1]
    step = 2 * np.pi * radius / npts if npts else 0.0
    circ = sum(cyclic_crossings(vals[i * npts : (i + 1) * npts], step)
               for i in range(len(centres)))
    left = np.concatenate([r[5][0] for r in res])
    right = np.concatenate([r[5][1] for r in res])
    top, bottom = res[0][5][2], res[-1][5][3]
    whole = InterceptCount(tuple(float(a) for a in angles), counts[0][0], counts[0][1], circ,
                           float(len(centres) * 2 * np.pi * radius))
    subs = [InterceptCount(tuple(float(a) for a in angles), c, L) for c, L in counts[1:]]
    return {
        "counts": whole, "subregion_counts": subs, "areas_px": npx, "sum_row": cy,
        "sum_col": cx, "border": np.unique(np.concatenate([left, right, top, bottom])),
        "corners": np.unique([top[0], top[-1], bottom[0], bottom[-1]]), "n_grains": n,
        "sigma": sigma, "threshold_high": hi, "threshold_low": lo, "min_area_px": min_area,
        "n_merged": n_merged, "n_small": n_small, "seams_exact": bool(seeds_exact and
                                                                        flood_exact),
        "noise": noise, "bands": nb,
    }


def _absorb_banded(ctx, runner, nb, lut, counts0, min_area, present):
    """_absorb_small on the banded label map, as label maps composed on ``lut``."""
    counts = np.bincount(lut, weights=counts0).astype(np.int64)
    n_small = int(np.count_nonzero((counts[1:] < min_area) & (counts[1:] > 0)))
    if n_small == 0 or n_small == np.count_nonzero(counts[1:]):
        return lut, 0
    for _ in range(10):
        nmax = int(present(lut).max())
        counts = np.bincount(lut, weights=counts0, minlength=nmax + 1)[: nmax + 1]
        counts = counts.astype(np.int64)
        if not sg._any_small(counts, min_area):
            break
        uk, total, _, _ = _combine_pairs(
            runner.map(_t_pair_table, ctx, _same(nb, lut, None, nmax)), nmax)
        step = sg._absorb_lut(counts, uk, nmax, total, min_area)
        if step is None:
            break
        ids = present(lut)
        if np.array_equal(step[ids], ids):
            break
        lut = step[lut]
    return lut, n_small
