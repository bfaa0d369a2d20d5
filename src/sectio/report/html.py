"""One self-contained HTML file per study: figures embedded as base64, inline CSS, no script.

The report is rendered from the study document and the per-specimen documents as built in
memory (:func:`report_data`); it never recomputes a measurement. The same data feeds
the PDF (:mod:`sectio.report.pdf`). Plain string building with :func:`html.escape`; no
template engine.
"""

from __future__ import annotations

import base64
import html
import io
import os
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path

from ._io import atomic_write_text
from ._safe import plain_text_figures

__all__ = ["ReportData", "SpecimenData", "report_data", "render_html",
           "write_html_report", "fmt", "fmt_ci"]

GENERAL_CAUTION = (
    "Every yield strength in this report is a model estimate from the measured microstructure "
    "and handbook constants. It is not a measured property, no substitute for tensile testing "
    "to the governing standard (ASTM E8/E8M, ISO 6892-1) and not a design allowable; defer to "
    "applicable codes and licensed engineering judgement."
)

HOW_TO_READ = [
    ("Grain size",
     "The mean lineal intercept is the average distance between grain boundaries along "
     "straight test lines (ASTM E112 / E1382); G is the ASTM grain size number (larger G = "
     "finer grains). The 95 % interval comes from the spread between fields (Student t); "
     "with one field it comes from sub-regions of that field and is only a lower bound."),
    ("Particles",
     "The area fraction of particles equals their volume fraction (Delesse). Section sizes "
     "are what the plane of polish cuts; the mean sphere diameter is the Schwartz–Saltykov "
     "unfolding of those sections into spheres, with an interval from the spread between fields."),
    ("Strength",
     "Each contribution (friction stress, Hall–Petch, Orowan, ...) is drawn many times from "
     "the uncertainty of its inputs (Monte Carlo); the bar shows the median and 95 % "
     "interval. 'Sources of uncertainty' ranks the inputs by the share of the "
     "variance of the total they carry: improve the biggest one first."),
    ("Trends",
     "Error bars are 95 % intervals. For a time series the report fits the LSW coarsening law "
     "r³ − r0³ = K·t to the particle radii and the parabolic law d² − d0² = k·t to the grain "
     "size; K and k carry 95 % intervals from Student t with n − 2 residual degrees of "
     "freedom; a fit with fewer than 2 (three specimens) is flagged: its R² says nothing."),
    ("Overlays",
     "Check them before trusting a number: grain overlays draw the detected boundaries in "
     "amber, a subset of test lines in blue and crossings in magenta; particle overlays "
     "outline counted particles in cyan, particles cut by the field edge in yellow and "
     "split lines in pink."),
]


def fmt(v, spec: str = ".3g", unit: str = "") -> str:
    """Display a number (None shows as an en dash); rounding is for display only."""
    if v is None:
        return "–"
    return f"{format(v, spec)}{(' ' + unit) if unit else ''}"


def fmt_ci(ci, spec: str = ".3g", unit: str = "") -> str:
    """Display an interval ``[low, high]``; "no interval" when an end is missing."""
    if not ci or ci[0] is None or ci[1] is None:
        return "no interval"
    return f"[{format(ci[0], spec)}, {format(ci[1], spec)}]{(' ' + unit) if unit else ''}"


@dataclass
class SpecimenData:
    """What the report shows of one specimen (documents, overlays, histogram data)."""

    entry: dict
    grains: dict | None = None
    particles: dict | None = None
    strength: dict | None = None
    overlays: list = field(default_factory=list)  # (caption, png path, link, pixel size µm)
    rejected: list = field(default_factory=list)  # fields rejected by hand, with reasons
    intercepts_um: list = field(default_factory=list)
    pixel_size_um: float | None = None  # of the grain fields (bins of the chord histogram)
    particle_ecd_um: list = field(default_factory=list)
    particle_weights: list = field(default_factory=list)


@dataclass
class ReportData:
    """The study document and the report data of every specimen."""

    study: dict
    specimens: list[SpecimenData]


