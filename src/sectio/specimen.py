"""A specimen's fields -> its grains and particles documents: the one place this happens.

The ``grains`` and ``particles`` commands and the study runner all go through here::

    micrograph --measure_field()--> MeasuredField: the live result + its FieldRecord
    FieldRecord: frozen, JSON-ready; what a study caches in DIR/fields/<key>.json
    [FieldRecord] --grains_document() / particles_document()--> ResultDocument
    ResultDocument: the sectio/grains@1 or sectio/particles@1 document, its CSV rows,
                    overlay file names and (particles) the pooled section sizes

:func:`measure_field` is the only function that measures a field. Work that changes what a
field reports belongs there, between the measurement and the :class:`FieldRecord` it
returns: hand edits (the edit file next to the results, :mod:`sectio.review.runs`, applied
when ``edit_folder`` is given) and per-field flags, which travel in the field's document
(``result["flags"]``, :attr:`FieldRecord.flags`). The documents, CSV files, study and
reports then follow without further change. A field rejected by hand stays out of the
statistics and is listed under ``"rejected"``.

Heavy libraries are imported inside the functions.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np

from .errors import CalibrationError, InputError, OptionError
from .stereology import intercept_lengths_um

__all__ = [
    "GRAIN_CSV_COLUMNS",
    "KINDS",
    "PARTICLE_CSV_COLUMNS",
    "SIZE_DISTRIBUTION_PNG",
    "SUMMARY_DIGITS",
    "field_summary_rows",
    "FieldRecord",
    "MeasuredField",
    "ResultDocument",
    "grains_document",
    "image_name",
    "measure_field",
    "measure_images",
    "overlay_name",
    "overlay_suffix",
    "particles_document",
    "specimen_summary_row",
    "study_field_rows",
    "study_specimen_row",
    "write_result",
]

KINDS = ("grains", "particles")

#: Columns of grains.csv (one row per grain) and particles.csv (one row per particle).
GRAIN_CSV_COLUMNS = ["image", "grain", "area_um2", "ecd_um", "centroid_x_um", "centroid_y_um",
                     "touches_edge"]
PARTICLE_CSV_COLUMNS = ["image", "particle", "area_um2", "ecd_um", "feret_max_um",
                        "feret_min_um", "aspect_ratio", "centroid_x_um", "centroid_y_um",
                        "cut_by_edge", "weight"]
CSV_COLUMNS = {"grains": GRAIN_CSV_COLUMNS, "particles": PARTICLE_CSV_COLUMNS}
#: Significant figures of the numbers in the CSV files: the summary files (per field, per
#: specimen) carry 4 — more than the field-to-field spread of any quantity sectio reports
#: supports —, the per-grain and per-particle files 6 (positions to well under a pixel on a
#: 10 000-pixel field).
SUMMARY_DIGITS = 4
ROW_DIGITS = 6

# The summary CSV files: (column, key of the field entry or specimen summary in the JSON
# document, index into a [low, high] pair or None, factor). Column names carry the unit;
# fractions are written in per cent (factor 100). Grains and particles columns differ, so a
# study's one-row-per-specimen file holds both side by side.
_GRAIN_FIELD_COLUMNS = [
    ("pixel_size_um", "pixel_size_um", None, 1),
    ("pixel_size_source", "pixel_size_source", None, 1),
    ("mean_intercept_um", "mean_intercept_um", None, 1),
    ("mean_intercept_ci95_low_um", "mean_intercept_ci95_um", 0, 1),
    ("mean_intercept_ci95_high_um", "mean_intercept_ci95_um", 1, 1),
    ("intercept_count", "intercept_count", None, 1),
    ("astm_g", "astm_g_intercept", None, 1), ("astm_g_planimetric", "astm_g_planimetric", None, 1),
    ("iso643_g_planimetric", "iso643_g_planimetric", None, 1),
    ("grain_count", "grain_count", None, 1), ("grains_per_mm2", "grains_per_mm2", None, 1),
    ("mean_grain_ecd_um", "mean_ecd_um", None, 1),
    ("anisotropy_index", "anisotropy_index", None, 1),
    ("twin_boundary_pct", "twin_boundary_fraction", None, 100),
    ("duplex", "duplex", None, 1),
    ("astm_g_largest_grain_ala", "astm_g_largest_grain_ala", None, 1),
]
_PARTICLE_FIELD_COLUMNS = [
    ("pixel_size_um", "pixel_size_um", None, 1), ("field_area_um2", "field_area_um2", None, 1),
    ("volume_fraction_pct", "volume_fraction", None, 100),
    ("point_fraction_pct", "point_fraction", None, 100),
    ("particle_count", "particle_count", None, 1),
    ("particles_counted", "particles_counted", None, 1),
    ("particles_per_um2", "particles_per_um2", None, 1),
    ("mean_ecd_um", "mean_ecd_um", None, 1), ("mean_feret_max_um", "mean_feret_max_um", None, 1),
    ("mean_aspect_ratio", "mean_aspect_ratio", None, 1),
    ("mean_free_path_um", "mean_free_path_um", None, 1),
    ("mean_nn_distance_um", "mean_nn_distance_um", None, 1),
    ("mean_sphere_diameter_um", "mean_sphere_diameter_um", None, 1),
    ("spheres_per_um3", "spheres_per_um3", None, 1),
    ("method", "method", None, 1), ("phase", "phase", None, 1),
    ("probably_wrong", "probably_wrong", None, 1),
]


def _with_ci(key: str, *, column: str | None = None, factor: float = 1) -> list:
    """A specimen quantity of the summary, its field-to-field standard deviation, 95 % CI
    (Student t) and % relative accuracy. The summary writes ``_um`` after the statistic
    (``mean_ecd_sd_um``) and other units before it (``grains_per_mm2_sd``); the columns
    keep that, with ``column`` naming a quantity written in other units (per cent)."""
    if key.endswith("_um"):
        stem = key[:-3]
        sd, ci, ra = f"{stem}_sd_um", f"{stem}_ci95_um", f"{stem}_relative_accuracy_pct"
    else:
        sd, ci, ra = f"{key}_sd", f"{key}_ci95", f"{key}_relative_accuracy_pct"
    col = column or key
    if col.endswith("_um") or col.endswith("_pct"):
        stem, unit = col.rsplit("_", 1)
        names = [f"{stem}_sd_{unit}", f"{stem}_ci95_low_{unit}", f"{stem}_ci95_high_{unit}"]
        rel = f"{stem}_relative_accuracy_pct"
    else:
        names = [f"{col}_sd", f"{col}_ci95_low", f"{col}_ci95_high"]
        rel = f"{col}_relative_accuracy_pct"
    return [(col, key, None, factor), (names[0], sd, None, factor), (names[1], ci, 0, factor),
            (names[2], ci, 1, factor), (rel, ra, None, 1)]


_GRAIN_SPECIMEN_COLUMNS = [
    ("grain_fields", "n_fields", None, 1), ("grain_ci_basis", "ci_basis", None, 1),
    *_with_ci("mean_intercept_um"),
    ("astm_g", "astm_g", None, 1), ("astm_g_ci95_low", "astm_g_ci95", 0, 1),
    ("astm_g_ci95_high", "astm_g_ci95", 1, 1),
    *_with_ci("grains_per_mm2"),
    ("astm_g_planimetric", "astm_g_planimetric", None, 1),
    ("iso643_g_planimetric", "iso643_g_planimetric", None, 1),
    ("grain_count", "grain_count_total", None, 1),
    ("intercept_count", "intercept_count_total", None, 1),
    ("duplex_fields", "duplex_fields", None, 1),
    ("astm_g_largest_grain_ala", "astm_g_largest_grain_ala", None, 1),
    ("twin_boundary_pct", "twin_boundary_fraction", None, 100),
]
_PARTICLE_SPECIMEN_COLUMNS = [
    ("particle_fields", "n_fields", None, 1), ("particle_ci_basis", "basis", None, 1),
    *_with_ci("volume_fraction", column="volume_fraction_pct", factor=100),
    *_with_ci("particles_per_um2"),
    *_with_ci("mean_ecd_um"),
    *_with_ci("mean_free_path_um"),
    *_with_ci("mean_nn_distance_um"),
    *_with_ci("mean_sphere_diameter_um"),
    ("spheres_per_um3", "spheres_per_um3", None, 1),
    ("d10_um", "d10_um", None, 1), ("d50_um", "d50_um", None, 1), ("d90_um", "d90_um", None, 1),
    ("particle_count", "particle_count", None, 1),
    ("particles_counted", "particles_counted", None, 1),
]
_FIELD_COLUMNS = {"grains": _GRAIN_FIELD_COLUMNS, "particles": _PARTICLE_FIELD_COLUMNS}
_SPECIMEN_COLUMNS = {"grains": _GRAIN_SPECIMEN_COLUMNS, "particles": _PARTICLE_SPECIMEN_COLUMNS}
SIZE_DISTRIBUTION_PNG = "size_distribution.png"


def overlay_name(image: str, used: set[str], suffix: str = "_overlay") -> str:
    """A unique overlay file name for a field: ``<stem><suffix>.png``, then ``<stem>_2...``.

    The stem is made portable by :func:`sectio.report._safe.safe_stem` (any bytes, any
    length); names are compared without case, as on case-insensitive file systems.
    """
    from .report._safe import safe_stem

    stem = safe_stem(image)
    name, i = f"{stem}{suffix}.png", 2
    while name.lower() in used:
        name, i = f"{stem}_{i}{suffix}.png", i + 1
    used.add(name.lower())
    return name


def overlay_suffix(kind: str, measure: Sequence[str]) -> str:
    """``_overlay``, or ``_grains_overlay`` / ``_particles_overlay`` when a specimen is
    measured both ways (the two overlays of one image then get different names)."""
    return f"_{kind}_overlay" if len(measure) > 1 else "_overlay"


@dataclass(frozen=True)
class FieldRecord:
    """One field's result, JSON-ready: what the documents are built from and a study caches.

    ``result`` is the field's entry in the document's ``fields`` list (without the overlay
    name); ``rows`` the per-grain or per-particle rows of the CSV; ``intercepts_um`` the
    chord lengths for the report's histogram (grains, studies only). A field that could not
    be measured has ``status = "failed"`` and a ``reason``.
    """

    kind: str
    image: str
    status: str = "ok"
    reason: str | None = None
    result: dict = field(default_factory=dict)
    measure_options: dict = field(default_factory=dict)
    rows: tuple[dict, ...] = ()
    intercepts_um: tuple[float, ...] | None = None
    warnings: tuple[str, ...] = ()
    key: str | None = None  # content key of a study's cached field
    overlay_png: str | None = None  # the overlay's file name once one was written
    source: dict | None = None  # how to measure the field again (the review page)

    @property
    def ok(self) -> bool:
        """True when the field was measured."""
        return self.status == "ok"

    @property
    def rejected(self) -> bool:
        """True when the field was rejected by hand (review edits)."""
        e = self.result.get("edits")
        return isinstance(e, dict) and e.get("status") == "rejected"

    @property
    def flags(self) -> tuple[str, ...]:
        """Per-field flags (results that cannot be right, or need a look)."""
        return tuple(self.result.get("flags", ()))

    @classmethod
    def failed(cls, kind: str, image: str, reason: str) -> FieldRecord:
        """The record of a field that could not be measured."""
        return cls(kind, image, status="failed", reason=reason)

    def payload(self) -> dict:
        """The measured part as stored in a study's field record (key order kept)."""
        out: dict = {"result": self.result, "measure_options": self.measure_options}
        if self.intercepts_um is not None:
            out["intercepts_um"] = list(self.intercepts_um)
        out["rows"] = list(self.rows)
        if self.source is not None:
            out["source"] = self.source
        return out

    @classmethod
    def from_dict(cls, d: Mapping) -> FieldRecord:
        """A record from a study's stored field record (``sectio/study-field@1``)."""
        if d.get("status") != "ok":
            return cls(d["kind"], d["image"], status=d.get("status", "failed"),
                       reason=d.get("reason"), key=d.get("key"))
        chords = d.get("intercepts_um")
        return cls(d["kind"], d["image"], result=d["result"],
                   measure_options=d.get("measure_options", {}), rows=tuple(d.get("rows", ())),
                   intercepts_um=None if chords is None else tuple(chords),
                   warnings=tuple(d.get("warnings", ())), key=d.get("key"),
                   source=d.get("source"))

    def csv_rows(self) -> list[dict]:
        """Rows of the CSV file, each naming the image first."""
        if self.kind == "grains":
            return list(self.rows)
        return [{"image": self.image, **r} for r in self.rows]

    def whole_sections(self) -> tuple[np.ndarray, np.ndarray]:
        """Particles: ECD (µm) and edge weight of the particles not cut by the field edge."""
        whole = [r for r in self.rows if not r["cut_by_edge"]]
        return (np.array([r["ecd_um"] for r in whole], float),
                np.array([r["weight"] for r in whole], float))


