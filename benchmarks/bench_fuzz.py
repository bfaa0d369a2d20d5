"""Long fuzz run of the edge: mutated image files, unit strings, study files, CLI options.

Every input must end in a result or one InputError sentence (CLI: exit 0/1/2, no traceback);
anything else is counted as an uncaught exception. Memory: the process runs under an
address-space limit (RLIMIT_AS) of the image budget plus headroom, so a decode that would
blow past the budget shows up as a MemoryError (counted, "over budget") instead of taking
the machine; peak RSS is printed. Each input has a time limit (SIGALRM, 20 s: "hang").

Beside it, the plain way (``skimage.io.imread`` on the same mutated files, in a child
process under the same limits) for comparison: how many inputs a loader without the checks
lets through as uncaught exceptions, and the time per file (ratio).

    PYTHONPATH=src python benchmarks/bench_fuzz.py [--scale 1.0] [--json out.json]

``--scale 0.1`` for a quick look. The default (scale 1) runs 11 400 inputs.
"""

from __future__ import annotations

import argparse
import collections
import json
import os
import random
import resource
import signal
import subprocess
import sys
import tempfile
import time
import traceback
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent / "tests" / "hardening"))  # the shared seed files

BUDGET = int(1.5 * 2**30)
HEADROOM = int(2.0 * 2**30)  # interpreter, numpy, scikit-image, matplotlib
TIME_LIMIT_S = 20


class Hang(Exception):
    pass


def _alarm(signum, frame):
    raise Hang()


class Tally:
    def __init__(self, name):
        self.name, self.n, self.ok, self.refused = name, 0, 0, 0
        self.uncaught = collections.Counter()
        self.examples: dict[str, str] = {}
        self.slowest = (0.0, "")

    def run(self, label, fn):
        from sectio.errors import InputError

        self.n += 1
        t0 = time.perf_counter()
        signal.alarm(TIME_LIMIT_S)
        try:
            fn()
            self.ok += 1
        except InputError as exc:
            msg = str(exc)
            if "\n" in msg.strip() or not msg:
                self._bad("InputError without one sentence", label, msg)
            else:
                self.refused += 1
        except Hang:
            self._bad("hang", label, "")
        except MemoryError:
            self._bad("MemoryError (over budget)", label, "")
        except Exception as exc:  # noqa: BLE001 - that is what is counted
            self._bad(type(exc).__name__, label, traceback.format_exc(limit=3))
        finally:
            signal.alarm(0)
        dt = time.perf_counter() - t0
        if dt > self.slowest[0]:
            self.slowest = (dt, label)

    def _bad(self, kind, label, detail):
        self.uncaught[kind] += 1
        self.examples.setdefault(kind, f"{label}: {detail[-300:]}")

    def row(self):
        return {"inputs": self.n, "results": self.ok, "sentences": self.refused,
                "uncaught": sum(self.uncaught.values()), "by_kind": dict(self.uncaught),
                "slowest_s": round(self.slowest[0], 2), "slowest_input": self.slowest[1],
                "examples": self.examples}


# --------------------------------------------------------------------------- inputs
def mutated_files(rng: random.Random, n_per_seed: int):
    from seeds import mutate, seed_files

    seeds = seed_files()
    for name, data in sorted(seeds.items()):
        for k in range(n_per_seed):
            edits = [(rng.randrange(3), rng.randrange(2**20), rng.randrange(2**11))
                     for _ in range(rng.randint(1, 8))]
            cut = rng.randrange(256) if rng.random() < 0.2 else None
            yield f"{name}#{k}", name, mutate(data, edits, cut=cut)
    for k in range(n_per_seed):
        suffix = rng.choice([".tif", ".png", ".jpg", ".bmp"])
        yield f"random{suffix}#{k}", f"random{suffix}", rng.randbytes(rng.randrange(1, 400))


TOKENS = ["nan", "inf", "-inf", "1e999", "-1", "0", "1e9", "5e-324", "1e308", "0.5", "3",
          "9" * 40, " ", "\t", "\n", ".", "e", "+", "-", "um", "µm", "nm", "mm", "m", "in",
          "MPa", "ksi", "psi", "GPa", "$", "<b>", "\x00", "\udce9", "1" * 500, "±", "+-"]