@plain_text_figures
def report_data(study_doc: dict, documents: Mapping[str, Mapping],
                out_dir: str | os.PathLike) -> ReportData:
    """Collect what the report shows: the study document and the in-memory documents.

    ``documents[name]`` holds the specimen's ``grains`` and ``particles``
    (:class:`sectio.specimen.ResultDocument` or None) and ``strength`` (document or None),
    as :func:`sectio.study.run_study` builds them; only the overlay pictures are read from
    ``out_dir``. Values are taken as written to JSON (NaN as None).
    """
    from ._io import jsonable

    out = Path(out_dir)
    specs = []
    for e in study_doc["specimens"]:
        sd = SpecimenData(entry=e)
        d = documents[e["name"]]
        grains, particles = d.get("grains"), d.get("particles")
        sd.grains = jsonable(grains.doc) if grains is not None else None
        sd.particles = jsonable(particles.doc) if particles is not None else None
        sd.strength = jsonable(d["strength"]) if d.get("strength") is not None else None
        gf = (sd.grains or {}).get("fields") or []
        px = {f.get("pixel_size_um") for f in gf}
        sd.pixel_size_um = px.pop() if len(px) == 1 else None
        for kind, doc in (("grains", sd.grains), ("particles", sd.particles)):
            for f in (doc or {}).get("fields", []):
                sd.overlays.append((f"{kind}: {f['image']}{_edit_mark(f)}",
                                    out / e["name"] / f["overlay_png"],
                                    f"{e['name']}/{f['overlay_png']}", f.get("pixel_size_um")))
            sd.rejected.extend({"kind": kind, **r} for r in (doc or {}).get("rejected") or [])
        if grains is not None:
            sd.intercepts_um = grains.intercepts_um()
        if particles is not None:
            ecd, weights = particles.whole_sections()
            sd.particle_ecd_um, sd.particle_weights = ecd.tolist(), weights.tolist()
        specs.append(sd)
    return ReportData(study_doc, specs)


def _edit_mark(f: dict) -> str:
    """" — corrected by hand: 3 edits (reviewed)" for a field with hand edits."""
    e = f.get("edits") or {}
    parts = []
    if e.get("count"):
        n = e["count"]
        parts.append(f"corrected by hand: {n} edit{'s' if n != 1 else ''}")
    if e.get("status") == "reviewed":
        parts.append("reviewed" + (f" by {e['by']}" if e.get("by") else ""))
    return (" — " + ", ".join(parts)) if parts else ""


# ----------------------------------------------------------------------------- pieces
CSS = """
body{font:15px/1.5 "DejaVu Sans",Helvetica,Arial,sans-serif;color:#1d2430;margin:0;
background:#f4f5f7}
main{max-width:1180px;margin:0 auto;padding:24px 28px 60px;background:#fff}
h1{font-size:26px;margin:8px 0 4px}h2{font-size:21px;margin:36px 0 8px;
border-bottom:2px solid #1f6f78;padding-bottom:4px}h3{font-size:17px;margin:22px 0 6px}
.sub{color:#5a6472;margin:0 0 14px}
.caution{border-left:5px solid #9b2c2c;background:#fbf1ef;padding:10px 14px;margin:14px 0}
.note{border-left:5px solid #b7791f;background:#fcf6ea;padding:8px 14px;margin:10px 0}
table{border-collapse:collapse;margin:8px 0 14px;font-size:14px}
th,td{border-bottom:1px solid #dde1e6;padding:5px 10px;text-align:left;vertical-align:top}
th{background:#eef1f4;font-weight:600}td.n{text-align:right;font-variant-numeric:tabular-nums}
.grid{display:flex;flex-wrap:wrap;gap:12px}
figure{margin:0;flex:0 1 auto}figure img{max-width:100%;border:1px solid #dde1e6}
figcaption{font-size:12px;color:#5a6472}
.ov img{width:360px}.fig img{width:540px}.wide img{width:1000px}
.crop img{max-width:none;image-rendering:pixelated}
table.hdr td:first-child{font-weight:600;width:190px}
.signoff{display:flex;gap:28px;margin:18px 0 8px}.signoff div{flex:1;border:1px solid #c9cfd6;
padding:10px 12px;min-height:110px}.signoff .line{border-bottom:1px solid #1d2430;
height:34px;margin:6px 0 2px}.signoff small{color:#5a6472}
@media print{body{background:#fff}main{max-width:none;padding:0}}
.spec{border-top:1px solid #dde1e6;margin-top:30px}
.big{font-size:20px;font-weight:600}.muted{color:#5a6472}
ul{margin:4px 0 10px}dl.read dt{font-weight:600;margin-top:8px}dl.read dd{margin:0 0 0 16px}
footer{margin-top:40px;color:#5a6472;font-size:12px}
"""


