"""Studies: many specimens × fields from one TOML file, run in parallel and resumable.

>>> from sectio.study import load_study, run_study              # doctest: +SKIP
>>> run = run_study(load_study("study.toml"), "results", workers=2)   # doctest: +SKIP
>>> run.study_doc["trends"][0]["coarsening"]["rate_nm3_per_unit"]   # doctest: +SKIP

Parts: :mod:`._studyfile` (parse and check the study file, errors with line and key),
:mod:`._work` (one field in a worker; content-hash keys), :mod:`._executors` (local
processes or a Dask cluster), :mod:`._assemble` (per-specimen documents through
:mod:`sectio.specimen`, and trends, from stored records), :mod:`._runner` (plan, skip, run,
write), :mod:`._trends` (LSW coarsening and parabolic grain-growth fits).
"""

from __future__ import annotations

from ._runner import StudyRun, plan_fields, run_study
from ._studyfile import (
    REPORT_KEYS,
    Specimen,
    Study,
    TrialVariable,
    key_lines,
    load_study,
    parse_study,
    with_report_fields,
)
from ._trends import (
    CoarseningFit,
    GrainGrowthFit,
    LineFit,
    fit_line,
    fit_lsw,
    fit_parabolic_growth,
)
from ._work import FieldTask, field_key, run_field

__all__ = [
    "REPORT_KEYS", "with_report_fields",
    "CoarseningFit", "FieldTask", "GrainGrowthFit", "LineFit", "Specimen", "Study", "StudyRun",
    "TrialVariable", "field_key", "fit_line", "fit_lsw", "fit_parabolic_growth",
    "key_lines", "load_study", "parse_study", "plan_fields",
    "run_field", "run_study",
]
