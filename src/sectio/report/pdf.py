"""The study report as a PDF: the same content as the HTML report, on A4 landscape pages.

Pages are matplotlib figures written with ``PdfPages`` (no extra dependency): a title page
with the caution and the summary table, one page per trend series, and per specimen a page
of overlays and numbers and a page of histograms and the strength estimate.
"""

from __future__ import annotations

import io
import os
import textwrap
from pathlib import Path

import numpy as np

from ._io import atomic_write_bytes
from ._safe import plain_text_figures
from .figures import (
    INK,
    intercept_histogram,
    particle_size_histogram,
    png_bytes,
    strength_figure,
    trend_figure,
)
from .html import (
    GENERAL_CAUTION,
    HOW_TO_READ,
    ReportData,
    _trial,
    fit_text,
    fmt,
    fmt_ci,
)

__all__ = ["write_pdf_report"]

A4 = (11.69, 8.27)


def _page():
    from matplotlib.figure import Figure

    return Figure(figsize=A4, dpi=100)


def _text(fig, x, y, text, *, size=9, width=150, weight="normal", color=INK) -> float:
    """Write wrapped text from (x, y) in figure fractions downwards; returns the next y."""
    lines = []
    for para in str(text).split("\n"):
        lines.extend(textwrap.wrap(para, width) or [""])
    step = size * 1.45 / 72 / A4[1]
    for ln in lines:
        fig.text(x, y, ln, fontsize=size, weight=weight, color=color, va="top",
                 family="DejaVu Sans")
        y -= step
    return y


def _image(fig, rect, png: bytes) -> None:
    from PIL import Image

    ax = fig.add_axes(rect)
    ax.imshow(np.asarray(Image.open(io.BytesIO(png)).convert("RGB")))
    ax.set_axis_off()


def _title_page(data: ReportData):
    doc = data.study
    fig = _page()
    y = _text(fig, 0.05, 0.95, doc["title"], size=18, weight="bold", width=90)
    y = _text(fig, 0.05, y - 0.01, f"{doc.get('description') or ''} Study file "
              f"{doc['study_file']}, sectio {doc['sectio_version']}, Monte Carlo seed "
              f"{doc['settings']['seed']}, {doc['settings']['draws']} draws.", size=9)
    y = _header_block(fig, doc, y - 0.01)
    y = _text(fig, 0.05, y - 0.015, "CAUTION. " + GENERAL_CAUTION, size=9, weight="bold",
              color="#9b2c2c")
    head = (f"{'specimen':<14}{'trial':<30}{'G':>6}{'G 95% CI':>14}{'l_bar um':>10}"
            f"{'A_A %':>8}{'D_sph um':>10}{'yield MPa':>11}{'95% interval':>16}")
    rows = [head]
    for sd in data.specimens:
        e = sd.entry
        g, p, st = e.get("grains") or {}, e.get("particles") or {}, e.get("strength")
        af = p.get("area_fraction")
        rows.append(
            f"{e['name'][:13]:<14}{_trial(e)[:29]:<30}{fmt(g.get('astm_g'), '.1f'):>6}"
            f"{fmt_ci(g.get('astm_g_ci95'), '.1f') if g else '–':>14}"
            f"{fmt(g.get('mean_intercept_um'), '.3g'):>10}"
            f"{fmt(100 * af if af is not None else None, '.2f'):>8}"
            f"{fmt(p.get('mean_sphere_diameter_um'), '.3g'):>10}"
            f"{fmt(st['yield_mpa']['median'] if st else None, '.0f'):>11}"
            f"{fmt_ci(st['yield_mpa']['ci95'], '.0f') if st else '–':>16}")
    y -= 0.02
    for r in rows:
        fig.text(0.05, y, r, fontsize=8.5, family="DejaVu Sans Mono", va="top", color=INK)
        y -= 0.024
    y -= 0.02
    y = _text(fig, 0.05, y, "How to read this report", size=11, weight="bold")
    for k, v in HOW_TO_READ:
        y = _text(fig, 0.05, y - 0.004, f"{k}: {v}", size=8, width=175)
    return fig


