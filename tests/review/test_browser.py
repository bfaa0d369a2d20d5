"""End to end: real headless Chromium against the running review server.

Open a field, join two grains, leave a region out, see the numbers change on the page,
reload, and find the edits kept (in the page and in the edit file); a later
``sectio grains`` run gives the numbers the page showed.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from sectio.cli import main
from sectio.review.server import ReviewServer
from sectio.review.session import ReviewSession
from sectio.synth._render import write_calibrated_tiff
from sectio.synth.grains import synthetic_grains

from .cdp_client import Browser, chromium_path

pytest.importorskip("websocket")
pytestmark = pytest.mark.skipif(chromium_path() is None, reason="chromium is not installed")


def _num(b, key):
    return b.js(f"document.querySelector('#fnums td[data-key={key}]').textContent")


def test_join_and_exclude_in_the_browser(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    for k in range(2):
        img, _ = synthetic_grains((320, 400), 80, rng=70 + k, n_scratches=0)
        write_calibrated_tiff(tmp_path / f"g{k + 1}.tif", img, 0.5)
    assert main(["grains", "g1.tif", "g2.tif", "--out", "out"]) == 0
    session = ReviewSession("out", by="T. Est")
    server = ReviewServer(session).start()
    b = None
    try:
        b = Browser(server.url)
        b.wait_for("!!document.querySelector('#fnums td[data-key=grain_count]')")
        n0 = int(_num(b, "grain_count"))
        c0 = int(_num(b, "intercept_count"))
        # Two neighbouring grains of the field's own label map, near the middle.
        lab = session.fields[0].base_labels
        a = int(lab[160, 200])
        rows, cols = np.nonzero((lab[:, 1:] != lab[:, :-1]) & (lab[:, :-1] == a))
        r, c = int(rows[0]), int(cols[0])
        b.js("document.getElementById('tool-join').click()")
        for x, y in ((c - 0.5, r + 0.5), (c + 1.5, r + 0.5)):
            sx, sy = b.js(f"sectioReview.toScreen({x}, {y})")
            b.click(sx, sy)
        b.wait_for(f"document.querySelector('#fnums td[data-key=grain_count]').textContent "
                   f"== '{n0 - 1}'")
        c1 = int(_num(b, "intercept_count"))
        assert c1 < c0
        # Leave the top-left 80 x 60 pixel corner out: click its corners, close on the first.
        b.js("document.getElementById('tool-exclude').click()")
        for x, y in ((2, 2), (80, 2), (80, 60), (2, 60), (2, 2)):
            sx, sy = b.js(f"sectioReview.toScreen({x}, {y})")
            b.click(sx, sy)
        b.wait_for("sectioReview.field.edit_list.length == 2")
        c2 = int(_num(b, "intercept_count"))
        assert c2 < c1
        assert b.js("sectioReview.field.numbers.left_out_fraction") > 0.03
        shown_um = b.js("sectioReview.field.numbers.mean_intercept_um")
        b.screenshot(tmp_path / "page.png")
        # Reload: the edits are kept.
        b.navigate(server.url)
        b.wait_for("window.sectioReview && sectioReview.field && "
                   "sectioReview.field.edit_list.length == 2")
        assert int(_num(b, "grain_count")) == n0 - 1
        assert int(_num(b, "intercept_count")) == c2
        assert "2 edits" in b.js("document.getElementById('list').textContent")
    finally:
        if b is not None:
            b.close()
        server.stop()
    doc = json.loads((tmp_path / "out" / "g1_grains_edits.json").read_text())
    assert [e["op"] for e in doc["edits"]] == ["join", "exclude"]
    assert doc["by"] == "T. Est"
    # A later run applies the edit file: the numbers the page showed.
    assert main(["grains", "g1.tif", "g2.tif", "--out", "out"]) == 0
    g1 = json.loads((tmp_path / "out" / "grains.json").read_text())["fields"][0]
    assert g1["edits"]["count"] == 2
    assert g1["mean_intercept_um"] == pytest.approx(shown_um, rel=1e-12)
    assert g1["intercept_count"] == c2
