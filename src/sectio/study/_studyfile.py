"""Reading a study file (TOML): specimens, field images, calibration, options, trial variable.

Every mistake is reported as :class:`sectio.errors.StudyFileError` with the file name, the
line and the dotted key, e.g. ``study.toml line 12, key specimens.LC-1-650.images: ...``.
Syntax errors come from :mod:`tomllib` (which knows the line); for everything else the line
of the key is found by scanning the file text (:func:`key_lines`).

A minimal study file::

    [study]
    title = "Annealing trial"

    [specimens.A-650]
    images = ["A650_*.tif"]           # globs, relative to the study file's folder
    measure = ["grains"]              # and/or "particles"
    material = "steel-ferritic-lowc"
    trial = { name = "annealing temperature", value = 650, unit = "°C" }
    calibration = { pixel_size = "0.5um" }
    # or: calibration = { objective = "50x" }   (from 'sectio calibrate'; the file is
    #     [study] calibration_file, else $SECTIO_CALIBRATIONS, else the per-user file)

The report header and sign-off come from an optional ``[report]`` table (keys in
:data:`REPORT_KEYS`: report ``number``, ``date``, ``operator``, ``laboratory``,
``customer``, ``standards``, ``checked_by``, ``approved_by`` and the defaults ``instrument``,
``etchant``, ``objective``, ``magnification`` for every specimen); a specimen may set
``heat``, ``etchant``, ``objective``, ``magnification`` and ``instrument`` itself.
"""

from __future__ import annotations

import glob
import os
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .._checks import check_number
from ..errors import InputError, StudyFileError

__all__ = ["RECORD_KEYS", "REPORT_KEYS", "Specimen", "Study", "TrialVariable", "key_lines",
           "load_study", "parse_study", "with_report_fields"]

#: Time units a trial variable may carry, with their value in hours (for the trend fits).
TIME_UNITS_H = {"s": 1 / 3600, "min": 1 / 60, "h": 1.0, "d": 24.0}

#: Keys of the [report] table: what a laboratory puts in a report header and sign-off.
REPORT_KEYS = {"number": str, "date": str, "operator": str, "laboratory": str,
               "customer": str, "standards": (list, str), "checked_by": str,
               "approved_by": str, "instrument": str, "etchant": str, "objective": str,
               "magnification": (str, int, float)}
#: Keys a specimen may set for its own record (they override the [report] defaults).
RECORD_KEYS = ("heat", "etchant", "objective", "magnification", "instrument")
_STUDY_KEYS = {"title": str, "description": str, "seed": int, "draws": int,
               "materials_file": str, "bootstrap": int, "calibration_file": str}
_SPECIMEN_KEYS = {"description": str, "images": (list, str), "measure": (list, str),
                  "material": str, "series": str, "trial": dict, "calibration": dict,
                  "grains": dict, "particles": dict, "strength": dict, "heat": str,
                  "etchant": str, "objective": str, "magnification": (str, int, float),
                  "instrument": str}
_TRIAL_KEYS = {"name": str, "value": (int, float), "unit": str}
_CALIBRATION_KEYS = {"pixel_size": (str, int, float), "scale_bar": (str, int, float),
                     "crop_bottom": int, "objective": str, "calibration_file": str,
                     "keep_strip": bool}
_GRAIN_KEYS = {"boundaries": str, "contrast": str, "min_grain_size": (str, int, float),
               "line_spacing_px": int, "angles_deg": list, "ridge_scale_px": (int, float),
               "gap_px": (int, float), "remove_scratches": bool, "threshold_high": (int, float),
               "threshold_low": (int, float), "subregions": int}
_PARTICLE_KEYS = {"phase": str, "threshold": (int, float), "min_size": (str, int, float),
                  "split": bool, "foil_thickness": (str, int, float),
                  "points_per_side": int, "n_classes": int}
_STRENGTH_KEYS = {"grain_size_convention": str, "orowan_form": str, "spacing": str,
                  "superposition": str, "exponent": (int, float), "scope": str,
                  "friction": (str, int, float, list), "solid_solution": (str, int, float, list),
                  "dislocation_density": (str, int, float, list), "taylor_alpha": (int, float),
                  "shearing_size_nm": (int, float), "allow_nanocrystalline": bool}
_MEASURES = ("grains", "particles")
#: Names in a study's output folder that a specimen folder must not take.
RESERVED_NAMES = {"fields", "study.json", "run_log.json", "report.html", "report.pdf"}


