"""docs/notebook_example.py runs end to end, its numbers match the synthetic truth, and the
results it shows have short text and HTML displays."""

from __future__ import annotations

import re
import runpy
import subprocess
import sys
from html.parser import HTMLParser
from pathlib import Path

import pytest

import sectio

EXAMPLE = Path(__file__).parents[1] / "docs" / "notebook_example.py"


class _Cells(HTMLParser):
    """The text of each <th>/<td> cell of an HTML table."""

    def __init__(self):
        super().__init__()
        self.cells, self.tables, self._in = [], 0, False

    def handle_starttag(self, tag, attrs):
        self.tables += tag == "table"
        if tag in ("th", "td"):
            self._in = True
            self.cells.append("")

    def handle_endtag(self, tag):
        if tag in ("th", "td"):
            self._in = False

    def handle_data(self, data):
        if self._in:
            self.cells[-1] += data


def _cells(html: str) -> tuple[int, list[str]]:
    p = _Cells()
    p.feed(html)
    return p.tables, p.cells


@pytest.fixture(scope="module")
def ns(tmp_path_factory):
    d = tmp_path_factory.mktemp("notebook")
    mp = pytest.MonkeyPatch()
    mp.setenv("SECTIO_EXAMPLE_DIR", str(d))
    try:
        return runpy.run_path(str(EXAMPLE), run_name="__main__")
    finally:
        mp.undo()


def test_example_measures_the_synthetic_truth(ns):
    # Exact truth of the synthetic images (sectio.synth): the same test lines on the true
    # grain map; the true section area fraction of each particle field.
    assert ns["grains"]["mean_intercept_um"] == pytest.approx(ns["true_um"], rel=0.03)
    assert ns["grains"]["n_fields"] == 2
    assert ns["particles"]["volume_fraction"] == pytest.approx(0.064, abs=0.006)
    lo, hi = ns["estimate"].yield_ci95_mpa
    assert lo < ns["estimate"].median_mpa < hi


def test_results_show_a_few_lines_and_a_small_table(ns):
    f, p = ns["fields"][0], ns["particle_fields"][0]
    objs = {"field": f, "particle field": p, "grains": ns["grains"],
            "particles": ns["particles"], "estimate": ns["estimate"]}
    for name, obj in objs.items():
        text = repr(obj)
        lines = text.splitlines()
        assert 4 <= len(lines) <= 16 and text.startswith("<"), (name, text)
        tables, cells = _cells(obj._repr_html_())
        assert tables == 1 and len(cells) == 2 * (len(lines) - 1), name
    # the numbers shown are the object's, to 4 significant figures
    assert f"{f.mean_intercept_um:.4g} µm" in repr(f)
    assert f"{100 * p.volume_fraction:.4g} %" in repr(p)
    g = ns["grains"]
    lo, hi = g["mean_intercept_ci95_um"]
    assert f"{g['mean_intercept_um']:.4g} µm (95 % CI {lo:.4g} – {hi:.4g})" in repr(g)
    _, cells = _cells(ns["particles"]._repr_html_())
    assert f"{ns['particles']['mean_ecd_um']:.4g} µm" in cells[cells.index("mean ECD") + 1]
    # an estimate always shows its interval, what it leaves out, assumptions and caution
    est = ns["estimate"]
    text = repr(est)
    assert f"95 % interval {est.yield_ci95_mpa[0]:.4g} – {est.yield_ci95_mpa[1]:.4g} MPa" in text
    assert "terms left out               particle" in text
    assert all(a in text for a in est.assumptions) and est.caution in text
    # summaries are still the plain JSON-ready dicts they were
    assert isinstance(g, dict) and dict(g) == g and "mean_intercept_um" in g


def test_import_sectio_exposes_the_documented_api():
    # every name the example and the package docstring use as sectio.NAME is public
    code = EXAMPLE.read_text(encoding="utf-8") + (sectio.__doc__ or "")
    used = {m for line in code.splitlines() if not line.lstrip().startswith(("from", "import"))
            for m in re.findall(r"\bsectio\.([a-z]\w*)", line)}
    assert used and used <= set(sectio.__all__), used - set(sectio.__all__)
    # in a fresh interpreter (no submodule imported before): every public name resolves
    out = subprocess.run(
        [sys.executable, "-c", "import sectio; print(sorted(n for n in sectio.__all__ "
         "if getattr(sectio, n) is not None and n in dir(sectio)))"],
        capture_output=True, text=True, check=True).stdout
    assert out.strip() == str(sorted(sectio.__all__))
    assert callable(sectio.strength.estimate_from_summaries)
    assert sectio.summarize_grains is sectio.grains.summarize_grains