@dataclass(frozen=True)
class MeasuredField:
    """A field just measured: the live result (label map, overlay) and its record."""

    kind: str
    field: Any  # GrainField or ParticleField (after hand edits, if any)
    record: FieldRecord
    edit_file: str | None = None  # name of the field's edit file (looked for or found)
    image_sha256: str | None = None  # of the image file, when an edit file was looked for

    def overlay_png(self) -> bytes:
        """The field's overlay picture as PNG bytes, with micron marker and legend."""
        if self.kind == "grains":
            from .report.grains import overlay_png_bytes

            return overlay_png_bytes(self.field)
        from .report.particles import overlay_png_bytes

        return overlay_png_bytes(self.field)


def measure_field(kind: str, micrograph, options, *, chords: bool = False,
                  edit_folder: Path | None = None, used_edits: set[str] | None = None,
                  image_bytes: bytes | None = None) -> MeasuredField:
    """Measure one field: the one place where a micrograph becomes a field result.

    Parameters
    ----------
    kind : {"grains", "particles"}
    micrograph : Micrograph
        From :func:`sectio.load`.
    options : GrainOptions or dict
        Grains: :class:`sectio.grains.GrainOptions` or the keyword arguments of
        :func:`sectio.grains.make_options`; particles: the keyword arguments of
        :func:`sectio.particles.measure_particles`.
    chords : bool
        Grains: also keep the chord lengths on the test lines (the report's histogram).
    edit_folder : Path, optional
        Apply the hand edits of the field's edit file in this folder, if there is one
        (:func:`sectio.review.runs.apply_edit_file`); ``used_edits`` holds the edit-file
        names already taken in that folder, ``image_bytes`` the image if it is not read
        from ``micrograph.path``.

    Returns
    -------
    MeasuredField
    """
    live: Any  # GrainField or ParticleField
    if kind == "grains":
        from .grains import GrainOptions, make_options, measure_grains

        if not isinstance(options, GrainOptions):
            opts = dict(options)
            if "angles_deg" in opts:
                opts["angles_deg"] = tuple(opts["angles_deg"])
            options = make_options(**opts)
        live = measure_grains(micrograph, options)
        measure_options = options.to_dict()
    elif kind == "particles":
        from .particles import measure_particles

        live = measure_particles(micrograph, **options)
        measure_options = live.options
    else:
        raise OptionError(f"Unknown measurement {kind!r}; choose grains or particles.")
    extra = {"particles": True} if kind == "particles" else {}
    edit_name = sha = None
    if edit_folder is not None:
        # Hand edits: the edited label map is measured again with the same stereology.
        from .review.runs import apply_edit_file, field_dict

        edited, edit_name, sha = apply_edit_file(kind, micrograph.path, live, edit_folder,
                                                 set() if used_edits is None else used_edits,
                                                 image_bytes=image_bytes)
        live = edited.field
        result = field_dict(edited, edit_name, **extra)
    else:
        result = live.to_dict(**extra)
    if kind == "grains":
        rows = live.grain_table()
        chord_um = tuple(intercept_lengths_um(
            live.labels, spacing_px=options.line_spacing_px,
            pixel_size_um=live.pixel_size_um)) if chords else None
    else:
        rows = result.pop("particles")
        chord_um = None
    record = FieldRecord(kind, micrograph.path, result=result, measure_options=measure_options,
                         rows=tuple(rows), intercepts_um=chord_um)
    return MeasuredField(kind, live, record, edit_name, sha)