@dataclass(frozen=True)
class TrialVariable:
    """The trial variable of a specimen: e.g. annealing temperature 650 °C."""

    name: str
    value: float
    unit: str

    @property
    def is_time(self) -> bool:
        return self.unit in TIME_UNITS_H

    def to_dict(self) -> dict:
        return {"name": self.name, "value": self.value, "unit": self.unit}


@dataclass(frozen=True)
class Specimen:
    """One specimen of a study: its fields and how to measure them."""

    name: str
    images: tuple[str, ...]  # as shown in outputs: relative to the study folder
    image_paths: tuple[Path, ...]  # absolute
    measure: tuple[str, ...]
    material: str | None
    series: str | None
    trial: TrialVariable | None
    calibration: dict
    grain_options: dict  # keyword arguments of sectio.grains.make_options
    particle_options: dict  # keyword arguments of sectio.particles.measure_particles
    strength_options: dict  # keyword arguments of StrengthOptions
    description: str = ""
    record: dict = field(default_factory=dict)  # heat, etchant, objective, ... (RECORD_KEYS)

    def to_dict(self) -> dict:
        return {
            "name": self.name,
            "description": self.description,
            "series": self.series,
            "trial": None if self.trial is None else self.trial.to_dict(),
            "material": self.material,
            "measure": list(self.measure),
            "images": list(self.images),
            "calibration": dict(self.calibration),
            "record": dict(self.record),
        }


@dataclass(frozen=True)
class Study:
    """A parsed and checked study file."""

    path: Path
    title: str
    description: str
    seed: int
    draws: int
    bootstrap: int
    materials_file: Path | None
    specimens: tuple[Specimen, ...] = field(default_factory=tuple)
    report: dict = field(default_factory=dict)  # the [report] table (REPORT_KEYS)

    @property
    def folder(self) -> Path:
        return self.path.parent

    def n_fields(self) -> int:
        return sum(len(s.image_paths) * len(s.measure) for s in self.specimens)


# --------------------------------------------------------------------------- key lines
_HEADER = re.compile(r"^\s*\[\[?\s*([^\]]+?)\s*\]\]?\s*(#.*)?$")
_ASSIGN = re.compile(r"^\s*((?:[A-Za-z0-9_\-]+|\"[^\"]*\"|'[^']*')"
                     r"(?:\s*\.\s*(?:[A-Za-z0-9_\-]+|\"[^\"]*\"|'[^']*'))*)\s*=")
_PART = re.compile(r"[A-Za-z0-9_\-]+|\"[^\"]*\"|'[^']*'")
_INLINE_KEY = re.compile(r"[{,]\s*([A-Za-z0-9_\-]+|\"[^\"]*\"|'[^']*')\s*=")


def _parts(text: str) -> list[str]:
    return [p.strip("\"'") for p in _PART.findall(text)]


def key_lines(text: str) -> dict[tuple[str, ...], int]:
    """Map every key path of a TOML text to the (1-based) line where it is written.

    Table headers, ``key = value`` lines, dotted keys and the keys of one-line inline
    tables are found; multi-line strings and arrays are skipped over roughly (a line that
    looks like an assignment inside them is rare in a study file).
    """
    lines: dict[tuple[str, ...], int] = {}
    table: tuple[str, ...] = ()
    for no, line in enumerate(text.splitlines(), start=1):
        m = _HEADER.match(line)
        if m and "=" not in m.group(1):
            table = tuple(_parts(m.group(1)))
            lines.setdefault(table, no)
            continue
        m = _ASSIGN.match(line)
        if m:
            key = table + tuple(_parts(m.group(1)))
            lines.setdefault(key, no)
            rest = line[m.end():]
            if "{" in rest:
                for sub in _INLINE_KEY.findall(rest):
                    lines.setdefault(key + (sub.strip("\"'"),), no)
    return lines


class _Reporter:
    """Builds StudyFileErrors naming the file, line and key."""

    def __init__(self, path: Path, text: str):
        self.name = path.name
        self.lines = key_lines(text)

    def line_of(self, key: tuple[str, ...]) -> int | None:
        for n in range(len(key), 0, -1):
            if key[:n] in self.lines:
                return self.lines[key[:n]]
        return None

    def error(self, key: tuple[str, ...], message: str) -> StudyFileError:
        line = self.line_of(key)
        where = f"{self.name} line {line}" if line else self.name
        return StudyFileError(f"{where}, key {'.'.join(key)}: {message}")


def _type_name(t) -> str:
    names = {str: "a string", int: "an integer", float: "a number", bool: "true or false",
             list: "a list", dict: "a table"}
    ts = t if isinstance(t, tuple) else (t,)
    return " or ".join(dict.fromkeys(names[x] for x in ts))


