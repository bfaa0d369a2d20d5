"""Review page speed: page load of a 15-field study, edit re-measure at 4 MP, zoom at 16 MP.

    python benchmarks/review_bench.py [--big] [--screenshot docs/review_screenshot.png]

1. The demo study (15 fields) is run into a temporary folder; headless Chromium opens the
   review page: time from navigation until the field list (15 fields with their numbers)
   is drawn, and until the first field's picture and boundaries are shown (fields already
   prepared by the background worker, as after start-up).
2. A 4 MP (2048 x 2048) synthetic field: an edit (join, leave out) re-measured from the
   stored labels, beside the plain way of getting new numbers, i.e. segmenting and
   measuring the field again (sectio's pipeline) and scikit-image's ``regionprops`` of
   the edited map (a plain measurement of the same label map, no stereology); and the
   time the page shows for the edit (request to numbers drawn) in Chromium.
3. ``--big``: a 16 MP (4096 x 4096) field: serving its picture and boundary layer, and
   the mean frame time of 60 zoom steps in Chromium.

Chromium is driven through the DevTools protocol (tests/review/cdp_client.py).
"""

from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests" / "review"))

from cdp_client import Browser, chromium_path  # noqa: E402

from sectio.cli import main  # noqa: E402
from sectio.review.server import ReviewServer  # noqa: E402
from sectio.review.session import ReviewSession  # noqa: E402


def _neighbours(lab, r0, c0):
    a = int(lab[r0, c0])
    rows, cols = np.nonzero((lab[:, 1:] != lab[:, :-1]) & (lab[:, :-1] == a))
    return [[int(cols[0]), int(rows[0])], [int(cols[0]) + 1, int(rows[0])]]


