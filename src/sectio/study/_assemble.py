"""Per-specimen documents and the study's trends, built from stored field records.

Everything here is computed from the JSON records in DIR/fields/ (through
:mod:`sectio.specimen`, as the single commands are), never from live objects, so a resumed
run and an uninterrupted one give byte-identical documents.
"""

from __future__ import annotations

import warnings

from ..errors import InputError
from ._studyfile import Specimen, Study
from ._trends import fit_lsw, fit_parabolic_growth

STUDY_SCHEMA = "sectio/study@1"


def specimen_documents(study: Study, spec: Specimen, records: dict[str, list[dict]]) -> dict:
    """grains / particles / strength documents of one specimen.

    ``records[kind]`` lists the stored field records of that kind in image order. Returns a
    dict with keys ``grains``, ``particles`` (each a :class:`sectio.specimen.ResultDocument`
    or None), ``strength`` (document or None), ``strength_error`` and ``warnings``.
    """
    from ..grains import make_options
    from ..specimen import FieldRecord, grains_document, overlay_suffix, particles_document

    out: dict = {"grains": None, "particles": None, "strength": None, "strength_error": None,
                 "warnings": []}
    used: set[str] = set()
    cal = spec.calibration
    caught_all: list[str] = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        if "grains" in spec.measure:
            recs = [FieldRecord.from_dict(r) for r in records.get("grains", [])]
            opts = make_options(**{**spec.grain_options, **(
                {"angles_deg": tuple(spec.grain_options["angles_deg"])}
                if "angles_deg" in spec.grain_options else {})})
            out["grains"] = grains_document(recs, calibration=cal, options=opts, used=used,
                                            suffix=overlay_suffix("grains", spec.measure),
                                            edits=True)
        if "particles" in spec.measure:
            recs = [FieldRecord.from_dict(r) for r in records.get("particles", [])]
            out["particles"] = particles_document(
                recs, calibration=cal, measure={**spec.particle_options, "seed": study.seed},
                bootstrap=study.bootstrap, used=used,
                suffix=overlay_suffix("particles", spec.measure), edits=True)
        caught_all.extend(str(w.message) for w in caught)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        out["strength"], out["strength_error"] = _strength(study, spec, out)
        caught_all.extend(str(w.message) for w in caught)
    out["warnings"] = sorted(set(caught_all))
    return out


def _strength(study: Study, spec: Specimen, docs: dict):
    from ..strength import estimate_from_summaries

    if spec.material is None:
        return None, "no material given in the study file: no strength estimate."
    g = docs["grains"].doc["summary"] if docs["grains"] else None
    p = docs["particles"].doc["summary"] if docs["particles"] else None
    g = g if g and g.get("n_fields") else None
    p = p if p and p.get("n_fields") else None
    if g is None and p is None:
        return None, "no field was measured: no strength estimate."
    try:
        est = estimate_from_summaries(g, p, material=spec.material,
                                      materials_file=study.materials_file, seed=study.seed,
                                      draws=study.draws, **spec.strength_options)
    except InputError as exc:
        return None, str(exc)
    doc = est.to_dict()
    doc["inputs"]["files"] = {"grains": "grains.json" if g else None,
                              "particles": "particles.json" if p else None,
                              "materials": (study.materials_file.name
                                            if study.materials_file else None)}
    return doc, None


def _ci(summary: dict | None, key: str):
    return summary.get(key) if summary else None


def trend_points(study: Study, docs_by_specimen: dict[str, dict]) -> list[dict]:
    """One entry per series: points sorted by the trial value, and the fits that apply."""
    series: dict[str, list] = {}
    for spec in study.specimens:
        if spec.series is None or spec.trial is None:
            continue
        series.setdefault(spec.series, []).append(spec)
    out = []
    for name, specs in series.items():
        specs = sorted(specs, key=lambda s: (s.trial.value, s.name))
        pts = []
        for s in specs:
            d = docs_by_specimen[s.name]
            g = d["grains"].doc["summary"] if d["grains"] else None
            p = d["particles"].doc["summary"] if d["particles"] else None
            st = d["strength"]
            g = g if g and g.get("n_fields") else None
            p = p if p and p.get("n_fields") else None
            pts.append({
                "specimen": s.name, "value": s.trial.value,
                "mean_intercept_um": g.get("mean_intercept_um") if g else None,
                "mean_intercept_ci95_um": _ci(g, "mean_intercept_ci95_um"),
                "mean_intercept_se_um": _ci(g, "mean_intercept_se_um"),
                "astm_g": g.get("astm_g") if g else None,
                "astm_g_ci95": _ci(g, "astm_g_ci95"),
                "mean_sphere_diameter_um": _ci(p, "mean_sphere_diameter_um"),
                "mean_sphere_diameter_ci95_um": _ci(p, "mean_sphere_diameter_ci95_um"),
                "mean_sphere_diameter_se_um": _ci(p, "mean_sphere_diameter_se_um"),
                "mean_ecd_um": _ci(p, "mean_ecd_um"),
                "mean_ecd_ci95_um": _ci(p, "mean_ecd_ci95_um"),
                "area_fraction": _ci(p, "area_fraction"),
                "area_fraction_ci95": _ci(p, "area_fraction_ci95"),
                "yield_median_mpa": st["yield_mpa"]["median"] if st else None,
                "yield_ci95_mpa": st["yield_mpa"]["ci95"] if st else None,
            })
        t = specs[0].trial
        entry = {"series": name, "variable": t.name, "unit": t.unit, "is_time": t.is_time,
                 "points": pts, "grain_growth": None, "coarsening": None, "notes": []}
        if t.is_time:
            entry.update(_fits(pts, t.unit, entry["notes"]))
        out.append(entry)
    return out


def _fits(pts: list[dict], unit: str, notes: list[str]) -> dict:
    res: dict = {}
    g = [p for p in pts if p["mean_intercept_um"] is not None]
    if len({p["value"] for p in g}) >= 3:
        se = [p["mean_intercept_se_um"] for p in g]
        fit = fit_parabolic_growth([p["value"] for p in g], [p["mean_intercept_um"] for p in g],
                                   size_se_um=se if all(se) else None, time_unit=unit)
        res["grain_growth"] = fit.to_dict()
    elif g:
        notes.append("grain growth: fewer than three times, no fit.")
    c = [p for p in pts if p["mean_sphere_diameter_um"] is not None]
    if len({p["value"] for p in c}) >= 3:
        se = [p["mean_sphere_diameter_se_um"] for p in c]
        lsw = fit_lsw([p["value"] for p in c],
                      [500.0 * p["mean_sphere_diameter_um"] for p in c],
                      radius_se_nm=[500.0 * s for s in se] if all(se) else None,
                      time_unit=unit)
        res["coarsening"] = lsw.to_dict()
        res["coarsening"]["radius"] = ("mean sphere radius from the Schwartz–Saltykov "
                                       "unfolding (half the mean sphere diameter)")
    elif c:
        notes.append("coarsening: fewer than three times, no fit.")
    return res
