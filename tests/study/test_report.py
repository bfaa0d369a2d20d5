"""The study report: self-contained HTML, renders in headless Chromium, PDF of the same."""

from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest

from sectio.study import load_study, run_study, with_report_fields

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
    # Header fields from the study file's [report] table, one from the command-line path.
    text = text.replace("bootstrap = 50\n", "bootstrap = 50\n\n" + REPORT_TABLE)
    text = text.replace("[specimens.S-600]\n", "[specimens.S-600]\n" + S600_RECORD)
    (d / "study.toml").write_text(text, encoding="utf-8")
    out = d / "out"
    study = with_report_fields(load_study(d / "study.toml"), operator="T. Tester (test)")
    run = run_study(study, out, workers=1)
    return run, out


REPORT_TABLE = """[report]
number = "QA-7781"
date = "2026-11-30"
laboratory = "Test laboratory (invented)"
standards = ["ASTM E112-13", "ASTM E562-19"]
approved_by = "R. Approver (invented)"
etchant = "2 % nital"
objective = "50× / 0.80"
instrument = "light microscope"

"""
S600_RECORD = 'heat = "heat 4471 (invented)"\nmagnification = "500×"\n'



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


def test_pdf_pages_numbered_header_crops_signoff(report_run):
    from pypdf import PdfReader

    run, out = report_run
    data = (out / "report.pdf").read_bytes()
    assert data.startswith(b"%PDF-")
    pages = [p.extract_text() for p in PdfReader(out / "report.pdf").pages]
    n = len(pages)
    specs = run.study_doc["specimens"]
    # title + trends + per specimen: numbers, 1:1 crops, distributions (+ constants when a
    # strength estimate exists) + the sign-off page
    n_strength = len([s for s in specs if s["strength"]])
    assert n == 1 + len(run.study_doc["trends"]) + 3 * len(specs) + n_strength + 1
    for i, text in enumerate(pages, start=1):
        assert f"page {i} of {n}" in text
        assert "QA-7781" in text
    for value in ("2026-11-30", "Test laboratory", "ASTM E562-19", "T. Tester",
                  "heat 4471", "2 % nital"):
        assert value in pages[0].replace("\n", " ")
    assert "overlays at 1:1" in " ".join(pages)
    assert "Sign-off" in pages[-1] and "R. Approver" in pages[-1]
    assert "constants used" in " ".join(pages)


def test_html_header_signoff_links_and_permissions(report_run):
    from PIL import Image

    run, out = report_run
    html = (out / "report.html").read_text(encoding="utf-8")
    for value in ("QA-7781", "2026-11-30", "Test laboratory (invented)",
                  "ASTM E112-13; ASTM E562-19", "T. Tester (test)", "heat 4471 (invented)",
                  "500×", "50× / 0.80", "light microscope", "Approved by",
                  "R. Approver (invented)", "Checked by"):
        assert value in html, value
    # Every field's full-resolution overlay is linked (relative) and is the stored PNG.
    links = re.findall(r"<a class=full href='([^']+)'>", html)
    n_fields = sum(len(s["fields"]) for s in run.study_doc["specimens"])
    assert len(links) == n_fields
    for link in links:
        png = out / link
        assert png.is_file() and not Path(link).is_absolute()
        with Image.open(png) as im:
            w, h = im.size
        assert w >= 256 and h >= 256
    assert html.count("at 1:1") == n_fields
    # The constants behind each estimate, with their sources.
    assert "Constants used" in html and "σ0 friction stress" in html
    assert "Cordero" not in html or "table S1" in html
    # All outputs are ordinary readable files (0644), the PDF included.
    for f in out.rglob("*"):
        if f.is_file():
            assert f.stat().st_mode & 0o777 == 0o644, f


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