def _e(v) -> str:
    return html.escape(str(v), quote=True)


def _img(data: bytes, mime: str, alt: str) -> str:
    return (f'<img alt="{_e(alt)}" src="data:{mime};base64,'
            f'{base64.b64encode(data).decode("ascii")}">')


def _fig(fig, alt: str, cls: str = "fig") -> str:
    from .figures import png_bytes

    return f'<figure class="{cls}">{_img(png_bytes(fig), "image/png", alt)}</figure>'


def overlay_jpeg(path: Path, *, max_px: int = 720) -> bytes | None:
    """The overlay as a JPEG small enough to embed (the PNG stays in the folder)."""
    from PIL import Image

    try:
        im = Image.open(path).convert("RGB")
    except OSError:
        return None
    if max(im.size) > max_px:
        s = max_px / max(im.size)
        im = im.resize((round(im.width * s), round(im.height * s)), Image.Resampling.LANCZOS)
    buf = io.BytesIO()
    im.save(buf, format="JPEG", quality=85, optimize=True)
    return buf.getvalue()


def _trial(e: dict) -> str:
    t = e.get("trial")
    return f"{t['name']} {t['value']:g} {t['unit']}".strip() if t else "–"


def _summary_table(data: ReportData) -> str:
    rows = []
    for sd in data.specimens:
        e = sd.entry
        g, p, st = e.get("grains") or {}, e.get("particles") or {}, e.get("strength")
        af = p.get("area_fraction")
        afci = p.get("area_fraction_ci95")
        rows.append(
            "<tr>"
            f"<td><a href='#{_e(e['name'])}'>{_e(e['name'])}</a></td><td>{_e(_trial(e))}</td>"
            f"<td class=n>{fmt(g.get('astm_g'), '.1f')}</td>"
            f"<td class=n>{fmt_ci(g.get('astm_g_ci95'), '.1f') if g else '–'}</td>"
            f"<td class=n>{fmt(g.get('mean_intercept_um'), '.3g', 'µm')}</td>"
            f"<td class=n>{fmt(100 * af if af is not None else None, '.2f', '%')} "
            f"{fmt_ci([100 * v for v in afci], '.2f') if afci else ''}</td>"
            f"<td class=n>{fmt(p.get('mean_sphere_diameter_um'), '.3g', 'µm')}</td>"
            + (f"<td class=n><b>{st['yield_mpa']['median']:.0f} MPa</b> "
               f"{fmt_ci(st['yield_mpa']['ci95'], '.0f')}</td>" if st else
               "<td class=muted>–</td>")
            + f"<td class=n>{len([f for f in e['fields'] if f['status'] == 'ok'])}"
            f"/{len(e['fields'])}</td></tr>")
    return ("<table><tr><th>specimen</th><th>trial</th><th>G</th><th>G 95 % CI</th>"
            "<th>mean intercept</th><th>area fraction, 95 % CI</th><th>mean sphere diam.</th>"
            "<th>yield estimate, 95 % interval</th><th>fields ok</th></tr>"
            + "".join(rows) + "</table>")


def fit_text(fit: dict) -> str:
    """Method, n, residual degrees of freedom and R² of a trend fit, with its flag."""
    dof = fit.get("dof")
    base = f"{fit['method'].upper()}, n = {fit['n']}, {dof} residual dof"
    if "fewer_than_2_residual_dof" in (fit.get("flags") or []):
        return (base + " — FLAG: fewer than 2 residual degrees of freedom; the points nearly "
                "fix the line, so R² means nothing and the interval rests on t(0.975, "
                f"{dof})")
    return base + f", R² = {fmt(fit['r_squared'], '.3f')}"


def _fit_text(fit: dict) -> str:
    return _e(fit_text(fit))