def page_load(tmp: Path, screenshot: str | None) -> None:
    out = tmp / "demo"
    t0 = time.perf_counter()
    assert main(["study", str(ROOT / "sample_images" / "demo_study.toml"), "--out", str(out),
                 "--no-report"] if _has_no_report() else
                ["study", str(ROOT / "sample_images" / "demo_study.toml"), "--out",
                 str(out)]) in (0, 1)
    print(f"demo study run: {time.perf_counter() - t0:.1f} s")
    session = ReviewSession(out, by="QA")
    t0 = time.perf_counter()
    for fs in session.fields:
        session.prepare(fs.id)
    print(f"{len(session.fields)} fields prepared (segmented again from the images): "
          f"{time.perf_counter() - t0:.1f} s (done in the background after start-up)")
    server = ReviewServer(session).start()
    b = Browser("about:blank")
    try:
        times, first = [], []
        for _ in range(3):
            t0 = time.perf_counter()
            b.navigate(server.url)
            b.wait_for("document.querySelectorAll('#list li').length == "
                       f"{len(session.fields)}")
            times.append(time.perf_counter() - t0)
            b.wait_for("document.getElementById('base').complete && "
                       "document.getElementById('layer').complete && "
                       "document.getElementById('base').naturalWidth > 0 && "
                       "!!document.querySelector('#fnums td[data-key]')")
            first.append(time.perf_counter() - t0)
        print(f"page load, {len(session.fields)}-field study: list drawn "
              f"{min(times):.2f} s (best of 3; {', '.join(f'{t:.2f}' for t in times)}), "
              f"first field shown {min(first):.2f} s")
        if screenshot:
            g = next(f for f in session.fields if f.kind == "grains")
            lab = g.base_labels
            h, w = lab.shape
            session.add_edit(g.id, {"op": "join", "points": _neighbours(lab, h // 2, w // 2)})
            session.add_edit(g.id, {"op": "exclude", "polygon": [
                [w * 0.62, h * 0.12], [w * 0.86, h * 0.10], [w * 0.88, h * 0.3],
                [w * 0.64, h * 0.33]]})
            session.set_status(g.id, "reviewed")
            b.navigate(server.url + f"&field={g.id}")
            b.wait_for("sectioReview.field && sectioReview.field.edit_list.length == 2 && "
                       "document.getElementById('layer').complete")
            time.sleep(0.5)
            b.screenshot(screenshot)
            print(f"screenshot: {screenshot}")
    finally:
        b.close()
        server.stop()


def _has_no_report() -> bool:
    from click.testing import CliRunner

    from sectio.cli import cli

    return "--no-report" in CliRunner().invoke(cli, ["study", "--help"]).output


def remeasure(tmp: Path, size: int, label: str) -> None:
    from skimage.measure import regionprops

    from sectio.micrograph import load
    from sectio.review.apply import apply_edits
    from sectio.review.measure import measure_field
    from sectio.synth._render import write_calibrated_tiff
    from sectio.synth.grains import synthetic_grains

    d = tmp / label
    d.mkdir()
    n = int(size * size / 2500)
    img, _ = synthetic_grains((size, size), n, rng=7, n_scratches=0)
    write_calibrated_tiff(d / "big.tif", img, 0.5)
    t0 = time.perf_counter()
    assert main(["grains", str(d / "big.tif"), "--out", str(d / "out")]) == 0
    t_run = time.perf_counter() - t0
    session = ReviewSession(d / "out")
    fs = session.fields[0]
    t0 = time.perf_counter()
    session.prepare(0)
    t_prep = time.perf_counter() - t0
    lab = fs.base_labels
    edits = [{"op": "join", "points": _neighbours(lab, size // 2, size // 2)},
             {"op": "exclude", "polygon": [[10, 10], [300, 10], [300, 200], [10, 200]]},
             {"op": "cut", "line": [[size / 2 - 80, size / 3], [size / 2 + 80, size / 3]]}]
    t_edit = []
    for e in edits:
        t0 = time.perf_counter()
        session.add_edit(0, e)
        session.field_detail(0)
        t_edit.append(time.perf_counter() - t0)
    t0 = time.perf_counter()
    session.layer_png(0)
    t_layer = time.perf_counter() - t0
    # The plain ways: segment and measure again; scikit-image regionprops of the edited map.
    mg = load(d / "big.tif")
    t0 = time.perf_counter()
    measure_field("grains", mg, fs.source["options"])
    t_reseg = time.perf_counter() - t0
    edited = apply_edits(lab, fs.edit_doc["edits"], kind="grains").labels
    t0 = time.perf_counter()
    props = regionprops(edited)
    _ = [p.area for p in props]
    t_rp = time.perf_counter() - t0
    mp = size * size / 1e6
    print(f"{label}: {mp:.1f} MP field: run {t_run:.1f} s, review preparation {t_prep:.1f} s")
    print(f"  edit re-measured (join, leave out, cut; apply all edits + measure + numbers): "
          f"{', '.join(f'{t:.2f}' for t in t_edit)} s; boundary layer PNG {t_layer:.2f} s")
    print(f"  plain ways: segment + measure again {t_reseg:.1f} s "
          f"(ratio {t_reseg / max(t_edit):.0f}x slower than the slowest edit); "
          f"scikit-image regionprops areas of the edited map {t_rp:.2f} s "
          f"(ratio edit/regionprops {max(t_edit) / t_rp:.1f})")
    server = ReviewServer(session).start()
    b = Browser(server.url + "&field=0")
    try:
        b.wait_for("document.getElementById('base').complete && "
                   "document.getElementById('base').naturalWidth > 0", timeout_s=120)
        b.js("sectioReview.field.edit_list.length")
        b.js("document.getElementById('tool-join').click()")
        pts = _neighbours(session.fields[0].current.edited.labels, size // 3, size // 3)
        t0 = time.perf_counter()
        for x, y in pts:
            sx, sy = b.js(f"sectioReview.toScreen({x + 0.5}, {y + 0.5})")
            b.click(sx, sy)
        b.wait_for("sectioReview.field.edit_list.length == 4 && "
                   "document.getElementById('layer').complete", timeout_s=60)
        dt = time.perf_counter() - t0
        msg = b.js("document.getElementById('msg').textContent")
        print(f"  in Chromium: join clicked to new numbers and boundaries drawn "
              f"{dt:.2f} s (page message: {msg})")
        if size >= 4096:
            ms = b.js("""new Promise(function (done) {
                var n = 0, t0 = performance.now();
                var v = document.getElementById('viewer'), r = v.getBoundingClientRect();
                function step() {
                  v.dispatchEvent(new WheelEvent('wheel', {deltaY: n < 30 ? -60 : 60,
                      clientX: r.left + r.width / 2, clientY: r.top + r.height / 2,
                      bubbles: true}));
                  n++;
                  if (n < 60) { requestAnimationFrame(step); }
                  else {
                    requestAnimationFrame(function () { done((performance.now() - t0) / 60); });
                  }
                }
                requestAnimationFrame(step);
            })""")
            print(f"  zoom on the {mp:.0f} MP field: {ms:.1f} ms per frame over 60 wheel steps "
                  "(headless, software rendering)")
    finally:
        b.close()
        server.stop()


def run() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--big", action="store_true", help="also the 16 MP field")
    ap.add_argument("--screenshot", default=None)
    ap.add_argument("--skip-study", action="store_true")
    args = ap.parse_args()
    if chromium_path() is None:
        sys.exit("chromium is not installed")
    tmp = Path(tempfile.mkdtemp(prefix="sectio-review-bench-"))
    try:
        if not args.skip_study:
            page_load(tmp, args.screenshot)
        remeasure(tmp, 2048, "4MP")
        if args.big:
            remeasure(tmp, 4096, "16MP")
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    run()
