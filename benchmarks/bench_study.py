"""Study throughput: fields per minute with 1 and 2 local workers and through Dask.

Runs the demo study (sample_images/demo_study.toml: 9 steel grain fields and 6 alloy
particle fields, 512 x 512 px) into fresh folders, so every field is measured (no reuse),
without the report. Prints fields per minute of the measuring phase (pool start-up
included) and of the whole run (plus assembling the specimen summaries), and the parallel
efficiency T(1) / (2 * T(2)).

The machine's own ceiling is measured too: the same pure-Python CPU loop run once alone
and twice at the same time. On a machine whose two logical CPUs give less than two CPUs of
work, no program reaches 100 %; the efficiency relative to that ceiling is printed beside
the raw one.

With ``--fields N`` (default 48) a second, larger study of N synthetic grain fields
(512 x 512 px, four specimens) is timed the same way: a lab runs hundreds of fields, and
the pool's start-up (about 2 s of imports per worker) weighs less on a longer run.

    python benchmarks/bench_study.py [--repeat 2] [--no-dask] [--fields 48]
"""

from __future__ import annotations

import argparse
import multiprocessing as mp
import tempfile
import time
from pathlib import Path

from sectio.study import load_study, run_study

HERE = Path(__file__).resolve().parent
STUDY = HERE.parent / "sample_images" / "demo_study.toml"


def _spin(_=None) -> float:
    t = time.perf_counter()
    s = 0
    for i in range(10_000_000):
        s += i
    return time.perf_counter() - t


def machine_ceiling() -> float:
    """Speed-up the machine gives two busy processes over one (2.0 = two real cores)."""
    ctx = mp.get_context("spawn")
    with ctx.Pool(1) as p:
        one = min(p.map(_spin, range(2)))
    with ctx.Pool(2) as p:
        two = max(p.map(_spin, range(2)))
    return 2 * one / two


def synthetic_study(folder: Path, n_fields: int) -> Path:
    """A study of ``n_fields`` synthetic grain fields in four specimens (generation untimed)."""
    from sectio.synth._render import write_calibrated_tiff
    from sectio.synth.grains import synthetic_grains

    lines = ['[study]', 'title = "benchmark (synthetic)"', ""]
    for k in range(n_fields):
        spec = k % 4
        img, _ = synthetic_grains((512, 512), 150 + 100 * spec, rng=1000 + k)
        write_calibrated_tiff(folder / f"s{spec}_f{k:03d}.tif", img, 0.5)
    for spec in range(4):
        lines += [f"[specimens.S{spec}]", f'images = ["s{spec}_f*.tif"]', 'measure = ["grains"]',
                  'material = "steel-ferritic-lowc"',
                  f'trial = {{ name = "time", value = {spec + 1}, unit = "h" }}', ""]
    path = folder / "bench_study.toml"
    path.write_text("\n".join(lines), encoding="utf-8")
    return path


def timed(label: str, repeat: int, study_path: Path = STUDY, **kw) -> tuple[float, float]:
    study = load_study(study_path)
    best = (float("inf"), float("inf"))
    for _ in range(repeat):
        with tempfile.TemporaryDirectory() as d:
            run = run_study(study, Path(d) / "out", report=False, **kw)
        assert run.computed == study.n_fields() and not run.failed
        best = min(best, (run.field_seconds, run.seconds))
    n = study.n_fields()
    print(f"{label:<40} {n} fields: measuring {best[0]:6.2f} s = {60 * n / best[0]:6.1f} "
          f"fields/min; whole run {best[1]:6.2f} s = {60 * n / best[1]:6.1f} fields/min")
    return best


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=2)
    ap.add_argument("--no-dask", action="store_true")
    ap.add_argument("--fields", type=int, default=48)
    a = ap.parse_args()
    ceiling = machine_ceiling()
    print(f"machine: two busy processes run {ceiling:.2f}x as fast as one "
          f"(2.00 = two full cores)")
    t1 = timed("local, 1 worker (in process)", a.repeat, workers=1)
    t2 = timed("local, 2 worker processes", a.repeat, workers=2)
    for i, what in enumerate(("measuring", "whole run")):
        eff = t1[i] / (2 * t2[i])
        print(f"parallel efficiency, 2 workers, {what}: {100 * eff:.0f} % raw, "
              f"{100 * eff * 2 / ceiling:.0f} % of what this machine allows")
    if not a.no_dask:
        from dask.distributed import LocalCluster

        with LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                          host="127.0.0.1", dashboard_address=":0") as cluster:
            td = timed("dask LocalCluster, 2 processes x 1 thread", a.repeat,
                       scheduler=cluster.scheduler_address)
        print(f"dask / 2 local workers, measuring: {t2[0] / td[0]:.2f}x the speed")
    if a.fields:
        with tempfile.TemporaryDirectory() as d:
            path = synthetic_study(Path(d), a.fields)
            print(f"\nsynthetic study, {a.fields} grain fields of 512 x 512 px:")
            s1 = timed("local, 1 worker (in process)", 1, path, workers=1)
            s2 = timed("local, 2 worker processes", 1, path, workers=2)
            eff = s1[0] / (2 * s2[0])
            print(f"parallel efficiency, 2 workers, measuring: {100 * eff:.0f} % raw, "
                  f"{100 * eff * 2 / ceiling:.0f} % of what this machine allows")


if __name__ == "__main__":
    main()