def _header_block(fig, doc: dict, y: float) -> float:
    """Report header (two columns of label: value) and the specimen record table."""
    from ._document import RECORD_FIELDS, header_rows, record_rows

    rows = header_rows(doc)
    half = (len(rows) + 1) // 2
    y0 = y
    for col, part in enumerate((rows[:half], rows[half:])):
        yy = y0
        for label, value in part:
            fig.text(0.05 + col * 0.45, yy, f"{label}:", fontsize=8.5, weight="bold",
                     va="top", color=INK)
            yy = _text(fig, 0.19 + col * 0.45, yy, value, size=8.5, width=58)
        y = min(y, yy)
    widths = (14, 20, 24, 18, 16, 12, 26)
    head = ["specimen", "material class"] + [label for _, label in RECORD_FIELDS]
    y -= 0.012
    for r in [head] + record_rows(doc):
        line = "".join(str(c)[: w - 1].ljust(w) for c, w in zip(r, widths, strict=False))
        fig.text(0.05, y, line, fontsize=7.5, family="DejaVu Sans Mono", va="top", color=INK)
        y -= 0.02
    return y


def _crop_pages(sd) -> list:
    """Pages of 1:1 crops (figimage: one image pixel per pixel at 100 dpi), six a page."""
    from PIL import Image

    from ._document import overlay_crop_png

    crops = []
    for caption, path, _link, px in sd.overlays:
        data = overlay_crop_png(path, px, size=300)
        if data:
            crops.append((caption, np.asarray(Image.open(io.BytesIO(data)).convert("RGB"))))
    pages = []
    for start in range(0, len(crops), 6):
        fig = _page()
        _text(fig, 0.04, 0.96, f"{sd.entry['name']}: overlays at 1:1 (centre of each field; "
              "the whole fields are in the specimen folder at full resolution)", size=11,
              weight="bold")
        for i, (caption, arr) in enumerate(crops[start:start + 6]):
            row, col = divmod(i, 3)
            xo, yo = 60 + col * 370, 460 - row * 370
            fig.figimage(arr, xo=xo, yo=yo, origin="upper")
            fig.text(xo / 1169, (yo - 4) / 827, caption[:55], fontsize=7, va="top",
                     color="#5a6472")
        pages.append(fig)
    return pages


def _signoff_page(doc: dict):
    from matplotlib.lines import Line2D
    from matplotlib.patches import Rectangle

    from ._document import BLANK, SIGNOFF_ROLES

    fig = _page()
    rep = doc.get("report") or {}
    y = _text(fig, 0.05, 0.95, "Sign-off", size=15, weight="bold")
    _text(fig, 0.05, y, "Results checked against the overlays and the caution of this "
          "report.", size=9)
    for i, (key, role) in enumerate(SIGNOFF_ROLES):
        x = 0.05 + i * 0.31
        fig.patches.append(Rectangle((x, 0.52), 0.28, 0.30, transform=fig.transFigure,
                                     fill=False, ec="#8a939e", lw=0.8))
        fig.text(x + 0.01, 0.80, role, fontsize=10, weight="bold", va="top", color=INK)
        fig.text(x + 0.01, 0.76, rep.get(key) or BLANK, fontsize=9, va="top", color=INK)
        for yy, label in ((0.66, "signature"), (0.57, "date")):
            fig.add_artist(Line2D([x + 0.01, x + 0.27], [yy, yy], transform=fig.transFigure,
                                  color=INK, lw=0.8))
            fig.text(x + 0.01, yy - 0.008, label, fontsize=7, va="top", color="#5a6472")
    _text(fig, 0.05, 0.45, "CAUTION. " + GENERAL_CAUTION, size=9, weight="bold",
          color="#9b2c2c")
    return fig