def unit_strings(rng: random.Random, n: int):
    for _ in range(n):
        yield "".join(rng.choice(TOKENS) for _ in range(rng.randint(1, 6)))


STUDY_VALUES = ["nan", "inf", "-inf", "-1", "0", "1", "100000", "1000000000", "1e9", "1e308",
                "-1e-300", "9223372036854775807", "true", '"3um"', '"nan um"', '"1e999nm"',
                "[0, 45]", "[nan]", "[1e9]", '"$x$"', "0.5", "3", "2000", '"report.html"',
                "{}", "[]", '"x"']
STUDY_KEYS = {
    "study": ["seed", "draws", "bootstrap", "title", "materials_file"],
    "grains": ["line_spacing_px", "subregions", "gap_px", "ridge_scale_px", "angles_deg",
               "threshold_high", "threshold_low", "min_grain_size", "boundaries"],
    "particles": ["threshold", "points_per_side", "n_classes", "min_size", "foil_thickness",
                  "phase"],
    "strength": ["exponent", "taylor_alpha", "shearing_size_nm", "friction", "orowan_form"],
    "calibration": ["crop_bottom", "pixel_size", "scale_bar"],
    "trial": ["value", "name", "unit"],
}


def study_texts(rng: random.Random, n: int):
    for _ in range(n):
        lines = {"study": ['title = "fuzz"'], "grains": [], "particles": [], "strength": [],
                 "calibration": ['pixel_size = "0.5um"'], "trial": ['name = "t"', "value = 1"]}
        for _ in range(rng.randint(1, 4)):
            where = rng.choice(sorted(STUDY_KEYS))
            lines[where].append(f"{rng.choice(STUDY_KEYS[where])} = {rng.choice(STUDY_VALUES)}")
        tables = "".join(f"{w} = {{ {', '.join(lines[w])} }}\n"
                         for w in ("grains", "particles", "strength", "calibration", "trial")
                         if lines[w])
        name = rng.choice(["A", "A-1", "report.html", "fields", "x" * 120, "a b", "A"])
        yield ("[study]\n" + "\n".join(lines["study"]) + f'\n\n[specimens."{name}"]\n'
               'images = ["field.png"]\nmeasure = ["grains", "particles"]\n' + tables)


CLI = {
    "grains": ["--gap", "--angles", "--subregions", "--line-spacing", "--ridge-scale",
               "--crop-bottom", "--pixel-size", "--min-grain-size", "--scale-bar",
               "--max-image-memory", "--boundaries", "--contrast"],
    "particles": ["--threshold", "--seed", "--min-size", "--foil-thickness", "--pixel-size",
                  "--crop-bottom", "--phase"],
    "strength": ["--seed", "--draws", "--exponent", "--taylor-alpha", "--shearing-size",
                 "--friction", "--solid-solution", "--dislocation-density", "--material"],
}
CLI_VALUES = ["nan", "inf", "-1", "0", "1e9", "100000", "5e-324um", "1e999", "-0", "0,30",
              "nan,45", "", "$\\frac{1}{0}$", "1" * 300, "0.5um", "3", "45", "1e-3",
              "2", "bright", "steel-ferritic-lowc", "50+-10", "50+-nan", "1e400+-1"]


# --------------------------------------------------------------------------- runs
def run_loader(rng, n_per_seed, work: Path, tally: Tally, plain_inputs: list):
    from sectio.micrograph import load

    for label, name, data in mutated_files(rng, n_per_seed):
        p = work / name
        p.write_bytes(data)
        tally.run(label, lambda p=p: load(p, pixel_size="1um"))
        plain_inputs.append((label, name, data))


def run_units(rng, n, tally: Tally):
    from sectio.units import parse_length_um, parse_stress_mpa

    for text in unit_strings(rng, n):
        def both(text=text):
            import math

            from sectio.errors import InputError

            for f in (parse_length_um, parse_stress_mpa):  # an InputError is a sentence
                try:
                    v = f(text, what="--x")
                except InputError:
                    continue
                if not math.isfinite(v):
                    raise AssertionError(f"non-finite value {v} from {text!r}")
        tally.run(repr(text)[:60], both)


