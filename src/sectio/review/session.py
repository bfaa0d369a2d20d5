"""The fields of one output folder and their edit state, as the review page sees them.

:class:`ReviewSession` finds the result documents of ``sectio grains``, ``sectio
particles`` or ``sectio study`` in OUT_DIR, lists their fields, and per field keeps the
automatic label map (from the same image and options as the run; cached under
``review_cache/`` in the document's folder), the edit file and the measurement after the
edits. Editing never re-segments: an edit is appended to the edit list, the list is
applied to the automatic labels and the map is measured again.

No web code here: :mod:`sectio.review.server` maps requests onto these methods.
"""

from __future__ import annotations

import io
import json
import os
import threading
import time
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from ..errors import InputError
from .apply import GRAIN_OPS, PARTICLE_OPS, EditError, apply_edits
from .editfile import (
    EditFileError,
    check_edit_doc,
    image_sha256,
    new_edit_doc,
    read_edit_file,
    write_edit_file,
)
from .measure import EditedField, add_edit_keys, measure_field, remeasure

#: palette indices of the boundary layer
_CLEAR, _BOUNDARY, _LEFT_OUT, _PARTICLE = 0, 1, 2, 3


class ReviewError(InputError, ValueError):
    """The output folder cannot be reviewed (no results, images missing)."""


@dataclass
class Group:
    """The fields of one result document (one specimen, one kind)."""

    name: str  # specimen name (or the folder name)
    kind: str
    doc_path: Path
    doc: dict
    field_ids: list[int] = field(default_factory=list)


@dataclass
class FieldState:
    """One field of a review session: where it comes from and its current edits."""

    id: int
    group: Group
    stored: dict  # the field's entry in the result document
    image_path: Path
    source: dict
    edit_path: Path
    lock: threading.Lock = field(default_factory=threading.Lock)
    # Set when the field is first opened (``ready``): Micrograph, GrainField or
    # ParticleField, label map, edit document, EditedField.
    micrograph: Any = None
    base_field: Any = None
    base_labels: Any = None
    edit_doc: Any = None
    current: Any = None
    version: int = 0
    grey_png: bytes | None = None

    @property
    def kind(self) -> str:
        return self.group.kind

    @property
    def ready(self) -> bool:
        return self.current is not None


def _inside(path: Path, root: Path) -> bool:
    try:
        path.resolve().relative_to(root.resolve())
    except ValueError:
        return False
    return True


