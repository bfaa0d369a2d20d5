"""The parts of the report a laboratory files: header, specimen record, sign-off, constants.

Shared by the HTML and the PDF report. The header fields come from the study file's
``[report]`` table (or the ``study`` command's options), the specimen record from each
specimen's ``heat``, ``etchant``, ``objective``, ``magnification`` and ``instrument`` keys;
an empty field stays visibly empty so it can be filled in by hand.
"""

from __future__ import annotations

import io
from pathlib import Path

__all__ = [
    "HEADER_FIELDS",
    "RECORD_FIELDS",
    "constants_rows",
    "header_rows",
    "overlay_crop_png",
    "record_rows",
    "SIGNOFF_ROLES",
]

#: (key in study.json "report", label) in the order of the header.
HEADER_FIELDS = (
    ("number", "Report number"),
    ("date", "Date"),
    ("laboratory", "Laboratory"),
    ("customer", "Customer"),
    ("operator", "Operator"),
    ("standards", "Standards followed"),
)
#: (key in a specimen's "record", label) of the specimen record table.
RECORD_FIELDS = (
    ("heat", "material / heat"),
    ("etchant", "etchant"),
    ("objective", "objective"),
    ("magnification", "magnification"),
    ("instrument", "instrument"),
)
#: (key in "report", role) of the sign-off block; prepared-by is the operator.
SIGNOFF_ROLES = (("operator", "Prepared by"), ("checked_by", "Checked by"),
                 ("approved_by", "Approved by"))

BLANK = "—"


def header_rows(doc: dict) -> list[tuple[str, str]]:
    """(label, text) of the report header; missing fields shown as a dash."""
    rep = doc.get("report") or {}
    rows = []
    for key, label in HEADER_FIELDS:
        v = rep.get(key)
        if isinstance(v, list):
            v = "; ".join(v)
        rows.append((label, str(v) if v not in (None, "", []) else BLANK))
    rows.append(("Study file", f"{doc['study_file']} (sectio {doc['sectio_version']})"))
    return rows


def record_rows(doc: dict) -> list[list[str]]:
    """One row per specimen: name, material class, then the RECORD_FIELDS."""
    out = []
    for e in doc["specimens"]:
        rec = e.get("record") or {}
        out.append([e["name"], e.get("material") or BLANK]
                   + [str(rec.get(k)) if rec.get(k) not in (None, "") else BLANK
                      for k, _ in RECORD_FIELDS])
    return out


_CONSTANTS = (
    ("sigma0_mpa", "σ0 friction stress", "MPa"),
    ("k_mpa_sqrt_m", "k Hall–Petch slope", "MPa·m^½"),
    ("shear_modulus_gpa", "G shear modulus", "GPa"),
    ("burgers_nm", "b Burgers vector", "nm"),
    ("poisson_ratio", "ν Poisson ratio", ""),
    ("taylor_factor", "M Taylor factor", ""),
)


def constants_rows(strength_doc: dict) -> list[list[str]]:
    """Every constant of the material used by an estimate: name, value, uncertainty, source."""
    mat = (strength_doc.get("inputs") or {}).get("material") or {}
    rows = []
    for key, label, unit in _CONSTANTS:
        q = mat.get(key)
        if not q:
            continue
        if q.get("log_sd") is not None:
            unc = f"log sd {q['log_sd']:.3g} (×/÷ {2.718281828 ** q['log_sd']:.2f})"
        else:
            unc = f"± {q['sd']:.3g}" if q.get("sd") else "–"
        rows.append([label, f"{q['value']:.4g} {unit}".strip(), unc, q.get("source", "")])
    corr = mat.get("sigma0_k_correlation")
    if corr and corr.get("value"):
        rows.append(["σ0–k correlation", f"{corr['value']:.3g}", "–", corr.get("source", "")])
    rng = mat.get("grain_size_range_um")
    if rng:
        lo, hi = rng["value"]
        rows.append(["grain-size range of k", f"{lo:g}–{hi:g} µm", "–", rng.get("source", "")])
    if mat.get("grain_size_convention"):
        rows.append(["grain size d in k·d^(−½)", mat["grain_size_convention"], "–",
                     "sectio.strength.hall_petch conventions"])
    shear = mat.get("shearing_diameter_nm")
    if shear and shear.get("value"):
        rows.append(["shearing diameter", f"{shear['value']:g} nm", "–", shear.get("source", "")])
    return rows


def overlay_crop_png(path: Path, pixel_size_um: float | None, *, size: int = 360) -> bytes | None:
    """A size × size crop of the overlay at 1:1 (no resampling) from the centre of the field,
    with its own micron marker; None if the picture cannot be read."""
    import numpy as np
    from PIL import Image

    from ._overlay import draw_micron_marker

    try:
        with Image.open(path) as src:
            im = np.asarray(src.convert("RGB"))
    except OSError:
        return None
    h, w = im.shape[:2]
    s = min(size, h, w)
    cy, cx = int(h * 0.45), w // 2  # a little above the middle: the caption strip is below
    y0 = min(max(0, cy - s // 2), h - s)
    x0 = min(max(0, cx - s // 2), w - s)
    crop = im[y0:y0 + s, x0:x0 + s]
    if pixel_size_um:
        crop = draw_micron_marker(crop, pixel_size_um)
    buf = io.BytesIO()
    Image.fromarray(np.ascontiguousarray(crop)).save(buf, format="PNG")
    return buf.getvalue()
