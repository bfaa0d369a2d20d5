"""The study report: self-contained HTML, renders in headless Chromium, PDF of the same."""

from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest

from sectio.study import load_study, run_study

CHROMIUM = shutil.which("chromium") or ("/usr/bin/chromium"
                                        if Path("/usr/bin/chromium").exists() else None)


@pytest.fixture(scope="module")
def report_run(image_dir, tmp_path_factory):
    from .conftest import STUDY_TOML

    d = tmp_path_factory.mktemp("report_study")
    for p in image_dir.iterdir():
        shutil.copy(p, d / p.name)
    # A third ageing time so that the LSW fit runs and is drawn.
    text = STUDY_TOML + ('\n[specimens.P-16h]\nimages = ["p004_f2.tif"]\nmeasure = '
                         '["particles"]\nmaterial = "al-age-hardening"\nseries = "ageing"\n'
                         'trial = { name = "ageing time", value = 16, unit = "h" }\n'
                         '\n[specimens.P-64h]\nimages = ["p004_f1.tif"]\nmeasure = '
                         '["particles"]\nmaterial = "al-age-hardening"\nseries = "ageing"\n'
                         'trial = { name = "ageing time", value = 64, unit = "h" }\n')
    (d / "study.toml").write_text(text, encoding="utf-8")
    out = d / "out"
    run = run_study(load_study(d / "study.toml"), out, workers=1)
    return run, out


def test_html_is_self_contained_and_carries_the_numbers(report_run):
    run, out = report_run
    html = (out / "report.html").read_text(encoding="utf-8")
    assert html.startswith("<!DOCTYPE html>")
    # No script and nothing fetched from the network: every image is a data: URI.
    assert "<script" not in html.lower()
    assert not re.search(r"""(src|href)\s*=\s*["']?(https?:|//)""", html)
    srcs = re.findall(r'<img[^>]*src="([^"]+)"', html)
    assert srcs and all(s.startswith("data:image/") for s in srcs)
    # Numbers are those of study.json (display rounding only).
    s600 = run.study_doc["specimens"][0]
    assert f"{s600['grains']['astm_g']:.2f}" in html
    y = s600["strength"]["yield_mpa"]
    assert f"{y['median']:.0f} MPa" in html and f"[{y['ci95'][0]:.0f}, {y['ci95'][1]:.0f}]" in html
    # Every strength estimate carries its caution, and the assumptions are listed.
    assert html.count("ASTM E8/E8M") >= 1 + len([s for s in run.study_doc["specimens"]
                                                 if s["strength"]])
    assert "Assumptions" in html
    co = run.study_doc["trends"][1]["coarsening"]
    assert co is not None and f"K = {co['rate_nm3_per_unit']:.4g} nm³/h" in html


def test_pdf_has_title_trend_and_specimen_pages(report_run):
    run, out = report_run
    data = (out / "report.pdf").read_bytes()
    assert data.startswith(b"%PDF-")
    n_pages = len(re.findall(rb"/Type\s*/Page[^s]", data))
    # title page + one page per trend series + two pages per specimen
    assert n_pages == 1 + len(run.study_doc["trends"]) + 2 * len(run.study_doc["specimens"])


def _render(html_path: Path, png: Path, profile: Path) -> subprocess.CompletedProcess:
    return subprocess.run(
        [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
         "--no-first-run", "--disable-background-networking", "--disable-component-update",
         "--disable-sync", f"--user-data-dir={profile}", "--enable-logging=stderr", "--v=0",
         f"--screenshot={png}", "--window-size=1280,2000", html_path.resolve().as_uri()],
        capture_output=True, text=True, timeout=120)


def _console_lines(stderr: str) -> list[str]:
    return [ln for ln in stderr.splitlines() if ":CONSOLE" in ln or "Uncaught" in ln]


@pytest.mark.skipif(CHROMIUM is None, reason="chromium is not installed")
def test_console_check_catches_a_broken_page(tmp_path):
    # Control: a page with a script error must be caught by the same check.
    bad = tmp_path / "bad.html"
    bad.write_text("<html><body><p>x</p><script>missingFunction();</script></body></html>")
    res = _render(bad, tmp_path / "bad.png", tmp_path / "profile")
    assert any("missingFunction" in ln for ln in _console_lines(res.stderr))


@pytest.mark.skipif(CHROMIUM is None, reason="chromium is not installed")
def test_report_renders_in_headless_chromium(report_run, tmp_path):
    from PIL import Image

    _, out = report_run
    png = tmp_path / "shot.png"
    res = _render(out / "report.html", png, tmp_path / "profile")
    assert png.is_file(), res.stderr[-2000:]
    assert _console_lines(res.stderr) == []
    grey = np.asarray(Image.open(png).convert("L"), float)
    assert grey.shape == (2000, 1280)
    assert grey.std() > 20  # text, tables and figures, not a blank page
    assert (grey < 200).mean() > 0.03