def _check_table(rep: _Reporter, key: tuple[str, ...], table, allowed: dict) -> dict:
    if not isinstance(table, dict):
        raise rep.error(key, f"expected a table, got {table!r}.")
    for k, v in table.items():
        if k not in allowed:
            known = ", ".join(sorted(allowed))
            raise rep.error(key + (k,), f"unknown key; known keys here: {known}.")
        want = allowed[k]
        want_t = want if isinstance(want, tuple) else (want,)
        ok = isinstance(v, want_t) and not (isinstance(v, bool) and bool not in want_t)
        if not ok:
            raise rep.error(key + (k,), f"expected {_type_name(want)}, got {v!r}.")
    return table


def _as_list(v) -> list:
    return [v] if isinstance(v, str) else list(v)


def _expand_images(rep, key, patterns, folder: Path) -> tuple[list[str], list[Path]]:
    shown, paths = [], []
    for pat in patterns:
        if not isinstance(pat, str) or not pat.strip():
            raise rep.error(key, f"each entry must be a file name or glob, got {pat!r}.")
        full = pat if os.path.isabs(pat) else str(folder / pat)
        hits = sorted(glob.glob(full)) if glob.has_magic(pat) else (
            [full] if os.path.exists(full) else [])
        hits = [h for h in hits if os.path.isfile(h)]
        if not hits:
            raise rep.error(key, f"no image file matches {pat!r} (relative to {folder}); "
                                 "check the name or the glob.")
        for h in hits:
            p = Path(h).resolve()
            if p in paths:
                continue
            paths.append(p)
            # relative to the study folder even for ../ and absolute patterns: outputs never
            # carry absolute paths
            shown.append(Path(os.path.relpath(p, folder.resolve())).as_posix())
    return shown, paths


def _grain_options(rep, key, table: dict) -> dict:
    from .._checks import RANGES
    from ..grains import check_angles, make_options
    from ..units import parse_length_um

    opts = dict(table)
    for k, v in table.items():
        try:
            if k == "angles_deg":
                opts[k] = check_angles(v)
            elif k in RANGES:
                opts[k] = check_number(v, what=k, name=k)
            elif k == "min_grain_size":
                parse_length_um(v, what=k, default_unit="um")
        except InputError as exc:
            raise rep.error(key + (k,), str(exc)) from None
    try:
        make_options(**opts)
    except InputError as exc:
        raise rep.error(key, str(exc)) from None
    return opts


def _particle_options(rep, key, table: dict) -> dict:
    from ..units import parse_length_um

    out: dict = {}
    for k, v in table.items():
        try:
            if k == "phase" and v not in ("bright", "dark"):
                raise StudyFileError(f"phase must be 'bright' or 'dark', got {v!r}.")
            if k in ("threshold", "points_per_side", "n_classes"):
                v = check_number(v, what=k, name=k, open_low=k == "threshold")
            if k == "min_size":
                out["min_size_um"] = parse_length_um(v, what="particles.min_size")
            elif k == "foil_thickness":
                out["foil_thickness_um"] = parse_length_um(v, what="particles.foil_thickness")
            else:
                out[k] = v
        except InputError as exc:
            raise rep.error(key + (k,), str(exc)) from None
    return out


def _strength_options(rep, key, table: dict) -> dict:
    from ..strength import (
        CONVENTION_CHOICES,
        OROWAN_CHOICES,
        SCOPE_CHOICES,
        SPACING_CHOICES,
        SUPERPOSITION_CHOICES,
        StrengthOptions,
    )
    from ..units import parse_value_sd

    choices = {"orowan_form": OROWAN_CHOICES, "spacing": SPACING_CHOICES,
               "grain_size_convention": CONVENTION_CHOICES,
               "superposition": SUPERPOSITION_CHOICES, "scope": SCOPE_CHOICES}
    out: dict = {}
    for k, v in table.items():
        try:
            if k in choices and v not in choices[k]:
                raise StudyFileError(f"{v!r} is not one of {', '.join(choices[k])}.")
            if k in ("friction", "solid_solution", "dislocation_density"):
                text = "+-".join(str(x) for x in v) if isinstance(v, list) else str(v)
                name = {"friction": "friction_mpa", "solid_solution": "solid_solution_mpa",
                        "dislocation_density": "dislocation_density_per_m2"}[k]
                out[name] = parse_value_sd(text, what=f"strength.{k}",
                                           stress=k != "dislocation_density")
            elif k == "shearing_size_nm":
                out["shearing_diameter_nm"] = check_number(v, what=k, name=k, open_low=True)
            elif k in ("exponent", "taylor_alpha"):
                out[k] = check_number(v, what=k, name=k)
            else:
                out[k] = v
        except InputError as exc:
            raise rep.error(key + (k,), str(exc)) from None
    try:
        StrengthOptions.from_kwargs(**out)
    except InputError as exc:
        raise rep.error(key, str(exc)) from None
    return out