def _specimen_pages(sd):
    e = sd.entry
    pages = []
    fig = _page()
    y = _text(fig, 0.04, 0.96, e["name"], size=15, weight="bold")
    y = _text(fig, 0.04, y, f"{e.get('description') or ''}  trial: {_trial(e)}; series: "
              f"{e.get('series') or '–'}; material: {e.get('material') or '–'}", size=9)
    from .html import overlay_jpeg

    ovs = [(c, overlay_jpeg(p, max_px=600)) for c, p, *_ in sd.overlays]
    ovs = [(c, d) for c, d in ovs if d]
    n = min(len(ovs), 3)
    for i, (cap, data) in enumerate(ovs[:n]):
        _image(fig, (0.04 + i * 0.32, 0.36, 0.30, 0.50), data)
        fig.text(0.04 + i * 0.32, 0.35, cap[:60], fontsize=7, va="top", color="#5a6472")
    if len(ovs) > n:
        fig.text(0.04, 0.32, f"(+{len(ovs) - n} more overlay(s) in the specimen folder)",
                 fontsize=7, va="top", color="#5a6472")
    y = 0.29
    g = (sd.grains or {}).get("summary") or {}
    if g.get("n_fields"):
        y = _text(fig, 0.04, y, f"Grain size: G = {fmt(g['astm_g'], '.2f')} (95 % CI "
                  f"{fmt_ci(g.get('astm_g_ci95'), '.2f')}); mean lineal intercept "
                  f"{fmt(g['mean_intercept_um'], '.3g', 'µm')} (95 % CI "
                  f"{fmt_ci(g.get('mean_intercept_ci95_um'), '.3g', 'µm')}), relative accuracy "
                  f"{fmt(g.get('relative_accuracy_pct'), '.1f', '%')}, {g['n_fields']} field(s), "
                  f"interval from {g.get('ci_basis')}.", size=9)
    p = (sd.particles or {}).get("summary") or {}
    if p.get("n_fields"):
        ci = p.get("area_fraction_ci95")
        y = _text(fig, 0.04, y - 0.005, "Particles: area fraction "
                  f"{fmt(100 * p['area_fraction'], '.2f', '%')} (95 % CI "
                  f"{fmt_ci([100 * v for v in ci] if ci else None, '.2f', '%')}); mean section "
                  f"diameter {fmt(p.get('mean_ecd_um'), '.3g', 'µm')}; mean sphere diameter "
                  f"{fmt(p.get('mean_sphere_diameter_um'), '.3g', 'µm')} (95 % CI "
                  f"{fmt_ci(p.get('mean_sphere_diameter_ci95_um'), '.3g', 'µm')}); "
                  f"{p.get('particles_counted')} whole particles, {p['n_fields']} field(s).",
                  size=9)
    for f in e.get("failed", []):
        y = _text(fig, 0.04, y - 0.005, f"Not measured: {f['image']} ({f['kind']}): "
                  f"{f['reason']}", size=8, color="#9b2c2c")
    pages.append(fig)

    fig = _page()
    _text(fig, 0.04, 0.96, f"{e['name']}: distributions and strength", size=13, weight="bold")
    x = 0.04
    if g.get("n_fields"):
        h = intercept_histogram(sd.intercepts_um, mean_intercept_um=g["mean_intercept_um"],
                                ci95=g.get("mean_intercept_ci95_um"), title="Intercept lengths",
                                pixel_size_um=sd.pixel_size_um)
        _image(fig, (x, 0.55, 0.45, 0.36), png_bytes(h))
        x += 0.48
    if p.get("n_fields"):
        h = particle_size_histogram(sd.particle_ecd_um, sd.particle_weights, summary=p,
                                    title="Particle section sizes")
        _image(fig, (x, 0.55, 0.45, 0.36), png_bytes(h))
    st = sd.strength
    if st:
        _image(fig, (0.04, 0.22, 0.62, 0.31), png_bytes(strength_figure(st)))
        y = _text(fig, 0.68, 0.52, f"Yield estimate: {st['yield_mpa']['median']:.0f} MPa "
                  f"(median), 95 % interval {fmt_ci(st['yield_mpa']['ci95'], '.0f', 'MPa')}",
                  size=9, weight="bold", width=48)
        y = _text(fig, 0.68, y - 0.01, "Assumptions:", size=7, weight="bold")
        for a in st.get("assumptions", []):
            y = _text(fig, 0.69, y, "• " + a, size=6.5, width=66)
        for fl in st.get("flags", []) + st.get("warnings", []):
            y = _text(fig, 0.68, y - 0.005, "Flag: " + fl, size=6.5, width=68)
        _text(fig, 0.04, 0.17, "CAUTION. " + st["caution"], size=8.5, weight="bold",
              color="#9b2c2c", width=140)
        pages.append(fig)
        fig = _constants_page(e["name"], st)
    elif e.get("strength_note"):
        _text(fig, 0.04, 0.50, "Strength: " + e["strength_note"], size=9)
    if fig is not None:
        pages.append(fig)
    return pages[:1] + _crop_pages(sd) + pages[1:]


