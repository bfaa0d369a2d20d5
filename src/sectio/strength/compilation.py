"""Hall–Petch constants from a compilation of published studies, with a between-study spread.

Published yield stresses of one pure metal differ from study to study far more than within a
study (purity, test rate, how each study measured grain size). A 95 % interval that is to
cover what an *independent* study measures must therefore carry the between-study spread,
not only the standard errors of a pooled fit. The model used here:

    σ_study(d) = F_study · (σ₀ + k·d^(−½)),   ln F_study ~ N(0, τ²)

σ₀ ≥ 0 and k ≥ 0 are fitted by least squares on ln σ with every study given equal weight
(each point weighs 1/n_study), so that a study with many rows does not dominate. τ is
estimated by leave-one-study-out: every study is predicted from a fit to the others and the
root-mean-square log error of those predictions (equal weight per study) is taken; it is
widened by √(1 + 1/m) and by t(0.975, m − 1)/1.96 for m studies (the predictive interval of
a new member of a group of m, Student 1908). With fewer than 3 studies no such estimate
exists and a prior τ (e.g. the median over other metals) is used and recorded.

In the Monte Carlo of :mod:`.estimate` the model is σ₀ and k log-normal with median as
fitted, log sd τ and correlation 1 (one common factor F).

The data are rows of the compilation by Cordero, Knight & Schuh, "Six decades of the
Hall–Petch effect – a survey of grain-size strengthening studies on pure metals",
Int. Mater. Rev. 61 (2016) 495–512, supplementary table S1: grain size as each study
measured it, yield or flow stress, strain definition, test type and reference number.

This module is pure (it parses text it is given and returns results).
"""

from __future__ import annotations

import csv
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from ..errors import InputError

COMPILATION_SOURCE = (
    "Cordero, Knight & Schuh 2016, Int. Mater. Rev. 61:495, table S1 (tension tests)"
)
NANOCRYSTALLINE_LIMIT_UM = 0.1  # Hall–Petch is not applied below (REFERENCES §4.5)

Studies = Mapping[str, Sequence[tuple[float, float]]]


class CompilationError(InputError, ValueError):
    """Compilation rows cannot be used (missing column, too few studies, ...)."""


@dataclass(frozen=True)
class CompilationFit:
    """σ₀, k and the between-study log spread τ of one metal."""

    sigma0_mpa: float
    k_mpa_sqrt_m: float
    log_sd: float
    log_sd_method: str
    n_studies: int
    n_points: int
    grain_size_range_um: tuple[float, float]

    def predict_mpa(self, grain_size_um):
        """Median prediction σ₀ + k·d^(−½) (d in µm)."""
        return self.sigma0_mpa + self.k_mpa_sqrt_m / np.sqrt(np.asarray(grain_size_um) * 1e-6)

    def interval_mpa(self, grain_size_um, z: float = 1.959963984540054):
        """95 % interval of a new study's value, median·exp(±1.96·τ)."""
        m = self.predict_mpa(grain_size_um)
        return m * math.exp(-z * self.log_sd), m * math.exp(z * self.log_sd)


def read_compilation(
    text: str, *, element: str, tests: Sequence[str] = ("TT",), origin: str = "compilation"
) -> dict[str, list[tuple[float, float]]]:
    """Rows of ``element`` and test types ``tests`` as {reference: [(d µm, σ MPa), ...]}.

    Rows below 0.1 µm (nanocrystalline, where sectio refuses Hall–Petch) are left out.
    """
    reader = csv.DictReader(text.splitlines())
    need = {"element", "grain_size_um", "yield_mpa", "test", "reference_number"}
    if not need <= set(reader.fieldnames or ()):
        raise CompilationError(
            f"{origin} needs the columns {sorted(need)}; got {reader.fieldnames}."
        )
    out: dict[str, list[tuple[float, float]]] = {}
    for row in reader:
        if row["element"] != element or row["test"] not in tests:
            continue
        d, y = float(row["grain_size_um"]), float(row["yield_mpa"])
        if d < NANOCRYSTALLINE_LIMIT_UM or y <= 0:
            continue
        out.setdefault(row["reference_number"], []).append((d, y))
    return out


def _arrays(studies: Studies):
    x, y, w = [], [], []
    for pts in studies.values():
        for d, s in pts:
            x.append(1.0 / math.sqrt(d * 1e-6))
            y.append(s)
            w.append(1.0 / len(pts))
    return np.array(x), np.array(y), np.array(w)