class ReviewSession:
    """All reviewable fields under ``out_dir``."""

    def __init__(self, out_dir: str | os.PathLike, *, by: str = ""):
        self.root = Path(out_dir).resolve()
        if not self.root.is_dir():
            raise ReviewError(f"{out_dir} is not a folder; give the --out folder of a "
                              "sectio grains, particles or study run.")
        self.by = by
        self.groups: list[Group] = []
        self.fields: list[FieldState] = []
        self._discover()
        if not self.fields:
            raise ReviewError(f"{out_dir} holds no reviewable fields (no grains.json, "
                              "particles.json or study.json with measured fields); run sectio "
                              "grains, particles or study with --out there first.")

    # -- discovery ------------------------------------------------------------------------
    def _discover(self) -> None:
        study = self.root / "study.json"
        if study.is_file():
            doc = json.loads(study.read_text(encoding="utf-8"))
            base = self._study_folder()
            for spec in doc.get("specimens", []):
                for kind in ("grains", "particles"):
                    rel = (spec.get("files") or {}).get(kind)
                    if rel:
                        self._add_doc(self.root / rel, spec["name"], kind, base)
            return
        for kind in ("grains", "particles"):
            p = self.root / f"{kind}.json"
            if p.is_file():
                self._add_doc(p, self.root.name, kind, None)

    def _study_folder(self) -> Path | None:
        log = self.root / "run_log.json"
        try:
            doc = json.loads(log.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return None
        folder = doc.get("study_folder") if isinstance(doc, dict) else None
        if isinstance(folder, str):  # relative to the output folder
            return (self.root / folder).resolve()
        study_file = doc.get("study_file") if isinstance(doc, dict) else None
        return Path(study_file).parent if isinstance(study_file, str) else None

    def _resolve_image(self, image: str, base: Path | None) -> Path:
        p = Path(image)
        cands = [p] if p.is_absolute() else [
            *( [base / p] if base else []), Path.cwd() / p, self.root / p, self.root.parent / p]
        for c in cands:
            if c.is_file():
                return c
        raise ReviewError(f"Cannot find the image {image} of the results in {self.root}; "
                          "start sectio review from the folder the run was started in.")

    def _add_doc(self, path: Path, name: str, kind: str, base: Path | None) -> None:
        if not _inside(path, self.root):
            return
        doc = json.loads(path.read_text(encoding="utf-8"))
        g = Group(name, kind, path, doc)
        entries = list(doc.get("fields", [])) + [r["field"] for r in doc.get("rejected", [])
                                                 if isinstance(r, dict) and "field" in r]
        for d in entries:
            src = d.get("source")
            if not src:
                continue
            fs = FieldState(len(self.fields), g, d, self._resolve_image(d["image"], base), src,
                            path.parent / src["edit_file"])
            g.field_ids.append(fs.id)
            self.fields.append(fs)
        if g.field_ids:
            self.groups.append(g)

    # -- one field --------------------------------------------------------------------------
    def prepare(self, fid: int) -> FieldState:
        """Load, segment (or read the cached labels) and apply the edit file of a field."""
        fs = self.fields[fid]
        with fs.lock:
            if fs.ready:
                return fs
            from ..micrograph import load

            sha = image_sha256(fs.image_path)
            if sha != fs.source.get("image_sha256"):
                raise EditFileError(f"The image {fs.stored['image']} changed since the run "
                                    "(another content hash); run the measurement again "
                                    "before reviewing it.")
            cal = fs.source.get("calibration", {})
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                mg = load(fs.image_path, **_load_kwargs(load, cal))
                fs.micrograph = mg
                fs.base_field = measure_field(fs.kind, mg, fs.source.get("options", {}))
            fs.base_labels = fs.base_field.segmentation.labels
            if fs.edit_path.is_file():
                fs.edit_doc = read_edit_file(fs.edit_path, image_sha=sha)
            else:
                fs.edit_doc = new_edit_doc(kind=fs.kind, image=fs.stored["image"],
                                           image_sha=sha, shape_px=mg.shape,
                                           options=fs.source.get("options", {}))
            self._remeasure(fs)
            return fs

    def _remeasure(self, fs: FieldState, edited=None) -> None:
        edits = fs.edit_doc.get("edits", [])
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            if edited is None:
                edited = apply_edits(fs.base_labels, edits, kind=fs.kind)
            f = remeasure(fs.kind, fs.base_field, edited) if edits else fs.base_field
        fs.current = EditedField(f, edited, fs.edit_doc)
        fs.version += 1

    def field_numbers(self, fs: FieldState) -> dict:
        """The field's JSON entry as it is now (stored values until it is opened)."""
        if not fs.ready:
            return fs.stored
        d = fs.current.field.to_dict()
        add_edit_keys(d, fs.current.edited, fs.edit_doc, fs.edit_path.name)
        for k in ("image", "overlay_png", "source"):  # the names the run gave
            if k in fs.stored:
                d[k] = fs.stored[k]
        return d

    def summary(self, g: Group) -> dict:
        """The specimen summary over its fields as they are now (rejected ones left out)."""
        dicts = [self.field_numbers(self.fields[i]) for i in g.field_ids]
        kept = [d for d in dicts if (d.get("edits") or {}).get("status") != "rejected"]
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            if g.kind == "grains":
                from ..grains import summarize_grains

                return summarize_grains(kept)
            return _particle_summary(kept)

    # -- edits ------------------------------------------------------------------------------
    def _save(self, fs: FieldState) -> None:
        if not _inside(fs.edit_path, self.root):
            raise ReviewError("edit files are written inside the output folder only.")
        fs.edit_doc["by"] = self.by or fs.edit_doc.get("by", "")
        fs.edit_doc["updated"] = time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())
        write_edit_file(fs.edit_path, fs.edit_doc)

    def add_edit(self, fid: int, edit: dict) -> FieldState:
        fs = self.prepare(fid)
        ops = GRAIN_OPS if fs.kind == "grains" else PARTICLE_OPS
        if not isinstance(edit, dict) or edit.get("op") not in ops:
            raise EditError(f"not an edit of {fs.kind}; the edits are {', '.join(ops)}.")
        keep = {k: edit[k] for k in ("op", "points", "point", "line", "polygon", "reason")
                if k in edit}
        keep["at"] = time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())
        if self.by:
            keep["by"] = self.by
        with fs.lock:
            edits = [*fs.edit_doc["edits"], keep]
            edited = apply_edits(fs.base_labels, edits, kind=fs.kind)  # refuses bad edits
            effect = edited.effects[-1]
            if effect in ("cut: 0 new region(s)", "split: 0 new region(s)"):
                raise EditError("the stroke must cross the grain or particle from one side "
                                "to the other; nothing was cut.")
            if effect == "join: 1 regions -> 1" or effect == "join: 0 regions -> 1":
                raise EditError("both points are in the same region; click two neighbours.")
            if effect == "delete: nothing there":
                raise EditError("there is no particle under that point.")
            fs.edit_doc["edits"] = edits
            fs.edit_doc["redo"] = []
            check_edit_doc(fs.edit_doc, where=fs.edit_path.name)
            self._remeasure(fs, edited)
            self._save(fs)
        return fs

    def undo(self, fid: int, *, redo: bool = False) -> FieldState:
        fs = self.prepare(fid)
        with fs.lock:
            src, dst = ("redo", "edits") if redo else ("edits", "redo")
            if fs.edit_doc[src]:
                fs.edit_doc[dst].append(fs.edit_doc[src].pop())
                self._remeasure(fs)
                self._save(fs)
        return fs

    def set_status(self, fid: int, status: str | None, reason: str = "") -> FieldState:
        fs = self.prepare(fid)
        if status not in (None, "reviewed", "rejected"):
            raise EditError("status must be reviewed, rejected or none.")
        if status == "rejected" and not reason.strip():
            raise EditError("give the reason a field is rejected.")
        with fs.lock:
            fs.edit_doc["status"] = status
            fs.edit_doc["reason"] = reason.strip()[:500] if status == "rejected" else ""
            self._save(fs)
        return fs

    # -- pictures ---------------------------------------------------------------------------
    def grey_png(self, fid: int) -> bytes:
        fs = self.prepare(fid)
        if fs.grey_png is None:
            from PIL import Image

            grey = (np.clip(fs.micrograph.image, 0, 1) * 255).astype(np.uint8)
            buf = io.BytesIO()
            Image.fromarray(grey).save(buf, format="PNG", compress_level=1)
            fs.grey_png = buf.getvalue()
        return fs.grey_png

    def layer_png(self, fid: int) -> bytes:
        """Detected boundaries (grains) or outlines (particles) and left-out regions, as a
        transparent palette PNG of the image's size."""
        from PIL import Image

        fs = self.prepare(fid)
        with fs.lock:
            lab = fs.current.edited.labels
            left = fs.current.edited.left_out
        out = np.zeros(lab.shape, np.uint8)
        edge = np.zeros(lab.shape, bool)
        edge[:, 1:] |= lab[:, 1:] != lab[:, :-1]
        edge[1:] |= lab[1:] != lab[:-1]
        if fs.kind == "particles":
            edge &= lab > 0
            out[edge] = _PARTICLE
        else:
            out[edge] = _BOUNDARY
        out[left] = _LEFT_OUT
        im = Image.fromarray(out, mode="P")
        pal = [0, 0, 0, 255, 176, 0, 220, 40, 40, 0, 230, 255] + [0] * (256 * 3 - 12)
        im.putpalette(pal)
        buf = io.BytesIO()
        im.save(buf, format="PNG", compress_level=1,
                transparency=bytes([0, 255, 90, 255] + [0] * 252))
        return buf.getvalue()

    # -- page data --------------------------------------------------------------------------
    def listing(self) -> dict:
        groups = []
        for g in self.groups:
            groups.append({"name": g.name, "kind": g.kind, "fields": [
                self.field_brief(self.fields[i]) for i in g.field_ids],
                "summary": _brief_summary(g.kind, self.summary(g))})
        return {"root": self.root.name, "groups": groups}

    def field_brief(self, fs: FieldState) -> dict:
        d = self.field_numbers(fs)
        e = d.get("edits") or {}
        if fs.ready:
            e = {**e, "count": len(fs.edit_doc["edits"]), "status": fs.edit_doc["status"],
                 "reason": fs.edit_doc["reason"]}
        return {"id": fs.id, "image": Path(d["image"]).name, "kind": fs.kind,
                "numbers": _brief_field(fs.kind, d), "flags": d.get("flags", []),
                "edits": e.get("count", 0), "status": e.get("status"),
                "reason": e.get("reason", ""), "ready": fs.ready}

    def field_detail(self, fid: int) -> dict:
        fs = self.prepare(fid)
        h, w = fs.micrograph.shape
        return {**self.field_brief(fs), "shape_px": [h, w], "version": fs.version,
                "pixel_size_um": fs.micrograph.pixel_size_um,
                "edit_file": fs.edit_path.name, "edit_list": fs.edit_doc["edits"],
                "redo": len(fs.edit_doc["redo"]),
                "effects": fs.current.edited.effects if fs.current.edited else [],
                "summary": _brief_summary(fs.kind, self.summary(fs.group)),
                "group": fs.group.name}