def _calibration(rep, key, table: dict, folder: Path, default_file: str | None) -> dict:
    from ..calibration import lookup_objective
    from ..units import parse_length_um

    cal: dict[str, Any] = {"pixel_size": None, "scale_bar": None, "crop_bottom": 0}
    for k, v in table.items():
        if k in ("pixel_size", "scale_bar") and not (k == "scale_bar" and v == "auto"):
            try:
                parse_length_um(v, what=f"calibration.{k}", default_unit="um")
            except InputError as exc:
                raise rep.error(key + (k,), str(exc)) from None
        if k == "crop_bottom":
            try:
                check_number(v, what=k, name=k)
            except InputError as exc:
                raise rep.error(key + (k,), str(exc)) from None
        cal[k] = v
    given = [k for k in ("pixel_size", "objective", "scale_bar") if cal.get(k) is not None]
    if len(given) > 1:
        raise rep.error(key, f"give one of pixel_size, objective and scale_bar, not "
                             f"{' and '.join(given)}.")
    if cal.get("objective") is not None:
        # the objective's µm/px is looked up now: a wrong name fails here, and the value
        # enters the fields' cache keys (a new calibration measures the fields again)
        name = cal.pop("calibration_file", None) or default_file
        file = str((folder / name).resolve()) if name else None
        try:
            record = lookup_objective(cal["objective"], file)
        except InputError as exc:
            raise rep.error(key + ("objective",), str(exc)) from None
        cal["calibration_file"] = record["file"]
        cal["objective_pixel_size_um"] = record["pixel_size_um"]
    return cal


def parse_study(text: str, path: str | os.PathLike) -> Study:
    """Parse and check a study file's text; ``path`` names it and anchors relative globs."""
    path = Path(path)
    folder = path.resolve().parent
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise StudyFileError(f"{path.name}: not valid TOML ({exc}); fix the syntax there.") \
            from None
    rep = _Reporter(path, text)
    unknown = sorted(set(doc) - {"study", "specimens", "report"})
    if unknown:
        raise rep.error((unknown[0],), "unknown table; a study file has [study], [report] "
                                       "and [specimens.NAME] tables.")
    report = dict(_check_table(rep, ("report",), doc.get("report", {}), REPORT_KEYS))
    if isinstance(report.get("standards"), str):
        report["standards"] = [report["standards"]]
    if not all(isinstance(x, str) for x in report.get("standards", [])):
        raise rep.error(("report", "standards"), "list the standards as strings, e.g. "
                                                 '["ASTM E112-13", "ASTM E1382"].')
    head = _check_table(rep, ("study",), doc.get("study", {}), _STUDY_KEYS)
    materials_file = None
    if head.get("materials_file"):
        materials_file = (folder / head["materials_file"]).resolve()
        if not materials_file.is_file():
            raise rep.error(("study", "materials_file"),
                            f"cannot find {head['materials_file']!r} next to the study file.")
    for k in ("draws", "bootstrap", "seed"):
        if k in head:
            try:
                check_number(head[k], what=k, name=k)
            except InputError as exc:
                raise rep.error(("study", k), str(exc)) from None
    specs_doc = doc.get("specimens")
    if not isinstance(specs_doc, dict) or not specs_doc:
        raise rep.error(("specimens",), "no specimens; add at least one [specimens.NAME] "
                                        "table with its images.")
    specimens = []
    for name, sd in specs_doc.items():
        key = ("specimens", name)
        if not re.fullmatch(r"[A-Za-z0-9][A-Za-z0-9_.\-]{0,99}", name):
            raise rep.error(key, "specimen names may use letters, digits, '-', '_' and '.' "
                                 "(up to 100 characters; they name output folders).")
        if name.lower() in RESERVED_NAMES:
            raise rep.error(key, f"{name!r} is the name of a study output; call the specimen "
                                 "something else.")
        _check_table(rep, key, sd, _SPECIMEN_KEYS)
        if "images" not in sd:
            raise rep.error(key, "missing key 'images' (a list of file names or globs).")
        shown, paths = _expand_images(rep, key + ("images",), _as_list(sd["images"]), folder)
        measure = tuple(_as_list(sd.get("measure", ["grains"])))
        bad = [m for m in measure if m not in _MEASURES]
        if bad or not measure or len(set(measure)) != len(measure):
            raise rep.error(key + ("measure",), "list 'grains' and/or 'particles', each once.")
        material = sd.get("material")
        if material is not None:
            from ..strength import get_material

            try:
                get_material(material, materials_file)
            except InputError as exc:
                raise rep.error(key + ("material",), str(exc)) from None
        trial = None
        if "trial" in sd:
            t = _check_table(rep, key + ("trial",), sd["trial"], _TRIAL_KEYS)
            missing = [k for k in ("name", "value") if k not in t]
            if missing:
                raise rep.error(key + ("trial",), f"missing {missing[0]!r}; write e.g. "
                                "trial = { name = \"ageing time\", value = 16, unit = \"h\" }.")
            try:
                value = check_number(t["value"], what="value", name="trial_value")
            except InputError as exc:
                raise rep.error(key + ("trial", "value"), str(exc)) from None
            trial = TrialVariable(str(t["name"]), float(value), str(t.get("unit", "")))
        cal = _calibration(rep, key + ("calibration",),
                           _check_table(rep, key + ("calibration",), sd.get("calibration", {}),
                                        _CALIBRATION_KEYS), folder, head.get("calibration_file"))
        g = _grain_options(rep, key + ("grains",),
                           _check_table(rep, key + ("grains",), sd.get("grains", {}),
                                        _GRAIN_KEYS))
        p = _particle_options(rep, key + ("particles",),
                              _check_table(rep, key + ("particles",), sd.get("particles", {}),
                                           _PARTICLE_KEYS))
        s = _strength_options(rep, key + ("strength",),
                              _check_table(rep, key + ("strength",), sd.get("strength", {}),
                                           _STRENGTH_KEYS))
        series = sd.get("series") or (trial.name if trial else None)
        specimens.append(Specimen(
            name=name, images=tuple(shown), image_paths=tuple(paths), measure=measure,
            material=material, series=series, trial=trial, calibration=cal,
            grain_options=g, particle_options=p, strength_options=s,
            description=sd.get("description", ""),
            record={k: str(sd.get(k, report.get(k))) for k in RECORD_KEYS
                    if sd.get(k, report.get(k)) is not None}))
    _check_series(rep, specimens)
    return Study(path=path, title=head.get("title", path.stem),
                 description=head.get("description", ""), seed=int(head.get("seed", 0)),
                 draws=int(head.get("draws", 20000)), bootstrap=int(head.get("bootstrap", 200)),
                 materials_file=materials_file, specimens=tuple(specimens), report=report)