def measure_images(kind: str, images: Iterable, options: Mapping, *, calibration: Mapping,
                   out: Path, on_skip: Callable[[str, InputError], None] | None = None,
                   example_pixel_size: str = "0.5um",
                   progress: Callable[[list], Iterable] | None = None) -> list[FieldRecord]:
    """Measure image files one after the other, with their hand edits from ``out``, writing
    each overlay into ``out``.

    ``options`` are the keyword arguments of :func:`sectio.grains.make_options` (grains)
    or :func:`sectio.particles.measure_particles`; ``calibration`` those of
    :func:`sectio.micrograph.load`. A field that fails (unreadable, no calibration,
    nothing found) is recorded as failed and the rest go on; an
    :class:`~sectio.errors.OptionError` (the same for every field) stops the run. When
    every image failed for want of a pixel size and none was given, a
    :class:`~sectio.errors.CalibrationError` says how to give one. ``progress`` wraps the
    list of images for the loop (e.g. a progress bar); the library itself prints nothing.
    """
    from .micrograph import load
    from .report import atomic_write_bytes
    from .review.runs import source_entry

    records: list[FieldRecord] = []
    used: set[str] = set()
    used_edits: set[str] = set()
    images = list(images)
    calibration_failures = 0
    for path in (progress(images) if progress else images):
        try:
            mg = load(path, **calibration)
            measured = measure_field(kind, mg, options, edit_folder=out, used_edits=used_edits)
        except OptionError:
            raise
        except InputError as exc:
            records.append(FieldRecord.failed(kind, os.fspath(path), str(exc)))
            calibration_failures += (isinstance(exc, CalibrationError)
                                     and (kind == "grains" or calibration.get("scale_bar") is None))
            if on_skip:
                on_skip(os.fspath(path), exc)
            continue
        except Exception as exc:  # noqa: BLE001 - one field's fault never ends the run
            from .report._safe import unexpected_failure

            reason = unexpected_failure(path, exc)
            records.append(FieldRecord.failed(kind, os.fspath(path), reason))
            if on_skip:
                on_skip(os.fspath(path), InputError(reason))
            continue
        name = overlay_name(os.fspath(path), used)
        assert measured.image_sha256 is not None and measured.edit_file is not None
        atomic_write_bytes(out / name, measured.overlay_png())
        source = source_entry(kind, image_sha=measured.image_sha256, calibration=dict(calibration),
                              options=dict(options), edit_file=measured.edit_file)
        records.append(replace(measured.record, overlay_png=name, source=source))
    if (not any(r.ok for r in records) and calibration_failures == len(images)
            and calibration.get("pixel_size") is None):
        raise CalibrationError(
            f"None of the images carries a pixel size; give --pixel-size (e.g. "
            f"{example_pixel_size}), --objective or --scale-bar with the bar's length."
        )
    return records