def _constants_page(name: str, st: dict):
    from ._document import constants_rows

    rows = constants_rows(st)
    if not rows:
        return None
    fig = _page()
    y = _text(fig, 0.04, 0.96, f"{name}: constants used in the strength estimate", size=13,
              weight="bold")
    y -= 0.01
    for label, value, unc, source in rows:
        fig.text(0.04, y, label, fontsize=8, weight="bold", va="top", color=INK)
        fig.text(0.25, y, value, fontsize=8, va="top", color=INK)
        fig.text(0.37, y, unc, fontsize=8, va="top", color=INK)
        y = min(y - 0.03, _text(fig, 0.52, y, source, size=7, width=90) - 0.008)
    return fig


@plain_text_figures
def write_pdf_report(path: str | os.PathLike, data: ReportData) -> Path:
    """Write the PDF report (see :func:`sectio.report.html.report_data`) atomically (0644),
    every page numbered "page N of M"."""
    from matplotlib.backends.backend_pdf import PdfPages

    study_doc = data.study
    pages = [_title_page(data)]
    for t in study_doc.get("trends", []):
        fig = _page()
        _text(fig, 0.04, 0.96, f"Trend: series {t['series']}", size=13, weight="bold")
        _image(fig, (0.03, 0.30, 0.94, 0.60), png_bytes(trend_figure(t), dpi=150))
        y = 0.27
        for key, name, unit in (("coarsening", "LSW coarsening K", "nm³"),
                                ("grain_growth", "parabolic growth k", "µm²")):
            fit = t.get(key)
            if fit:
                rate = fit["rate_nm3_per_unit" if key == "coarsening"
                           else "rate_um2_per_unit"]
                ci = fit["rate_ci95_nm3_per_unit" if key == "coarsening"
                         else "rate_ci95_um2_per_unit"]
                y = _text(fig, 0.05, y, f"{name} = {fmt(rate, '.4g')} {unit}/"
                          f"{fit['time_unit']}, 95 % CI {fmt_ci(ci, '.3g')} "
                          f"({fit['law']}; {fit_text(fit['fit'])})", size=9)
        for n in t.get("notes", []):
            y = _text(fig, 0.05, y, n, size=8)
        pages.append(fig)
    for sd in data.specimens:
        pages.extend(_specimen_pages(sd))
    pages.append(_signoff_page(study_doc))
    number = (study_doc.get("report") or {}).get("number")
    label = f"Report {number} · " if number else ""
    buf = io.BytesIO()
    with PdfPages(buf, metadata={"Title": study_doc["title"], "Creator": "sectio",
                                 "CreationDate": None}) as pdf:
        for i, fig in enumerate(pages, start=1):
            fig.text(0.5, 0.012, f"{label}{study_doc['title'][:80]} · page {i} of "
                     f"{len(pages)}", ha="center", va="bottom", fontsize=7, color="#5a6472")
            pdf.savefig(fig)
    return atomic_write_bytes(path, buf.getvalue())
