"""Speed and memory of the whole ``grains`` pipeline at 1, 4 and 16 megapixels.

For each size a synthetic etched section (Poisson–Voronoi, about 1000 grains per
megapixel, i.e. a mean lineal intercept near 25 px; 8-bit calibrated TIFF) is made once
and cached in ``bench_out/grains/`` (generation is not timed). Each size then runs in a
fresh Python process so that its peak resident size is its own:

* timed runs of the pipeline as ``sectio grains`` does it — load the TIFF (pixel size from
  its tags), ``measure_grains``, overlay PNG, ``grains.json`` and ``grains.csv`` — best of
  ``--repeat`` (default 2 for 1 and 4 MP, 1 at 16 MP), with the time of every stage;
* one more run under tracemalloc for the peak of Python/numpy allocations;
* the process's peak resident set size (resource.getrusage ru_maxrss).

``--profile MP`` adds a cProfile of one run at that size (top 15 by cumulative and by own
time).

    python benchmarks/bench_grains.py [--sizes 1 4 16] [--profile 4] [--cache DIR]
"""

from __future__ import annotations

import argparse
import cProfile
import io
import json
import pstats
import resource
import subprocess
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

PX_UM = 0.5
GRAINS_PER_MP = 1000


def image_path(cache: Path, mp: int) -> Path:
    return cache / f"grains_{mp}mp.tif"


def make_image(cache: Path, mp: int) -> Path:
    """Synthetic calibrated TIFF of ``mp`` megapixels (cached)."""
    path = image_path(cache, mp)
    if path.exists():
        return path
    from sectio.synth._render import write_calibrated_tiff
    from sectio.synth.grains import synthetic_grains

    side = int(round((mp * 2**20) ** 0.5))
    t0 = time.perf_counter()
    img, truth = synthetic_grains((side, side), GRAINS_PER_MP * mp, rng=1000 + mp)
    cache.mkdir(parents=True, exist_ok=True)
    write_calibrated_tiff(path, img, PX_UM)
    print(f"  made {path.name}: {side} x {side}, {truth.n_grains} grains "
          f"({time.perf_counter() - t0:.1f} s, not timed)", flush=True)
    return path


def run_pipeline(path: Path, out: Path) -> dict[str, float]:
    """One run of the grains pipeline on one field; seconds per stage."""
    from sectio.grains import SCHEMA, make_options, measure_grains, summarize_grains
    from sectio.micrograph import load
    from sectio.report._io import write_csv, write_json
    from sectio.report.grains import write_overlay
    from sectio.specimen import GRAIN_CSV_COLUMNS as CSV_COLUMNS

    t = {}
    t0 = time.perf_counter()
    mg = load(path)
    t["load"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    opts = make_options()
    field = measure_grains(mg, opts)
    t["measure"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    write_overlay(field, out / f"{path.stem}_overlay.png")
    t["overlay"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    d = field.to_dict()
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # one field: CI from sub-regions
        summary = summarize_grains([d])
    write_json(out / "grains.json",
               {"schema": SCHEMA, "options": opts.to_dict(), "fields": [d], "summary": summary})
    write_csv(out / "grains.csv", field.grain_table(), columns=CSV_COLUMNS)
    t["json+csv"] = time.perf_counter() - t0
    t["total"] = sum(t.values())
    t["grains"] = field.grain_count
    t["mean_intercept_px"] = field.counts.mean_intercept_px
    return t


def child(mp: int, cache: Path, repeat: int, profile: bool) -> None:
    """Measure one size in this (fresh) process and print one JSON line."""
    path = image_path(cache, mp)
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp)
        runs = [run_pipeline(path, out) for _ in range(repeat)]
        best = min(runs, key=lambda r: r["total"])
        tracemalloc.start()
        run_pipeline(path, out)
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        prof_text = ""
        if profile:
            pr = cProfile.Profile()
            pr.enable()
            run_pipeline(path, out)
            pr.disable()
            buf = io.StringIO()
            for key in ("cumulative", "tottime"):
                buf.write(f"\n--- cProfile at {mp} MP, top 15 by {key} ---\n")
                pstats.Stats(pr, stream=buf).strip_dirs().sort_stats(key).print_stats(15)
            prof_text = buf.getvalue()
    rss_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024  # kB on Linux
    # (the run under tracemalloc and the profiled run are included: they hold no more data)
    print(json.dumps({"mp": mp, "best": best, "all_totals": [r["total"] for r in runs],
                      "tracemalloc_peak_mb": peak / 2**20, "maxrss_mb": rss_mb,
                      "profile": prof_text}))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[1, 4, 16])
    ap.add_argument("--repeat", type=int, default=None,
                    help="timed runs per size (default: 2 up to 4 MP, 1 above)")
    ap.add_argument("--profile", type=int, default=4, help="size (MP) to profile; 0 = none")
    ap.add_argument("--cache", type=Path, default=Path("bench_out/grains"))
    ap.add_argument("--child", type=int, default=None, help=argparse.SUPPRESS)
    ap.add_argument("--make", type=int, default=None, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child is not None:
        child(args.child, args.cache, args.repeat or 1, args.profile == args.child)
        return
    if args.make is not None:
        make_image(args.cache, args.make)
        return
    # Everything heavy runs in child processes: Linux keeps ru_maxrss across fork/exec, so
    # a parent that had grown would hand its peak to every child.
    print("images (cached, generation not timed):", flush=True)
    for mp in args.sizes:
        subprocess.run([sys.executable, __file__, "--make", str(mp), "--cache", str(args.cache)],
                       check=True)
    results = []
    for mp in args.sizes:
        repeat = args.repeat or (2 if mp <= 4 else 1)
        proc = subprocess.run(
            [sys.executable, __file__, "--child", str(mp), "--cache", str(args.cache),
             "--repeat", str(repeat), "--profile", str(args.profile)],
            check=True, capture_output=True, text=True)
        results.append(json.loads(proc.stdout.strip().splitlines()[-1]))
    print()
    print(f"{'MP':>3} {'pixels':>10} {'grains':>6} {'runs':>4} {'load':>6} {'measure':>7} "
          f"{'overlay':>7} {'json+csv':>8} {'total s':>7} {'s/MP':>6} {'tracemalloc MB':>14} "
          f"{'maxrss MB':>9}")
    for r in results:
        b, mp = r["best"], r["mp"]
        npx = int(round((mp * 2**20) ** 0.5)) ** 2
        print(f"{mp:3d} {npx:10d} {b['grains']:6d} {len(r['all_totals']):4d} {b['load']:6.2f} "
              f"{b['measure']:7.2f} {b['overlay']:7.2f} {b['json+csv']:8.2f} {b['total']:7.2f} "
              f"{b['total'] / (npx / 2**20):6.2f} {r['tracemalloc_peak_mb']:14.0f} "
              f"{r['maxrss_mb']:9.0f}")
    print("(time: best of the runs; s/MP over 2^20 pixels; maxrss = peak resident set size of "
          "the process measuring that size, including the interpreter and imports)")
    for r in results:
        if r["profile"]:
            print(r["profile"])


if __name__ == "__main__":
    main()