@dataclass(frozen=True)
class ResultDocument:
    """The grains or particles document of one specimen, with what is written beside it."""

    kind: str
    doc: dict  # sectio/grains@1 or sectio/particles@1
    records: tuple[FieldRecord, ...]  # the measured fields, in image order
    overlays: dict[str, FieldRecord]  # overlay file name -> its field
    sizes: Any = None  # particles: SizeDistribution of the pooled whole sections
    area_um2: float = 0.0  # particles: total area of the measured fields

    @property
    def csv_columns(self) -> list[str]:
        """Columns of the CSV file."""
        return CSV_COLUMNS[self.kind]

    def csv_rows(self) -> list[dict]:
        """One row per grain or particle of every measured field."""
        return [row for r in self.records for row in r.csv_rows()]

    def intercepts_um(self) -> list[float]:
        """Grains: the chord lengths of every field (for the histogram)."""
        return [v for r in self.records for v in (r.intercepts_um or ())]

    def whole_sections(self) -> tuple[np.ndarray, np.ndarray]:
        """Particles: pooled ECD and edge weights of the whole particles of every field."""
        parts = [r.whole_sections() for r in self.records]
        if not parts:
            return np.zeros(0), np.zeros(0)
        return np.concatenate([p[0] for p in parts]), np.concatenate([p[1] for p in parts])