def _check_series(rep: _Reporter, specimens: list[Specimen]) -> None:
    first: dict[str, Specimen] = {}
    for s in specimens:
        if s.series is None or s.trial is None:
            continue
        f = first.setdefault(s.series, s)
        ft, st = f.trial, s.trial
        assert ft is not None  # only specimens with a trial are in ``first``
        if (ft.name, ft.unit) != (st.name, st.unit):
            raise rep.error(("specimens", s.name, "trial"),
                            f"series {s.series!r} mixes trial variables: "
                            f"{ft.name} [{ft.unit}] in {f.name} and "
                            f"{st.name} [{st.unit}] here; use one variable and unit "
                            "per series (or set 'series' to split them).")


def load_study(path: str | os.PathLike) -> Study:
    """Read and check a study file; raises :class:`StudyFileError` naming line and key."""
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise StudyFileError(f"Cannot find the study file {path}; check the path.") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise StudyFileError(f"Cannot read the study file {path} ({exc}); save it as UTF-8 "
                             "text.") from None
    return parse_study(text, p)


def with_report_fields(study: Study, **fields) -> Study:
    """The study with [report] keys set from elsewhere (e.g. command-line options).

    ``fields`` are REPORT_KEYS; None leaves the file's value. Specimen records take the
    new defaults where the specimen sets none of its own.
    """
    from dataclasses import replace

    given = {k: v for k, v in fields.items() if v not in (None, (), [])}
    unknown = sorted(set(given) - set(REPORT_KEYS))
    if unknown:
        raise StudyFileError(f"Unknown report field(s) {unknown}; known: {sorted(REPORT_KEYS)}.")
    if isinstance(given.get("standards"), str):
        given["standards"] = [given["standards"]]
    if "standards" in given:
        given["standards"] = list(given["standards"])
    report = {**study.report, **given}
    specs = []
    for spec in study.specimens:
        record = dict(spec.record)
        for k in RECORD_KEYS:
            if k in given and (k not in record or record[k] == str(study.report.get(k))):
                record[k] = str(given[k])
        specs.append(replace(spec, record=record))
    return replace(study, report=report, specimens=tuple(specs))