def run_studies(rng, n, work: Path, tally: Tally):
    import numpy as np
    from PIL import Image

    from sectio.study import parse_study

    Image.fromarray((np.indices((32, 32)).sum(0) * 4).astype(np.uint8)).save(work / "field.png")
    for text in study_texts(rng, n):
        tally.run(text.replace("\n", " | ")[:80], lambda t=text: parse_study(t, work / "s.toml"))


def run_cli(rng, n, work: Path, tally: Tally):
    import contextlib
    import io

    from sectio.cli import main
    from sectio.synth._render import write_calibrated_tiff
    from sectio.synth.grains import synthetic_grains

    img, _ = synthetic_grains((96, 112), 25, rng=7, n_scratches=0)
    field = work / "f.tif"
    write_calibrated_tiff(field, img, 0.5)
    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
        assert main(["grains", str(field), "--out", str(work / "good")]) == 0
    grains_json = work / "good" / "grains.json"
    env_budget = os.environ.get("SECTIO_MAX_IMAGE_MEMORY")
    for k in range(n):
        cmd = rng.choice(sorted(CLI))
        pairs = [(rng.choice(CLI[cmd]), rng.choice(CLI_VALUES)) for _ in range(rng.randint(1, 2))]
        out = work / f"cli{k}"
        if cmd == "strength":
            args = ["strength", "--grains", str(grains_json), "--material",
                    "steel-ferritic-lowc", "--draws", "1000", "--out", str(out)]
        else:
            args = [cmd, str(field), "--out", str(out)]
        for opt, val in pairs:
            args += [opt, val]

        def one(args=args):
            err = io.StringIO()
            with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(err):
                rc = main(args)
            text = err.getvalue()
            if rc not in (0, 1, 2) or "Traceback" in text:
                raise AssertionError(f"exit {rc}: {text[-300:]}")
            if rc == 2:
                last = text.strip().splitlines()[-1]
                if not last.startswith(("sectio: ", "Error: ")):
                    raise AssertionError(f"exit 2 without a sentence: {text[-300:]}")

        tally.run(" ".join(a for a in args[1:] if not a.startswith("/"))[:90], one)
        if env_budget is None:
            os.environ.pop("SECTIO_MAX_IMAGE_MEMORY", None)  # the option sets it


PLAIN_CHILD = r"""
import sys, time, pickle, resource, signal, collections
limit = int(sys.argv[2])
resource.setrlimit(resource.RLIMIT_AS, (limit, limit))
from skimage import io as skio
inputs = pickle.load(open(sys.argv[1], "rb"))
kinds = collections.Counter(); ok = 0
import os, tempfile
d = tempfile.mkdtemp(dir=sys.argv[3])
def alarm(s, f): raise TimeoutError()
signal.signal(signal.SIGALRM, alarm)
t0 = time.perf_counter()
for label, name, data in inputs:
    p = os.path.join(d, name)
    open(p, "wb").write(data)
    signal.alarm(20)
    try:
        skio.imread(p); ok += 1
    except TimeoutError:
        kinds["hang"] += 1
    except MemoryError:
        kinds["MemoryError (over budget)"] += 1
    except Exception as e:
        kinds[type(e).__name__] += 1
    finally:
        signal.alarm(0)
print(repr((ok, dict(kinds), time.perf_counter() - t0)))
"""


def run_plain(inputs, work: Path):
    import pickle

    f = work / "plain_inputs.pkl"
    f.write_bytes(pickle.dumps(inputs))
    res = subprocess.run([sys.executable, "-c", PLAIN_CHILD, str(f), str(BUDGET + HEADROOM),
                          str(work)], capture_output=True, text=True, timeout=7200,
                         env={**os.environ, "PYTHONWARNINGS": "ignore"})
    if res.returncode != 0:
        return {"error": res.stderr[-500:]}
    ok, kinds, seconds = eval(res.stdout.strip().splitlines()[-1])  # noqa: S307 - our child
    return {"inputs": len(inputs), "read": ok, "exceptions": sum(kinds.values()),
            "by_kind": kinds, "seconds": round(seconds, 1)}