_CALIBRATION_KEYS = ("pixel_size", "scale_bar", "crop_bottom")


def _calibration_options(calibration: Mapping) -> dict:
    """The calibration part of a document's options: the three basic keys first, then the
    others (objective, calibration file, keep_strip) in the order given."""
    return {"pixel_size": calibration.get("pixel_size"),
            "scale_bar": calibration.get("scale_bar"),
            "crop_bottom": calibration.get("crop_bottom", 0),
            **{k: v for k, v in calibration.items() if k not in _CALIBRATION_KEYS}}


def _fields(records: Sequence[FieldRecord], used: set[str], suffix: str, edits: bool):
    """(kept records, their field entries, failed entries, rejected entries)."""
    from .review.runs import split_rejected

    ok = [r for r in records if r.ok]
    dicts = []
    for r in ok:
        name = r.overlay_png or overlay_name(r.image, used, suffix)
        dicts.append({**r.result, "overlay_png": name,
                      **({"source": r.source} if r.source is not None else {})})
    failed = [{"image": r.image, "reason": r.reason} for r in records if not r.ok]
    kept_dicts, rejected = split_rejected(dicts)
    kept = [r for r in ok if not r.rejected]
    return kept, kept_dicts, failed, (rejected if edits else None)


def _document(schema: str, options: dict, dicts: list[dict], summary: dict, failed: list,
              rejected: list | None) -> dict:
    doc = {"schema": schema, "options": options, "fields": dicts, "summary": summary,
           "failed": failed}
    if rejected is not None:
        doc["rejected"] = rejected
    return doc