def _trend_html(trend: dict) -> str:
    from .figures import trend_figure

    parts = [f"<h3>Series {_e(trend['series'])}: against {_e(trend['variable'])}"
             f"{' (' + _e(trend['unit']) + ')' if trend['unit'] else ''}</h3>",
             _fig(trend_figure(trend), f"trend of series {trend['series']}", "wide")]
    fits = []
    co = trend.get("coarsening")
    if co:
        u = co["time_unit"]
        fits.append(
            f"<tr><td>particle coarsening, {_e(co['law'])}</td>"
            f"<td class=n>K = {fmt(co['rate_nm3_per_unit'], '.4g')} nm³/{_e(u)}</td>"
            f"<td class=n>{fmt_ci(co['rate_ci95_nm3_per_unit'], '.3g', f'nm³/{u}')}</td>"
            f"<td class=n>r0 = {fmt(co['initial_radius_nm'], '.3g', 'nm')}</td>"
            f"<td>{_fit_text(co['fit'])}</td></tr>")
    gg = trend.get("grain_growth")
    if gg:
        u = gg["time_unit"]
        fits.append(
            f"<tr><td>grain growth, {_e(gg['law'])}</td>"
            f"<td class=n>k = {fmt(gg['rate_um2_per_unit'], '.4g')} µm²/{_e(u)}</td>"
            f"<td class=n>{fmt_ci(gg['rate_ci95_um2_per_unit'], '.3g', f'µm²/{u}')}</td>"
            f"<td class=n>d0 = {fmt(gg['initial_size_um'], '.3g', 'µm')}</td>"
            f"<td>{_fit_text(gg['fit'])}</td></tr>")
    if fits:
        parts.append("<table><tr><th>law</th><th>rate</th><th>95 % CI</th><th>start</th>"
                     "<th>fit</th></tr>" + "".join(fits) + "</table>")
    elif not trend["is_time"]:
        parts.append("<p class=muted>The trial variable is not a time, so no kinetic law is "
                     "fitted; the points show the measured trend.</p>")
    for n in trend.get("notes", []):
        parts.append(f"<p class=muted>{_e(n)}</p>")
    return "".join(parts)


def _strength_html(st: dict) -> str:
    from .figures import strength_figure

    y = st["yield_mpa"]
    mat = st["inputs"].get("material", {})
    out = [f"<h3>Yield strength estimate</h3><p><span class=big>{y['median']:.0f} MPa</span> "
           f"(median), 95 % interval {fmt_ci(y['ci95'], '.0f', 'MPa')} — "
           f"{_e(mat.get('yield_definition', 'yield stress'))}, material class "
           f"<i>{_e(mat.get('name', ''))}</i>: {_e(mat.get('description', ''))}</p>",
           _fig(strength_figure(st), "yield estimate contributions", "wide")]
    if st.get("assumptions"):
        out.append("<p><b>Assumptions</b></p><ul>"
                   + "".join(f"<li>{_e(a)}</li>" for a in st["assumptions"]) + "</ul>")
    for key, label in (("flags", "Flags"), ("warnings", "Warnings")):
        if st.get(key):
            out.append(f"<div class=note><b>{label}:</b><ul>"
                       + "".join(f"<li>{_e(a)}</li>" for a in st[key]) + "</ul></div>")
    from ._document import constants_rows

    rows = constants_rows(st)
    if rows:
        out.append("<p><b>Constants used</b></p><table><tr><th>constant</th><th>value</th>"
                   "<th>uncertainty</th><th>source</th></tr>" + "".join(
                       "<tr>" + "".join(f"<td>{_e(c)}</td>" for c in r) + "</tr>"
                       for r in rows) + "</table>")
    out.append(f"<div class=caution><b>Caution.</b> {_e(st['caution'])}</div>")
    return "".join(out)