def _load_kwargs(load, cal: dict) -> dict:
    """The calibration entries of a run that :func:`sectio.load` takes."""
    import inspect

    names = set(inspect.signature(load).parameters) - {"path"}
    return {k: v for k, v in cal.items() if k in names and v is not None}


def _particle_summary(dicts: list[dict]) -> dict:
    """Area fraction and mean ECD over the fields, the same statistics as
    :func:`sectio.particles.summarize_particles` (Student t over fields; sub-regions of a
    single field), from the fields' JSON entries."""
    from ..stereology import FieldStats, field_statistics, stats_to_dict, subregion_statistics

    out: dict = {"n_fields": len(dicts)}
    if not dicts:
        return out
    out["basis"] = "fields" if len(dicts) >= 2 else "sub-regions of one field"
    for q in ("area_fraction", "mean_ecd_um"):
        vals = [d.get(q) for d in dicts if d.get(q) is not None]
        st: FieldStats | None
        if len(dicts) >= 2 and len(vals) >= 2:
            st = field_statistics(vals, basis="fields")
        elif len(dicts) == 1:
            tiles = (dicts[0].get("subregions") or {}).get(q, [])
            st = subregion_statistics(dicts[0].get(q), tiles)
        else:
            st = None
        if st is not None:
            out.update(stats_to_dict(q, st))
        else:
            out[q] = vals[0] if vals else None
    return out


def _brief_field(kind: str, d: dict) -> dict:
    if kind == "grains":
        keys = ("mean_intercept_um", "intercept_count", "grain_count", "astm_g_intercept",
                "grains_per_mm2", "left_out_fraction")
    else:
        keys = ("area_fraction", "particle_count", "particles_counted", "mean_ecd_um",
                "particles_per_um2", "left_out_fraction")
    return {k: d.get(k) for k in keys}


def _brief_summary(kind: str, s: dict) -> dict:
    keys: tuple[str, ...]
    if kind == "grains":
        keys = ("n_fields", "ci_basis", "mean_intercept_um", "mean_intercept_ci95_um",
                "relative_accuracy_pct", "astm_g", "astm_g_ci95")
    else:
        keys = ("n_fields", "basis", "area_fraction", "area_fraction_ci95", "mean_ecd_um",
                "mean_ecd_ci95_um")
    return {k: s.get(k) for k in keys}