def grains_document(records: Sequence[FieldRecord], *, calibration: Mapping, options,
                    used: set[str] | None = None, suffix: str = "_overlay",
                    edits: bool = False) -> ResultDocument:
    """The ``sectio/grains@1`` document of a specimen from its field records.

    ``options`` is the :class:`sectio.grains.GrainOptions` the fields were measured with;
    ``used`` the overlay names already taken in the specimen's folder; ``edits``: the
    fields were looked up for hand edits (the document then lists ``"rejected"``).
    """
    from .grains import SCHEMA, summarize_grains

    kept, dicts, failed, rejected = _fields(records, set() if used is None else used, suffix,
                                            edits)
    doc = _document(SCHEMA, {**_calibration_options(calibration), **options.to_dict()}, dicts,
                    summarize_grains(dicts), failed, rejected)
    return ResultDocument("grains", doc, tuple(kept),
                          {d["overlay_png"]: r for d, r in zip(dicts, kept, strict=True)})


def particles_document(records: Sequence[FieldRecord], *, calibration: Mapping,
                       measure: Mapping, bootstrap: int = 200, used: set[str] | None = None,
                       suffix: str = "_overlay", edits: bool = False) -> ResultDocument:
    """The ``sectio/particles@1`` document of a specimen from its field records.

    ``measure`` holds the keyword arguments of :func:`sectio.particles.measure_particles`
    the fields were measured with (its ``seed`` also seeds the bootstrap); ``edits`` as
    for :func:`grains_document`.
    """
    from .particles import SCHEMA
    from .stereology import size_distribution, summarize_particle_fields

    kept, dicts, failed, rejected = _fields(records, set() if used is None else used, suffix,
                                            edits)
    seed = measure.get("seed", 0)
    sections = [r.whole_sections() for r in kept]
    sizes = None
    if kept:
        sizes = size_distribution(np.concatenate([s[0] for s in sections]),
                                  np.concatenate([s[1] for s in sections]))
    summary = summarize_particle_fields([r.result for r in kept],
                                        [r.measure_options for r in kept], sections,
                                        bootstrap=bootstrap, seed=seed, sizes=sizes)
    options = {**_calibration_options(calibration), "phase": measure.get("phase", "bright"),
               "threshold": measure.get("threshold"), "min_size_um": measure.get("min_size_um"),
               "split": measure.get("split", True),
               "foil_thickness_um": measure.get("foil_thickness_um"), "seed": seed,
               **(kept[0].measure_options if kept else {})}
    doc = _document(SCHEMA, options, dicts, summary, failed, rejected)
    if kept:
        doc["size_distribution_png"] = SIZE_DISTRIBUTION_PNG
    return ResultDocument("particles", doc, tuple(kept),
                          {d["overlay_png"]: r for d, r in zip(dicts, kept, strict=True)},
                          sizes=sizes,
                          area_um2=float(sum(r.result["field_area_um2"] for r in kept)))


