"""Compare two output folders of sectio (a run before and after a code change).

    python benchmarks/compare_outputs.py --run DIR        # demo study + two commands -> DIR
    python benchmarks/compare_outputs.py BEFORE_DIR AFTER_DIR

JSON files are compared value by value and in key order, then as text, ignoring only
what changes with the code by design: the version fields (``sectio_version``,
``version``), the content keys of cached fields (``key``: a hash that includes a
fingerprint of sectio's source) and ``run_log.json`` (timings). The cached field records
in ``fields/`` are named by that key, so they are matched by (kind, image). CSV, PNG, HTML
and PDF files are compared byte for byte (HTML after dropping the ``fields/<key>`` names it
may contain). Prints one line per file
that differs and "unchanged" when nothing does; exits 1 on a difference.
"""

from __future__ import annotations

import json
import re
import sys
from pathlib import Path

IGNORED_KEYS = {"sectio_version", "version", "key"}
SKIPPED = {"run_log.json"}


def _strip(obj):
    if isinstance(obj, dict):
        return {k: _strip(v) for k, v in obj.items() if k not in IGNORED_KEYS}
    if isinstance(obj, list):
        return [_strip(v) for v in obj]
    return obj


def _json_text(path: Path) -> str:
    # json.dumps keeps key order and writes floats by repr: equal text = equal documents.
    return json.dumps(_strip(json.loads(path.read_text(encoding="utf-8"))), ensure_ascii=False)


_IGNORED_TEXT = re.compile(rb'"(?:sectio_version|version|key)": "[^"]*"')


def _json_bytes(path: Path) -> bytes:
    return _IGNORED_TEXT.sub(b"IGNORED", path.read_bytes())


def _field_records(folder: Path) -> dict:
    out = {}
    for p in sorted((folder / "fields").glob("*.json")):
        rec = json.loads(p.read_text(encoding="utf-8"))
        out[(rec.get("kind"), rec.get("image"))] = p
    return out


def _files(folder: Path) -> dict[str, Path]:
    return {
        p.relative_to(folder).as_posix(): p
        for p in sorted(folder.rglob("*"))
        if p.is_file() and p.parent.name != "fields" and p.name not in SKIPPED
    }


def _bytes(path: Path) -> bytes:
    data = path.read_bytes()
    if path.suffix == ".html":
        data = re.sub(rb"fields/[0-9a-f]{64}", b"fields/KEY", data)
    return data


def compare(before: Path, after: Path) -> list[str]:
    """Lines describing every difference between the two folders (empty: unchanged)."""
    diffs = []
    a, b = _files(before), _files(after)
    for name in sorted(set(a) ^ set(b)):
        diffs.append(f"{name}: only in {'before' if name in a else 'after'}")
    for name in sorted(set(a) & set(b)):
        pa, pb = a[name], b[name]
        if pa.suffix == ".json":
            if _json_text(pa) != _json_text(pb):
                diffs.append(f"{name}: JSON differs")
            elif _json_bytes(pa) != _json_bytes(pb):
                diffs.append(f"{name}: same values, JSON text differs (layout)")
        elif _bytes(pa) != _bytes(pb):
            diffs.append(f"{name}: bytes differ")
    ra, rb = _field_records(before), _field_records(after)
    for k in sorted(set(ra) ^ set(rb), key=str):
        diffs.append(f"fields {k}: only in {'before' if k in ra else 'after'}")
    for k in sorted(set(ra) & set(rb), key=str):
        if _json_text(ra[k]) != _json_text(rb[k]):
            diffs.append(f"fields {k}: record differs")
        elif _json_bytes(ra[k]) != _json_bytes(rb[k]):
            diffs.append(f"fields {k}: same values, JSON text differs (layout)")
    return diffs


def run(out: Path) -> None:
    """The demo study, ``sectio grains`` on the 650 °C steel, ``sectio particles`` on the 4 h
    alloy and ``sectio strength`` of the two, with this checkout's sources, into
    ``out/study``, ``out/grains``, ``out/particles`` and ``out/strength``."""
    import os
    import subprocess

    root = Path(__file__).resolve().parents[1]
    out = out.resolve()
    env = {**os.environ, "PYTHONPATH": str(root / "src"), "OMP_NUM_THREADS": "1"}

    def images(pattern: str) -> list[str]:
        # relative to the checkout: the documents name the images as given
        return [p.relative_to(root).as_posix() for p in sorted(root.glob(pattern))]

    jobs = [
        ["study", "sample_images/demo_study.toml", "--out", str(out / "study")],
        ["grains", *images("sample_images/steel_T650_f*.tif"), "--out", str(out / "grains")],
        ["particles", *images("sample_images/alloy_t004h_f*.tif"), "--scale-bar", "1um",
         "--phase", "bright", "--out", str(out / "particles")],
    ]
    for job in jobs:
        subprocess.run([sys.executable, "-m", "sectio.cli", *job], env=env, cwd=root,
                       check=True, stdout=subprocess.DEVNULL)
    # relative paths (the document records them): run from the output folder
    subprocess.run([sys.executable, "-m", "sectio.cli", "strength", "--grains",
                    "grains/grains.json", "--particles", "particles/particles.json",
                    "--material", "steel-ferritic-lowc", "--draws", "5000", "--out", "strength"],
                   env=env, cwd=out, check=True, stdout=subprocess.DEVNULL)


def main(argv: list[str]) -> int:
    if len(argv) == 2 and argv[0] == "--run":
        run(Path(argv[1]))
        return 0
    if len(argv) != 2:
        print(__doc__)
        return 2
    before, after = Path(argv[0]), Path(argv[1])
    diffs = compare(before, after)
    n = len(_files(before)) + len(_field_records(before))
    for line in diffs:
        print(line)
    print("unchanged" if not diffs else f"{len(diffs)} difference(s)", f"({n} files compared)")
    return 1 if diffs else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
