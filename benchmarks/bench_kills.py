"""Random kills of ``sectio study``: no orphan process, no temp file, identical reruns.

A small study (6 grain fields, 2 worker processes) is run once uninterrupted (the
reference), then N times killed at a random moment with SIGKILL — of the parent alone or of
the whole process group, at random — and rerun to the end. After each kill the script
checks that no process of the killed run is left (descendants found through /proc, waited
for up to 15 s), counts leftover temp files (``*.tmp``, ``.sectio-tmp/*`` in the output
folder, ``/tmp/sectio-field-*``) after the rerun, and compares the rerun's JSON results
byte for byte with the reference.

    PYTHONPATH=src python benchmarks/bench_kills.py [--kills 20]
"""

from __future__ import annotations

import argparse
import os
import random
import shutil
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path

STUDY = """\
[study]
title = "kill test"
seed = 0
draws = 2000
bootstrap = 50

[specimens.A]
images = ["a_*.tif"]
material = "steel-ferritic-lowc"

[specimens.B]
images = ["b_*.tif"]
material = "steel-ferritic-lowc"
"""


def descendants(pid: int) -> set[int]:
    parent_of = {}
    for d in os.listdir("/proc"):
        if d.isdigit():
            try:
                with open(f"/proc/{d}/stat", "rb") as fh:
                    parent_of[int(d)] = int(fh.read().rsplit(b")", 1)[1].split()[1])
            except (OSError, ValueError, IndexError):
                pass
    out, frontier = set(), {pid}
    while frontier:
        frontier = {c for c, p in parent_of.items() if p in frontier} - out
        out |= frontier
    return out


def alive(pid: int) -> bool:
    try:
        with open(f"/proc/{pid}/stat", "rb") as fh:
            return fh.read().rsplit(b")", 1)[1].split()[0] != b"Z"
    except OSError:
        return False


def results(out: Path) -> dict[str, bytes]:
    files = [out / "study.json", *sorted(out.glob("*/grains.json")),
             *sorted(out.glob("*/strength.json")), *sorted(out.glob("*/grains.csv"))]
    return {p.relative_to(out).as_posix(): p.read_bytes() for p in files}


def leftovers(out: Path) -> list[str]:
    left = [str(p) for p in out.rglob("*.tmp")]
    tmp = out / ".sectio-tmp"
    if tmp.exists():
        left += [str(p) for p in tmp.rglob("*")]
    left += [str(p) for p in Path(tempfile.gettempdir()).glob("sectio-field-*")]
    return left


def study_cmd(study: Path, out: Path) -> list[str]:
    code = "import sys; from sectio.cli import main; sys.exit(main())"
    return [sys.executable, "-c", code, "study", str(study), "--out", str(out),
            "--workers", "2", "--no-report"]


def main():
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--kills", type=int, default=20)
    ap.add_argument("--seed", type=int, default=7)
    args = ap.parse_args()
    from sectio.synth._render import write_calibrated_tiff
    from sectio.synth.grains import synthetic_grains

    rng = random.Random(args.seed)
    env = {**os.environ, "PYTHONWARNINGS": "ignore", "OMP_NUM_THREADS": "1"}
    work = Path(tempfile.mkdtemp(prefix="sectio-kills-"))
    try:
        for spec, n in (("a", 160), ("b", 90)):
            for f in range(3):
                img, _ = synthetic_grains((256, 256), n, rng=10 * f + n, kind="hardcore")
                write_calibrated_tiff(work / f"{spec}_{f}.tif", img, 0.5)
        study = work / "study.toml"
        study.write_text(STUDY)
        t0 = time.perf_counter()
        ref = work / "ref"
        subprocess.run(study_cmd(study, ref), check=True, env=env, capture_output=True)
        t_run = time.perf_counter() - t0
        reference = results(ref)
        print(f"reference run: {t_run:.1f} s, {len(reference)} result files")
        rows = []
        for k in range(args.kills):
            out = work / f"run{k}"
            mode = rng.choice(["parent", "group"])
            delay = rng.uniform(0.5, max(1.0, 0.9 * t_run))
            proc = subprocess.Popen(study_cmd(study, out), stdout=subprocess.DEVNULL,
                                    stderr=subprocess.DEVNULL, start_new_session=True, env=env)
            kids: set[int] = set()
            t_end = time.monotonic() + delay
            while time.monotonic() < t_end and proc.poll() is None:
                kids |= descendants(proc.pid)
                time.sleep(0.05)
            kids |= descendants(proc.pid)
            finished_before_kill = proc.poll() is not None
            if mode == "parent":
                os.kill(proc.pid, signal.SIGKILL)
            else:
                os.killpg(proc.pid, signal.SIGKILL)
            proc.wait()
            t_kill = time.monotonic()
            while any(alive(p) for p in kids) and time.monotonic() - t_kill < 15:
                time.sleep(0.1)
            orphans = [p for p in kids if alive(p)]
            for p in orphans:
                os.kill(p, signal.SIGKILL)
            saved = len(list((out / "fields").glob("*.json")))
            res = subprocess.run(study_cmd(study, out), env=env, capture_output=True,
                                 text=True)
            same = res.returncode == 0 and results(out) == reference
            left = leftovers(out)
            rows.append((k, mode, delay, len(kids), saved, finished_before_kill,
                         len(orphans), len(left), same))
            print(f"kill {k + 1:2d}: {mode:<6} at {delay:5.1f} s, {len(kids)} child process(es), "
                  f"{saved} field(s) saved; orphans {len(orphans)}, leftover temp files "
                  f"{len(left)}, rerun identical {same}"
                  + (" (run had finished)" if finished_before_kill else ""), flush=True)
            shutil.rmtree(out, ignore_errors=True)
        n = len(rows)
        print(f"\n{n} kills ({sum(r[1] == 'parent' for r in rows)} parent only, "
              f"{sum(r[1] == 'group' for r in rows)} whole group; "
              f"{sum(r[5] for r in rows)} after the run had ended): "
              f"{sum(r[6] for r in rows)} orphan processes, {sum(r[7] for r in rows)} leftover "
              f"temp files, {sum(r[8] for r in rows)}/{n} byte-identical reruns")
        return 0 if all(r[6] == 0 and r[7] == 0 and r[8] for r in rows) else 1
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