def _pick(d: Mapping, columns) -> dict:
    row = {}
    for col, key, index, factor in columns:
        v = d.get(key)
        if index is not None:
            v = v[index] if isinstance(v, (list, tuple)) and len(v) > index else None
        if factor != 1 and isinstance(v, (int, float)) and not isinstance(v, bool):
            v = v * factor
        row[col] = v
    return row


def image_name(image: str, base: str | os.PathLike | None) -> str:
    """The name an image is shown under in the CSV files: relative to ``base`` (the output
    folder of a single command), or as stored (a study's names are relative to the study
    folder already)."""
    if base is None:
        return image
    try:
        return os.path.relpath(os.path.abspath(image), os.path.abspath(base))
    except ValueError:  # another drive (Windows): no relative path exists
        return image


def field_summary_rows(part: ResultDocument, *, specimen: str = "",
                       image_base: str | os.PathLike | None = None) -> list[dict]:
    """One row per measured field of ``part``: the numbers of the report's field tables,
    taken from the document's ``fields`` entries (same values, unit in each column name).

    Grains: the per-field 95 % CI of the mean intercept is the one a single-field run of
    that field reports (its sub-regions, :func:`sectio.grains.summarize_grains`).
    """
    import warnings

    rows = []
    for d in part.doc["fields"]:
        d = dict(d)
        if part.kind == "grains":
            from .grains import summarize_grains

            with warnings.catch_warnings():
                warnings.simplefilter("ignore")  # one field: the CI basis says so
                d["mean_intercept_ci95_um"] = summarize_grains([d])["mean_intercept_ci95_um"]
        flags = list(d.get("flags") or ()) + list(d.get("suspect_flags") or ())
        rows.append({"specimen": specimen, "image": image_name(d["image"], image_base),
                     **_pick(d, _FIELD_COLUMNS[part.kind]),
                     "overlay_png": d.get("overlay_png"), "flags": sorted(set(flags))})
    return rows


