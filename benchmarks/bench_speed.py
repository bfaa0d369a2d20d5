"""Speed and memory of the grain and particle pipelines beside the plain scikit-image way.

For each kind (grains, particles) and size (default 1, 4, 16, 64 MP) a synthetic image is
made once and cached (not timed): grains — Poisson–Voronoi etched sections, ~1000 grains
per MP (64 MP: four 16 MP sections side by side); particles — Boolean model of spheres,
V_V 0.12, ~2000 sections per MP. Every figure comes from a fresh process:

* in-process: ``measure_grains`` / ``measure_particles`` on the loaded image, against the
  plain pipeline's computation (``plain_pipeline.py``, no file output) — seconds, s/MP,
  peak resident size above the interpreter's own (after imports), in bytes per pixel;
* whole process: ``sectio grains|particles IMAGE --figures overlays`` against
  ``python plain_pipeline.py`` writing the same kinds of output — wall seconds, start-up
  included;
* the fitted exponent b of t ∝ pixels^b (least squares on log t, in-process).

    python benchmarks/bench_speed.py [--kinds grains particles] [--sizes 1 4 16 64]

Point PYTHONPATH at another source tree to measure it (a tree without ``--figures`` is
run with its default figures).
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
PX_UM = {"grains": 0.5, "particles": 0.02}


def image_path(cache: Path, kind: str, mp: int) -> Path:
    return cache / f"{kind}_{mp}mp.tif"


def make_image(cache: Path, kind: str, mp: int) -> None:
    import numpy as np

    from sectio.synth._render import write_calibrated_tiff

    path = image_path(cache, kind, mp)
    if path.exists():
        return
    cache.mkdir(parents=True, exist_ok=True)
    side = int(round((mp * 2**20) ** 0.5))
    if kind == "grains":
        from sectio.synth.grains import synthetic_grains

        if mp > 16:  # side by side sections of 16 MP (a single Voronoi of 64 MP is slow)
            k = side // 4096
            rows = [np.hstack([synthetic_grains((4096, 4096), 16000, rng=900 + i * k + j)[0]
                               for j in range(k)]) for i in range(k)]
            img = np.vstack(rows)
        else:
            img = synthetic_grains((side, side), 1000 * mp, rng=1000 + mp)[0]
    else:
        from sectio.synth.particles import section_image, sphere_population

        px = PX_UM["particles"]
        pop = sphere_population(size_um=(side * px, side * px), volume_fraction=0.12,
                                median_radius_um=0.085, sigma_ln=0.25, overlap=True, rng=mp)
        img = section_image(pop, pixel_size_um=px, rng=mp).image
    write_calibrated_tiff(path, img, PX_UM[kind])


def _rss() -> int:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024


def child(kind: str, which: str, path: Path, repeat: int) -> None:
    """One in-process measurement in this fresh process; prints one JSON line."""
    import numpy as np  # noqa: F401  (the interpreter's own: numpy, scipy, scikit-image)

    if which == "sectio":
        from sectio.micrograph import load

        if kind == "grains":
            from sectio.grains import measure_grains as measure
        else:
            from sectio.particles import measure_particles as measure

        def run():
            return measure(load(path))
    else:
        sys.path.insert(0, str(HERE))
        import plain_pipeline

        fn = getattr(plain_pipeline, kind)
        out = Path(tempfile.mkdtemp())

        def run():
            return fn(path, out, save=False)
    import skimage.segmentation  # noqa: F401
    from scipy import ndimage  # noqa: F401

    base = _rss()
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        run()
        times.append(time.perf_counter() - t0)
    print(json.dumps({"seconds": min(times), "base_rss": base, "peak_rss": _rss()}))


def _figures_supported() -> bool:
    try:
        from sectio.commands import _common
    except ImportError:
        return False
    return hasattr(_common, "FIGURES")


def whole(kind: str, which: str, path: Path, repeat: int) -> float:
    best = float("inf")
    for _ in range(repeat):
        with tempfile.TemporaryDirectory() as tmp:
            if which == "sectio":
                cmd = [sys.executable, "-m", "sectio.cli", kind, str(path), "--out", tmp]
                cmd += ["--figures", "overlays"] if _figures_supported() else []
            else:
                cmd = [sys.executable, str(HERE / "plain_pipeline.py"), kind, str(path), tmp]
            t0 = time.perf_counter()
            subprocess.run(cmd, check=True, capture_output=True)
            best = min(best, time.perf_counter() - t0)
    return best


def _inproc(kind, which, path, repeat) -> dict:
    proc = subprocess.run([sys.executable, __file__, "--child", kind, which, str(path),
                           str(repeat)], check=True, capture_output=True, text=True)
    return json.loads(proc.stdout.strip().splitlines()[-1])


def exponent(npx, secs) -> float:
    import numpy as np

    return float(np.polyfit(np.log(npx), np.log(secs), 1)[0])


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--kinds", nargs="+", default=["grains", "particles"])
    ap.add_argument("--sizes", type=int, nargs="+", default=[1, 4, 16, 64])
    ap.add_argument("--cache", type=Path, default=Path("bench_out/speed"))
    ap.add_argument("--no-whole", action="store_true", help="skip the whole-process runs")
    ap.add_argument("--child", nargs=4, default=None, help=argparse.SUPPRESS)
    ap.add_argument("--make", nargs=2, default=None, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child:
        kind, which, path, repeat = args.child
        child(kind, which, Path(path), int(repeat))
        return
    if args.make:
        make_image(args.cache, args.make[0], int(args.make[1]))
        return
    env_note = os.environ.get("PYTHONPATH", "(installed sectio)")
    print(f"sources: {env_note}", flush=True)
    for kind in args.kinds:
        for mp in args.sizes:
            subprocess.run([sys.executable, __file__, "--make", kind, str(mp), "--cache",
                            str(args.cache)], check=True)
        print(f"\n{kind}: in-process (measure only) and whole process (start-up, load, "
              "measure, overlay PNG, CSV, JSON)")
        print(f"{'MP':>3} {'s':>7} {'s/MP':>6} {'plain s':>7} {'ratio':>5} {'B/px':>6} "
              f"{'plain B/px':>10} | {'whole s':>7} {'plain s':>7} {'ratio':>5}", flush=True)
        npx, secs = [], []
        for mp in args.sizes:
            path = image_path(args.cache, kind, mp)
            n = int(round((mp * 2**20) ** 0.5)) ** 2 if kind == "particles" or mp <= 16 \
                else (int(round((mp * 2**20) ** 0.5)) // 4096 * 4096) ** 2
            rep = 2 if mp <= 4 else 1
            ours = _inproc(kind, "sectio", path, rep)
            plain = _inproc(kind, "plain", path, rep)
            npx.append(n)
            secs.append(ours["seconds"])
            line = (f"{mp:3d} {ours['seconds']:7.2f} {ours['seconds'] / (n / 2**20):6.3f} "
                    f"{plain['seconds']:7.2f} {ours['seconds'] / plain['seconds']:5.2f} "
                    f"{(ours['peak_rss'] - ours['base_rss']) / n:6.1f} "
                    f"{(plain['peak_rss'] - plain['base_rss']) / n:10.1f} |")
            if not args.no_whole:
                w_ours, w_plain = whole(kind, "sectio", path, rep), whole(kind, "plain", path,
                                                                          rep)
                line += f" {w_ours:7.2f} {w_plain:7.2f} {w_ours / w_plain:5.2f}"
            print(line, flush=True)
        if len(npx) >= 2:
            print(f"fitted exponent (t ∝ pixels^b, in-process): b = {exponent(npx, secs):.3f}")
    print("\n(s/MP over 2^20 pixels; B/px = (peak resident size - the same after imports) / "
          "pixels; ratio = sectio / plain scikit-image, same image, same run)")


if __name__ == "__main__":
    main()
