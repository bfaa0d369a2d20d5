"""Time and peak memory of grain mosaics measured band by band (``sectio.tiles``).

A mosaic is made once and cached in ``bench_out/mosaic/`` (not timed): four synthetic
etched sections of 4096 x 4096 pixels (Poisson–Voronoi, ~1000 grains per megapixel), laid
side by side as a stage would stitch them, each placed in one of four mirror images so
that neighbours differ, 8-bit, uncompressed TIFF. Each mosaic is then measured in a fresh process:
``measure_grains_tiled`` with bands of 1024 rows; the process's peak resident size
(``ru_maxrss``) is printed beside the interpreter's own (after imports, before the
measurement), with bytes per pixel above it.

    python benchmarks/bench_mosaic.py [--sizes 16384x12288 20000x20000] [--workers 1]
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import time
from pathlib import Path

TILE = 4096
PX_UM = 0.5


def make_mosaic(path: Path, h: int, w: int) -> None:
    import numpy as np
    import tifffile

    from sectio.synth.grains import synthetic_grains

    if path.exists():
        return
    path.parent.mkdir(parents=True, exist_ok=True)
    t0 = time.perf_counter()
    tmp = path.with_suffix(".part")
    out = tifffile.memmap(tmp, shape=(h, w), dtype=np.uint8, photometric="minisblack")
    tiles = []
    for k in range(4):
        img, _ = synthetic_grains((TILE, TILE), 1000 * TILE * TILE // 2**20, rng=500 + k,
                                  noise_sigma=0.03, illumination=0.2)
        tiles.append(np.asarray(img, dtype=np.uint8))  # synthetic_grains gives 8-bit grey
    k = 0
    for r in range(0, h, TILE):
        for c in range(0, w, TILE):
            th, tw = min(TILE, h - r), min(TILE, w - c)
            t = tiles[k % 4]
            t = t[::-1] if (k // 4) % 2 else t
            t = t[:, ::-1] if (k // 8) % 2 else t
            out[r : r + th, c : c + tw] = t[:th, :tw]
            k += 1
        out.flush()
    del out
    tmp.rename(path)
    print(f"  made {path.name}: {w} x {h} ({time.perf_counter() - t0:.0f} s, not timed)",
          flush=True)


def child(path: Path, workers: int) -> None:
    from sectio.grains import make_options
    from sectio.tiles import TileOptions, measure_grains_tiled

    base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    t0 = time.perf_counter()
    field = measure_grains_tiled(path, make_options(), pixel_size=PX_UM,
                                 tile_options=TileOptions(workers=workers))
    t = time.perf_counter() - t0
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    d = field.to_dict()
    print(json.dumps({"seconds": t, "base_rss": base, "peak_rss": peak,
                      "grains": d["grain_count"], "mean_intercept_um": d["mean_intercept_um"],
                      "intercepts": d["intercept_count"], "astm_g": d["astm_g_intercept"],
                      "seams_exact": d["tiling"]["seams_exact"], "bands": d["tiling"]["bands"]}))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", nargs="+", default=["16384x12288", "20000x20000"],
                    help="W x H of each mosaic")
    ap.add_argument("--workers", type=int, default=1)
    ap.add_argument("--cache", type=Path, default=Path("bench_out/mosaic"))
    ap.add_argument("--child", type=Path, default=None, help=argparse.SUPPRESS)
    ap.add_argument("--make", default=None, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child is not None:
        child(args.child, args.workers)
        return
    paths = []
    for size in args.sizes:
        w, h = (int(v) for v in size.lower().split("x"))
        p = args.cache / f"mosaic_{w}x{h}.tif"
        subprocess.run([sys.executable, __file__, "--make", size, "--cache", str(args.cache)],
                       check=True) if args.make is None and not p.exists() else None
        paths.append((w, h, p))
    if args.make is not None:
        w, h = (int(v) for v in args.make.lower().split("x"))
        make_mosaic(args.cache / f"mosaic_{w}x{h}.tif", h, w)
        return
    print(f"{'mosaic':>12} {'MP':>6} {'bands':>5} {'s':>7} {'s/MP':>6} {'peak GiB':>8} "
          f"{'interp GiB':>10} {'B/px':>6} {'grains':>8} {'l_bar um':>8} {'G':>6} seams exact")
    for w, h, p in paths:
        proc = subprocess.run([sys.executable, __file__, "--child", str(p),
                               "--workers", str(args.workers)],
                              check=True, capture_output=True, text=True)
        r = json.loads(proc.stdout.strip().splitlines()[-1])
        mp = w * h / 2**20
        print(f"{w:>6}x{h:<5} {mp:6.0f} {r['bands']:5d} {r['seconds']:7.0f} "
              f"{r['seconds'] / mp:6.2f} {r['peak_rss'] / 2**30:8.2f} "
              f"{r['base_rss'] / 2**30:10.2f} {(r['peak_rss'] - r['base_rss']) / (w * h):6.1f} "
              f"{r['grains']:8d} {r['mean_intercept_um']:8.3f} {r['astm_g']:6.2f} "
              f"{r['seams_exact']}", flush=True)
    print("(peak = ru_maxrss of the measuring process; interp = the same after imports, "
          "before the measurement; B/px = (peak - interp) / pixels)")


if __name__ == "__main__":
    main()