def specimen_summary_row(part: ResultDocument, *, specimen: str = "") -> dict:
    """The specimen-level values of ``part`` (its document's ``summary``) as one row: each
    quantity with its field-to-field standard deviation, 95 % CI and relative accuracy."""
    summary = part.doc["summary"]
    prefix = "grain" if part.kind == "grains" else "particle"
    return {"specimen": specimen, **_pick(summary, _SPECIMEN_COLUMNS[part.kind]),
            f"{prefix}_fields_failed": len(part.doc.get("failed", ())),
            f"{prefix}_flags": list(summary.get("flags") or ())}


def study_field_rows(specimen: str, documents: Mapping) -> list[dict]:
    """A study's ``fields.csv`` rows of one specimen: its grain fields, then its particle
    fields (``documents`` maps ``grains`` / ``particles`` to a :class:`ResultDocument` or
    None, as :func:`sectio.study.specimen_documents` returns)."""
    rows = []
    for kind in KINDS:
        part = documents.get(kind)
        if part is not None:
            rows.extend({"specimen": r.pop("specimen"), "kind": kind, **r}
                        for r in field_summary_rows(part, specimen=specimen))
    return rows


def study_specimen_row(specimen: str, documents: Mapping) -> dict:
    """A study's ``specimens.csv`` row: grains, particles and the yield estimate (median
    and 95 % interval, terms left out, flags) of one specimen side by side."""
    row: dict = {"specimen": specimen}
    for kind in KINDS:
        part = documents.get(kind)
        if part is not None:
            row.update(specimen_summary_row(part, specimen=specimen))
    st = documents.get("strength")
    if st is not None:
        lo, hi = st["yield_mpa"]["ci95"]
        row.update({"yield_median_mpa": st["yield_mpa"]["median"], "yield_ci95_low_mpa": lo,
                    "yield_ci95_high_mpa": hi,
                    "strength_terms_missing": list(st["inputs"].get("terms", {})
                                                   .get("missing", ())),
                    "strength_flags": list(st.get("flags", ()))})
    return row


def write_result(folder: Path, part: ResultDocument, *, dialect: str = "comma",
                 specimen: str | None = None,
                 image_base: str | os.PathLike | None = None) -> Path:
    """Write ``<kind>.json``, ``<kind>.csv`` (one row per grain or particle),
    ``<kind>_fields.csv`` (one row per field), ``<kind>_specimen.csv`` (one row) and
    (particles) the size-distribution figure into ``folder``; the overlays are written where
    the fields are measured. Returns the JSON file's path.

    ``dialect`` is a key of :data:`sectio.report.CSV_DIALECTS`; ``specimen`` names the row
    of the specimen file (default: the folder's name); ``image_base`` the folder image names
    are made relative to in the CSV files (see :func:`image_name`).
    """
    from .report import write_csv, write_json

    if "size_distribution_png" in part.doc:
        from .report.particles import write_size_distribution_png

        write_size_distribution_png(folder / part.doc["size_distribution_png"], part.sizes,
                                    area_um2=part.area_um2, n_fields=len(part.records),
                                    summary=part.doc["summary"])
    specimen = Path(folder).name if specimen is None else specimen
    rows = [{**r, "image": image_name(r["image"], image_base)} for r in part.csv_rows()]
    write_csv(folder / f"{part.kind}.csv", rows, columns=part.csv_columns, dialect=dialect,
              digits=ROW_DIGITS)
    write_csv(folder / f"{part.kind}_fields.csv",
              field_summary_rows(part, specimen=specimen, image_base=image_base),
              dialect=dialect, digits=SUMMARY_DIGITS)
    write_csv(folder / f"{part.kind}_specimen.csv", [specimen_summary_row(part, specimen=specimen)],
              dialect=dialect, digits=SUMMARY_DIGITS)
    return write_json(folder / f"{part.kind}.json", part.doc)
