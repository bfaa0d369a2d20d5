"""Running a study: plan the field tasks, skip finished ones, execute, assemble, report.

Output folder layout::

    DIR/fields/<key>.json       one record per field (written atomically; the resume cache)
    DIR/fields/<key>.png        its overlay (written before the record)
    DIR/<specimen>/grains.json  particles.json  strength.json  *.csv  overlays
    DIR/study.json              schema sectio/study@1 (deterministic: no times, no abs. paths)
    DIR/report.html  report.pdf
    DIR/run_log.json            timings and what was computed or reused (differs per run)
"""

from __future__ import annotations

import json
import os
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

from .. import __version__
from ..report import atomic_write_bytes, to_json_text, write_csv, write_json
from ..report._safe import OutputError
from ..specimen import SUMMARY_DIGITS, study_field_rows, study_specimen_row, write_result
from ._assemble import STUDY_SCHEMA, specimen_documents, trend_points
from ._studyfile import REPORT_KEYS, Study
from ._work import RECORD_SCHEMA, FieldTask, field_key

__all__ = ["StudyRun", "plan_fields", "run_study"]


@dataclass(frozen=True)
class PlannedField:
    specimen: str
    kind: str
    image: str  # shown name
    path: Path
    key: str


@dataclass
class StudyRun:
    """What a run did: the study document, output folder, counts and failures."""

    out_dir: Path
    study_doc: dict
    computed: int
    reused: int
    failed: list = field(default_factory=list)
    seconds: float = 0.0
    field_seconds: float = 0.0  # measuring the fields (pool start-up included)

    @property
    def ok(self) -> bool:
        return not self.failed


def _task_options(study: Study, spec, kind: str) -> dict:
    if kind == "grains":
        opts = dict(spec.grain_options)
        if "angles_deg" in opts:
            opts["angles_deg"] = list(opts["angles_deg"])
        return opts
    return {**spec.particle_options, "seed": study.seed}


def _read_image(path: Path, shown: str) -> bytes:
    from ..errors import ImageReadError
    from ..report._safe import display_text

    try:
        return path.read_bytes()
    except OSError as exc:
        raise ImageReadError(f"Cannot read the image {display_text(shown)} "
                             f"({(exc.strerror or type(exc).__name__).lower()}); check the file "
                             "and its permissions, then run the study again.") from None


def plan_fields(study: Study) -> list[PlannedField]:
    """Every (specimen, kind, image) of the study with its content key, in study order."""
    plan = []
    for spec in study.specimens:
        for kind in spec.measure:
            opts = _task_options(study, spec, kind)
            for shown, path in zip(spec.images, spec.image_paths, strict=True):
                data = _read_image(path, shown)
                plan.append(PlannedField(spec.name, kind, shown, path,
                                         field_key(data, kind, spec.calibration, opts)))
    return plan


def _with_edit_files(plan: list[PlannedField], out: Path):
    """Find each field's edit file in its specimen folder; its edits join the field's key.

    Returns ``(plan, edits)`` with ``edits[(specimen, kind, image)] = (doc, file name)``.
    An edit file made on another version of the image is refused with one sentence (the
    field is recorded as failed with that sentence; the others go on).
    """
    import hashlib
    from dataclasses import replace

    from ..review.editfile import EditFileError, edit_file_name, image_sha256, read_edit_file
    from ._work import canonical_json

    used: dict[str, set[str]] = {}
    edits: dict[tuple[str, str, str], tuple[dict | None, str, str | None]] = {}
    new_plan: list[PlannedField] = []
    for pf in plan:
        name = edit_file_name(pf.image, pf.kind, used.setdefault(pf.specimen, set()))
        p = out / pf.specimen / name
        try:
            doc = read_edit_file(p, image_sha=image_sha256(pf.path)) if p.is_file() else None
        except EditFileError as exc:  # this field fails; the study goes on
            edits[(pf.specimen, pf.kind, pf.image)] = (None, name, str(exc))
            h = hashlib.sha256(pf.key.encode() + b"\0refused\0" + str(exc).encode())
            new_plan.append(replace(pf, key=h.hexdigest()))
            continue
        edits[(pf.specimen, pf.kind, pf.image)] = (doc, name, None)
        if doc is not None:
            h = hashlib.sha256(pf.key.encode() + canonical_json(doc) + name.encode())
            pf = replace(pf, key=h.hexdigest())
        else:
            h = hashlib.sha256(pf.key.encode() + b"\0" + name.encode())
            pf = replace(pf, key=h.hexdigest())
        new_plan.append(pf)
    return new_plan, edits