def fit_line_log(studies: Studies) -> tuple[float, float]:
    """σ₀ ≥ 0, k ≥ 0 minimising Σ w·(ln(σ₀ + k·x) − ln σ)², w = 1/n_study."""
    from scipy.optimize import least_squares

    x, y, w = _arrays(studies)
    if not fittable(studies):
        raise CompilationError(
            "A Hall–Petch line needs grain sizes spanning at least a factor of 2."
        )
    sw = np.sqrt(w)

    def residual(p):
        return sw * (np.log(np.maximum(p[0] + p[1] * x, 1e-9)) - np.log(y))

    k0 = max(np.polyfit(x, y, 1)[0], 1e-4)
    start = [max(float(np.min(y)) / 2, 0.0), k0]
    res = least_squares(residual, start, bounds=([0.0, 0.0], [np.inf, np.inf]), xtol=1e-12)
    return float(res.x[0]), float(res.x[1])


def fittable(studies: Studies) -> bool:
    """True if the grain sizes span at least a factor of 2 (else the slope is undefined)."""
    ds = [d for pts in studies.values() for d, _ in pts]
    return bool(ds) and max(ds) >= 2.0 * min(ds)


def _loso_log_errors(studies: Studies) -> list[tuple[str, np.ndarray]]:
    """Per held-out study: ln(observed / predicted from the other studies)."""
    out = []
    for held, pts in studies.items():
        rest = {s: v for s, v in studies.items() if s != held}
        s0, k = fit_line_log(rest)
        d = np.array([p[0] for p in pts])
        y = np.array([p[1] for p in pts])
        out.append((held, np.log(y / (s0 + k / np.sqrt(d * 1e-6)))))
    return out


def between_study_log_sd(studies: Studies, *, prior_log_sd: float | None = None) -> tuple:
    """τ and how it was found (see the module notes)."""
    from scipy import stats

    m = len(studies)
    usable = m >= 3 and all(
        fittable({s: v for s, v in studies.items() if s != h}) for h in studies
    )
    if not usable:
        if prior_log_sd is None:
            raise CompilationError(
                f"Only {m} usable studies: give a prior between-study log sd."
            )
        return float(prior_log_sd), f"prior (only {m} studies): {prior_log_sd:.3g}"
    errs = _loso_log_errors(studies)
    mean_sq = np.mean([np.mean(e**2) for _, e in errs])  # equal weight per study
    widen = math.sqrt(1.0 + 1.0 / m) * stats.t.ppf(0.975, m - 1) / stats.norm.ppf(0.975)
    tau = math.sqrt(mean_sq) * widen
    return tau, (
        f"leave-one-study-out rms log error {math.sqrt(mean_sq):.3g} over {m} studies, "
        f"× √(1 + 1/m)·t(0.975, {m - 1})/1.96 = {tau:.3g}"
    )


def fit_compilation(studies: Studies, *, prior_log_sd: float | None = None) -> CompilationFit:
    """σ₀, k and τ of one metal from its studies ({reference: [(d µm, σ MPa)]})."""
    if not studies:
        raise CompilationError("No studies to fit.")
    s0, k = fit_line_log(studies)
    tau, how = between_study_log_sd(studies, prior_log_sd=prior_log_sd)
    ds = [d for pts in studies.values() for d, _ in pts]
    return CompilationFit(
        sigma0_mpa=s0,
        k_mpa_sqrt_m=k,
        log_sd=tau,
        log_sd_method=how,
        n_studies=len(studies),
        n_points=len(ds),
        grain_size_range_um=(min(ds), max(ds)),
    )


@dataclass(frozen=True)
class HeldOutStudy:
    """How one study is predicted by the constants fitted without it.

    ``testable`` is False when the other studies cannot be fitted (their grain sizes span
    less than a factor of 2); such a study is reported but not counted.
    """

    reference: str
    n_points: int
    n_inside: int
    relative_errors: tuple[float, ...]
    testable: bool = True

    def to_dict(self) -> dict:
        return {
            "reference": self.reference,
            "n_points": self.n_points,
            "testable": self.testable,
            "n_inside_ci95": self.n_inside if self.testable else None,
            "median_relative_error": float(np.median(self.relative_errors))
            if self.testable
            else None,
        }


def leave_one_study_out(
    studies: Studies, *, prior_log_sd: float | None = None
) -> list[HeldOutStudy]:
    """Fit on all studies but one (σ₀, k and τ), predict the one left out; every study."""
    out = []
    for held, pts in studies.items():
        rest = {s: v for s, v in studies.items() if s != held}
        if not fittable(rest):
            out.append(HeldOutStudy(held, len(pts), 0, (), testable=False))
            continue
        fit = fit_compilation(rest, prior_log_sd=prior_log_sd)
        d = np.array([p[0] for p in pts])
        y = np.array([p[1] for p in pts])
        lo, hi = fit.interval_mpa(d)
        med = fit.predict_mpa(d)
        out.append(
            HeldOutStudy(
                held,
                len(pts),
                int(np.sum((y >= lo) & (y <= hi))),
                tuple(float(v) for v in np.abs(med - y) / y),
            )
        )
    return out