def per_file_time(inputs) -> float:
    from sectio.errors import InputError
    from sectio.micrograph import load

    with tempfile.TemporaryDirectory(prefix="sectio-fuzz-") as tmp:
        t0 = time.perf_counter()
        for _label, name, data in inputs:
            p = Path(tmp) / name
            p.write_bytes(data)
            try:
                load(p, pixel_size="1um")
            except (InputError, MemoryError):
                pass
        return (time.perf_counter() - t0) / max(1, len(inputs))


def main():
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--scale", type=float, default=1.0)
    ap.add_argument("--json", default=None)
    ap.add_argument("--seed", type=int, default=20261202)
    ap.add_argument("--no-plain", action="store_true")
    args = ap.parse_args()
    resource.setrlimit(resource.RLIMIT_AS, (BUDGET + HEADROOM, BUDGET + HEADROOM))
    signal.signal(signal.SIGALRM, _alarm)
    import warnings

    warnings.simplefilter("ignore")
    import logging

    logging.getLogger("tifffile").setLevel(logging.CRITICAL)  # it logs every corrupt tag
    os.environ.setdefault("OMP_NUM_THREADS", "1")
    rng = random.Random(args.seed)
    s = args.scale
    tallies = {k: Tally(k) for k in ("images", "units", "studies", "cli")}
    plain_inputs: list = []
    with tempfile.TemporaryDirectory(prefix="sectio-fuzz-") as tmp:
        work = Path(tmp)
        t0 = time.perf_counter()
        run_loader(rng, max(1, int(400 * s)), work, tallies["images"], plain_inputs)
        t_load = time.perf_counter() - t0
        run_units(rng, max(1, int(3000 * s)), tallies["units"])
        run_studies(rng, max(1, int(1000 * s)), work, tallies["studies"])
        run_cli(rng, max(1, int(200 * s)), work, tallies["cli"])
        # the plain loader is slow on junk: every 6th file is enough for the comparison
        plain = None if args.no_plain else run_plain(plain_inputs[::6], work)
    peak_mib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    total = sum(t.n for t in tallies.values())
    uncaught = sum(sum(t.uncaught.values()) for t in tallies.values())
    print(f"{'input kind':<10} {'inputs':>7} {'results':>8} {'sentences':>9} {'uncaught':>8} "
          f"{'slowest s':>9}")
    for t in tallies.values():
        r = t.row()
        print(f"{t.name:<10} {r['inputs']:7d} {r['results']:8d} {r['sentences']:9d} "
              f"{r['uncaught']:8d} {r['slowest_s']:9.2f}")
        for kind, ex in r["examples"].items():
            print(f"    {kind}: {ex[:200]!r}")
    sectio_plain = None
    if plain and "inputs" in plain:  # sectio on the same subsample, for the time ratio
        sectio_plain = per_file_time(plain_inputs[::6])
    print(f"total      {total:7d} inputs, {uncaught} uncaught; peak RSS {peak_mib:.0f} MiB "
          f"(address-space limit {(BUDGET + HEADROOM) / 2**30:.1f} GiB, image budget "
          f"{BUDGET / 2**30:.1f} GiB)")
    per_file = sectio_plain if sectio_plain is not None else t_load / max(1,
                                                                          tallies["images"].n)
    if plain and "inputs" in plain:
        plain_per = plain["seconds"] / max(1, plain["inputs"])
        print(f"plain skimage.io.imread on the same {plain['inputs']} files: {plain['read']} "
              f"read, {plain['exceptions']} exceptions {plain['by_kind']}; "
              f"{1000 * plain_per:.2f} ms/file vs sectio.load {1000 * per_file:.2f} ms/file "
              f"(ratio {per_file / plain_per:.2f})")
    elif plain:
        print("plain run failed:", plain)
    if args.json:
        Path(args.json).write_text(json.dumps({
            "tallies": {k: t.row() for k, t in tallies.items()}, "total": total,
            "uncaught": uncaught, "peak_rss_mib": peak_mib, "plain": plain,
            "load_ms_per_file": 1000 * per_file}, indent=1))
    return 0 if uncaught == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