def _load_record(folder: Path, key: str) -> dict | None:
    p = folder / f"{key}.json"
    try:
        rec = json.loads(p.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not (isinstance(rec, dict) and rec.get("schema") == RECORD_SCHEMA
            and rec.get("key") == key and rec.get("status") in ("ok", "failed")):
        return None
    if rec["status"] == "ok" and not (folder / f"{key}.png").is_file():
        return None
    return rec


def _roundtrip(record: dict) -> dict:
    return json.loads(to_json_text(record))


def run_study(study: Study, out_dir: str | os.PathLike, *, workers: int | None = None,
              scheduler: str | None = None, scheduler_timeout_s: float = 20.0,
              report: bool = True, progress: Callable[[int, int], None] | None = None,
              csv_dialect: str = "comma") -> StudyRun:
    """Measure every field of ``study`` (skipping finished ones) and write all outputs.

    Parameters
    ----------
    study : Study
        From :func:`sectio.study.load_study`.
    out_dir : path
        Output folder (created). Field records in ``out_dir/fields`` are reused on a rerun.
    workers : int, optional
        Local worker processes (default ``os.cpu_count()``; 1 runs in this process).
    scheduler : str, optional
        ``tcp://HOST:PORT`` of a Dask distributed scheduler; the fields run there.
    scheduler_timeout_s : float
        How long to try to reach the scheduler.
    report : bool
        Also write report.html and report.pdf.
    progress : callable(done, total), optional
        Called after each field that had to be computed.
    csv_dialect : str
        Delimiter and decimal mark of the CSV files, a key of
        :data:`sectio.report.CSV_DIALECTS`.
    """
    from ..report._safe import prepare_out_dir
    from ._guard import clean_stale_temp, study_lock

    out = prepare_out_dir(out_dir)
    with study_lock(out):
        clean_stale_temp(out)  # what a killed run left behind
        return _run_locked(study, out, workers=workers, scheduler=scheduler,
                           scheduler_timeout_s=scheduler_timeout_s, report=report,
                           progress=progress, csv_dialect=csv_dialect)


def _run_locked(study: Study, out: Path, *, workers, scheduler, scheduler_timeout_s, report,
                progress, csv_dialect="comma") -> StudyRun:
    from ._executors import dask_executor, local_executor, serial_executor
    from ._guard import TMP_NAME

    t0 = time.perf_counter()
    fields_dir = out / "fields"
    try:
        fields_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        from ..report._safe import output_error

        raise output_error(fields_dir / "x", exc) from None
    # image copies of local workers live inside the output folder (cleaned at the next
    # start if the run is killed); a Dask worker on another machine uses its own temp
    tmp_dir = None if scheduler else str((out / TMP_NAME).resolve())
    plan, edits = _with_edit_files(plan_fields(study), out)
    records: dict[str, dict] = {}
    transient: dict[str, dict] = {}
    todo: dict[str, PlannedField] = {}
    for pf in plan:
        if pf.key in records or pf.key in todo:
            continue
        refused = edits[(pf.specimen, pf.kind, pf.image)][2]
        if refused:
            records[pf.key] = {"schema": RECORD_SCHEMA, "key": pf.key, "kind": pf.kind,
                               "image": pf.image, "sectio_version": __version__,
                               "status": "failed", "reason": refused}
            continue
        rec = _load_record(fields_dir, pf.key)
        if rec is not None:
            records[pf.key] = rec
        else:
            todo[pf.key] = pf
    reused = len(records)
    specs = {s.name: s for s in study.specimens}

    def tasks():
        for pf in todo.values():
            spec = specs[pf.specimen]

            def make(pf=pf, spec=spec):
                doc, name, _ = edits.get((pf.specimen, pf.kind, pf.image), (None, "", None))
                return FieldTask(pf.key, pf.kind, pf.image, _read_image(pf.path, pf.image),
                                 dict(spec.calibration), _task_options(study, spec, pf.kind),
                                 tmp_dir=tmp_dir, edits=doc, edit_file=name)

            yield make

    n_workers = workers or os.cpu_count() or 1
    if scheduler:
        execu = dask_executor(tasks(), address=scheduler, timeout_s=scheduler_timeout_s)
    elif n_workers == 1 or len(todo) <= 1:
        execu = serial_executor(tasks())
    else:
        execu = local_executor(tasks(), workers=min(n_workers, len(todo)))
    done = 0
    t_fields = time.perf_counter()
    if progress:
        progress(0, len(todo))
    for task, record, png in execu:
        if record.get("status") == "error":  # an unexpected failure: not cached
            transient[task.key] = _roundtrip(record)
        else:
            if png is not None:
                atomic_write_bytes(fields_dir / f"{task.key}.png", png)
            data = to_json_text(record, indent=1).encode("utf-8")
            atomic_write_bytes(fields_dir / f"{task.key}.json", data)
            records[task.key] = json.loads(data)
        done += 1
        if progress:
            progress(done, len(todo))
    computed = done
    field_seconds = time.perf_counter() - t_fields
    run = assemble(study, out, plan, {**records, **transient}, report=report,
                   csv_dialect=csv_dialect)
    run.computed, run.reused = computed, reused
    run.seconds = time.perf_counter() - t0
    run.field_seconds = field_seconds
    write_json(out / "run_log.json", {
        "schema": "sectio/study-run@1", "sectio_version": __version__,
        "study_file": study.path.name, "fields_planned": len(plan),
        # the study folder relative to this output folder (where images are looked up again)
        "study_folder": os.path.relpath(Path(study.path).resolve().parent, out.resolve()),
        "fields_computed": computed, "fields_reused": reused,
        "executor": (f"dask {scheduler}" if scheduler else
                     f"local, {n_workers} worker(s)"),
        "seconds": run.seconds,
        "field_seconds": field_seconds,
        "fields_per_minute": 60.0 * computed / field_seconds if field_seconds > 0 else None,
    })
    return run


def _with_image(record: dict, image: str) -> dict:
    """The record as seen under the image name of this study (content keys are shared)."""
    from ._work import _replace_strings

    old = record.get("image")
    if old == image or not old:
        return record
    return _replace_strings(record, old, image)


def assemble(study: Study, out: Path, plan, records: dict, *, report: bool = True,
             csv_dialect: str = "comma") -> StudyRun:
    """Write per-specimen documents, study.json and the report from the field records.

    Besides each specimen's files, ``fields.csv`` (one row per field of every specimen) and
    ``specimens.csv`` (one row per specimen: grains, particles and strength side by side)
    go into ``out``; image names in them are relative to the study folder."""
    fields_dir = out / "fields"
    by_spec: dict[str, dict[str, list]] = {}
    for pf in plan:
        rec = records[pf.key]
        by_spec.setdefault(pf.specimen, {}).setdefault(pf.kind, []).append(
            _with_image(rec, pf.image))
    docs, spec_entries, failed = {}, [], []
    field_rows, specimen_rows = [], []
    for spec in study.specimens:
        recs = by_spec.get(spec.name, {})
        try:
            d = specimen_documents(study, spec, recs)
        except OutputError:
            raise
        except Exception as exc:  # noqa: BLE001 - one specimen's fault never ends the study
            reason = (f"the summaries of specimen {spec.name} could not be made "
                      f"({type(exc).__name__}: {str(exc)[:200]}); its field records are kept "
                      "in fields/ — please report this as a fault in sectio.")
            failed.append({"specimen": spec.name, "kind": "specimen", "image": "",
                           "reason": reason})
            d = {"grains": None, "particles": None, "strength": None,
                 "strength_error": reason, "warnings": []}
        docs[spec.name] = d
        sdir = out / spec.name
        files = {}
        for kind in ("grains", "particles"):
            part = d[kind]
            if part is None:
                continue
            for name, rec in part.overlays.items():
                src = fields_dir / f"{rec.key}.png"
                atomic_write_bytes(sdir / name, src.read_bytes())
            write_result(sdir, part, dialect=csv_dialect, specimen=spec.name)
            files[kind] = f"{spec.name}/{kind}.json"
        if d["strength"] is not None:
            write_json(sdir / "strength.json", d["strength"])
            files["strength"] = f"{spec.name}/strength.json"
        field_rows.extend(study_field_rows(spec.name, d))
        specimen_rows.append(study_specimen_row(spec.name, d))
        fl = [{"specimen": spec.name, "kind": kind, "image": r["image"], "reason": r["reason"]}
              for kind, rs in recs.items() for r in rs if r["status"] != "ok"]
        failed.extend(fl)
        st = d["strength"]
        spec_entries.append({
            **spec.to_dict(),
            "files": files,
            "fields": [{"kind": kind, "image": r["image"], "key": r["key"],
                        "status": r["status"]} for kind, rs in recs.items() for r in rs],
            "grains": d["grains"].doc["summary"] if d["grains"] else None,
            "particles": ({k: v for k, v in d["particles"].doc["summary"].items()
                           if k != "unfolding"} if d["particles"] else None),
            "strength": None if st is None else {
                k: st[k] for k in ("yield_mpa", "contributions_mpa", "variance_share",
                                   "assumptions", "flags", "warnings", "caution")},
            "strength_note": d["strength_error"],
            "warnings": d["warnings"],
            "failed": fl,
        })
    doc = {
        "schema": STUDY_SCHEMA,
        "title": study.title,
        "description": study.description,
        "study_file": study.path.name,
        "sectio_version": __version__,
        "report": {k: study.report.get(k) for k in REPORT_KEYS},
        "settings": {"seed": study.seed, "draws": study.draws, "bootstrap": study.bootstrap,
                     "materials_file": (study.materials_file.name
                                        if study.materials_file else None)},
        "specimens": spec_entries,
        "trends": trend_points(study, docs),
        "failed": failed,
    }
    write_json(out / "study.json", doc)
    write_csv(out / "fields.csv", field_rows, dialect=csv_dialect, digits=SUMMARY_DIGITS)
    write_csv(out / "specimens.csv", specimen_rows, dialect=csv_dialect, digits=SUMMARY_DIGITS)
    if report:
        from ..report.html import report_data, write_html_report
        from ..report.pdf import write_pdf_report

        def report_failed(name: str, exc: Exception) -> None:
            failed.append({"specimen": "", "kind": "report", "image": name,
                           "reason": f"{name} could not be made ({type(exc).__name__}: "
                                     f"{str(exc)[:200]}); study.json and the specimen files "
                                     "are complete — please report this fault."})
            doc["failed"] = failed
            write_json(out / "study.json", doc)

        try:
            data = report_data(doc, docs, out)
        except OutputError:
            raise
        except Exception as exc:  # noqa: BLE001 - the measured results are written
            report_failed("report.html", exc)
            data = None
        for name, writer in (("report.html", write_html_report),
                             ("report.pdf", write_pdf_report)):
            if data is None:
                break
            try:
                writer(out / name, data)
            except OutputError:
                raise
            except Exception as exc:  # noqa: BLE001 - the measured results are written
                report_failed(name, exc)
    return StudyRun(out, doc, 0, 0, failed)