def _specimen_html(sd: SpecimenData) -> str:
    from .figures import intercept_histogram, particle_size_histogram

    e = sd.entry
    out = [f"<section class=spec id='{_e(e['name'])}'><h2>{_e(e['name'])}</h2>",
           f"<p class=sub>{_e(e.get('description') or '')} · trial: {_e(_trial(e))} · "
           f"series: {_e(e.get('series') or '–')} · material: {_e(e.get('material') or '–')}"
           "</p>"]
    from urllib.parse import quote

    from ._document import overlay_crop_png

    ovs = []
    for caption, path, link, px in sd.overlays:
        data = overlay_jpeg(path)
        if data:
            href = quote(link)
            crop = overlay_crop_png(path, px)
            ovs.append(
                "<div class=grid>"
                f"<figure class=ov><a href='{_e(href)}'>{_img(data, 'image/jpeg', caption)}</a>"
                f"<figcaption>{_e(caption)} · whole field, reduced · "
                f"<a class=full href='{_e(href)}'>full-resolution overlay (PNG)</a>"
                "</figcaption></figure>"
                + (f"<figure class=crop>{_img(crop, 'image/png', caption + ' 1:1 crop')}"
                   "<figcaption>centre of the field at 1:1 (one image pixel per screen "
                   "pixel)</figcaption></figure>" if crop else "")
                + "</div>")
    if ovs:
        out.append("<h3>Overlays</h3>" + "".join(ovs))
    if sd.grains:
        s = sd.grains["summary"]
        if s.get("n_fields"):
            out.append(
                "<h3>Grain size</h3><table>"
                f"<tr><td>ASTM E112 grain size number G (from the intercept)</td>"
                f"<td class=n><b>{fmt(s['astm_g'], '.2f')}</b></td>"
                f"<td>95 % CI {fmt_ci(s.get('astm_g_ci95'), '.2f')}</td></tr>"
                f"<tr><td>mean lineal intercept</td>"
                f"<td class=n>{fmt(s['mean_intercept_um'], '.3g', 'µm')}</td>"
                f"<td>95 % CI {fmt_ci(s.get('mean_intercept_ci95_um'), '.3g', 'µm')}; "
                f"relative accuracy {fmt(s.get('relative_accuracy_pct'), '.1f', '%')}</td></tr>"
                f"<tr><td>grains per mm² (planimetric)</td>"
                f"<td class=n>{fmt(s.get('grains_per_mm2'), '.4g')}</td>"
                f"<td>G (planimetric) {fmt(s.get('astm_g_planimetric'), '.2f')}</td></tr>"
                f"<tr><td>fields, crossings counted</td><td class=n>{s['n_fields']}</td>"
                f"<td>{s.get('intercept_count_total')} crossings; interval from "
                f"{_e(s.get('ci_basis'))}</td></tr></table>")
            out.append(_fig(intercept_histogram(
                sd.intercepts_um, mean_intercept_um=s["mean_intercept_um"],
                ci95=s.get("mean_intercept_ci95_um"), pixel_size_um=sd.pixel_size_um,
                title=f"{e['name']}: intercept lengths"), "intercept histogram"))
    if sd.particles:
        s = sd.particles["summary"]
        if s.get("n_fields"):
            af = s.get("area_fraction")
            ci = s.get("area_fraction_ci95")
            out.append(
                "<h3>Particles</h3><table>"
                f"<tr><td>area fraction = volume fraction</td>"
                f"<td class=n><b>{fmt(100 * af, '.2f', '%')}</b></td>"
                f"<td>95 % CI {fmt_ci([100 * v for v in ci] if ci else None, '.2f', '%')}"
                f"</td></tr>"
                f"<tr><td>mean section diameter (ECD)</td>"
                f"<td class=n>{fmt(s.get('mean_ecd_um'), '.3g', 'µm')}</td>"
                f"<td>95 % CI {fmt_ci(s.get('mean_ecd_ci95_um'), '.3g', 'µm')}</td></tr>"
                f"<tr><td>mean sphere diameter (Saltykov)</td>"
                f"<td class=n>{fmt(s.get('mean_sphere_diameter_um'), '.3g', 'µm')}</td>"
                f"<td>95 % CI {fmt_ci(s.get('mean_sphere_diameter_ci95_um'), '.3g', 'µm')}"
                f" ({_e(s.get('mean_sphere_diameter_basis') or '')})</td></tr>"
                f"<tr><td>particles per µm²</td>"
                f"<td class=n>{fmt(s.get('particles_per_um2'), '.4g')}</td>"
                f"<td>{s.get('particles_counted')} whole particles in {s['n_fields']} "
                f"field(s); interval from {_e(s.get('basis'))}</td></tr></table>")
            out.append(_fig(particle_size_histogram(
                sd.particle_ecd_um, sd.particle_weights, summary=s,
                title=f"{e['name']}: particle section sizes"), "particle size histogram"))
    if sd.strength:
        out.append(_strength_html(sd.strength))
    elif e.get("strength_note"):
        out.append(f"<p class=muted>Strength: {_e(e['strength_note'])}</p>")
    if e.get("failed"):
        out.append("<div class=note><b>Fields not measured:</b><ul>" + "".join(
            f"<li>{_e(f['image'])} ({_e(f['kind'])}): {_e(f['reason'])}</li>"
            for f in e["failed"]) + "</ul></div>")
    if sd.rejected:
        out.append("<div class=note><b>Fields rejected by hand (left out of the statistics):"
                   "</b><ul>" + "".join(
                       f"<li>{_e(r['image'])} ({_e(r['kind'])}): {_e(r['reason'])}</li>"
                       for r in sd.rejected) + "</ul></div>")
    if e.get("warnings"):
        out.append("<p class=muted>Notes: " + "; ".join(_e(w) for w in e["warnings"]) + "</p>")
    out.append("</section>")
    return "".join(out)


def _header_html(doc: dict) -> str:
    from ._document import RECORD_FIELDS, header_rows, record_rows

    head = "".join(f"<tr><td>{_e(k)}</td><td>{_e(v)}</td></tr>" for k, v in header_rows(doc))
    rec = ("<table class=rec><tr><th>specimen</th><th>material class</th>"
           + "".join(f"<th>{_e(label)}</th>" for _, label in RECORD_FIELDS) + "</tr>"
           + "".join("<tr>" + "".join(f"<td>{_e(c)}</td>" for c in r) + "</tr>"
                     for r in record_rows(doc)) + "</table>")
    return f"<table class=hdr>{head}</table>{rec}"


def _signoff_html(doc: dict) -> str:
    from ._document import BLANK, SIGNOFF_ROLES

    rep = doc.get("report") or {}
    boxes = "".join(
        f"<div><b>{_e(role)}</b><br>{_e(rep.get(key) or BLANK)}<div class=line></div>"
        "<small>signature</small><div class=line></div><small>date</small></div>"
        for key, role in SIGNOFF_ROLES)
    return ("<h2>Sign-off</h2><p class=muted>Results checked against the overlays and the "
            f"caution above.</p><div class=signoff>{boxes}</div>")


def render_html(data: ReportData) -> str:
    """The whole report as one HTML string."""
    doc = data.study
    failed = doc.get("failed", [])
    parts = [
        "<!DOCTYPE html><html lang=en><head><meta charset=utf-8>",
        "<meta name=viewport content='width=device-width,initial-scale=1'>",
        f"<title>{_e(doc['title'])}</title><style>{CSS}</style></head><body><main>",
        f"<h1>{_e(doc['title'])}</h1>",
        f"<p class=sub>{_e(doc.get('description') or '')} Study file {_e(doc['study_file'])}"
        f", sectio {_e(doc['sectio_version'])}, Monte Carlo seed {doc['settings']['seed']} "
        f"with {doc['settings']['draws']} draws.</p>",
        _header_html(doc),
        f"<div class=caution><b>Caution.</b> {_e(GENERAL_CAUTION)}</div>",
    ]
    if failed:
        parts.append(f"<div class=note><b>{len(failed)} field(s) could not be measured</b> "
                     "and are left out; see each specimen.</div>")
    parts += ["<h2>Specimens at a glance</h2>", _summary_table(data)]
    if doc.get("trends"):
        parts.append("<h2>Trends</h2>")
        parts += [_trend_html(t) for t in doc["trends"]]
    parts += [_specimen_html(sd) for sd in data.specimens]
    parts.append(_signoff_html(doc))
    parts.append("<h2>How to read this report</h2><dl class=read>" + "".join(
        f"<dt>{_e(k)}</dt><dd>{_e(v)}</dd>" for k, v in HOW_TO_READ) + "</dl>")
    parts.append("<footer>Made by sectio from study.json and the per-specimen JSON files "
                 "next to this report; every number here is in those files.</footer>")
    parts.append("</main></body></html>\n")
    return "\n".join(parts)


@plain_text_figures
def write_html_report(path: str | os.PathLike, data: ReportData) -> Path:
    """Render the study report (see :func:`report_data`) and write it atomically."""
    return atomic_write_text(path, render_html(data))
