"""Measured inputs of the strength models, read from grains/particles summary dicts.

The summaries come from ``grains.json`` (schema ``sectio/grains@1``) and ``particles.json``
(``sectio/particles@1``). Each mean carries a standard error; when it is missing it is
recovered from the 95 % interval half-width divided by t(0.975, dof) — the Student-t recipe of
ASTM E112/E1382/E562 field statistics (REFERENCES §1.6).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

from ..errors import DegenerateDataWarning, InputError


class SummaryError(InputError, ValueError):
    """A grains/particles summary lacks a value or holds a value that cannot be right."""


@dataclass(frozen=True)
class MeasuredValue:
    """A measured mean with its standard error and the degrees of freedom of its t interval."""

    value: float
    se: float
    dof: float | None
    source: str

    def to_dict(self) -> dict:
        return {"value": self.value, "se": self.se, "dof": self.dof, "source": self.source}


def _t975(dof: float) -> float:
    from scipy import stats

    return float(stats.t.ppf(0.975, dof))


def _dof(summary: dict, what: str) -> float | None:
    dof = summary.get("dof")
    if dof is None:
        n = summary.get("n_fields")
        if n is None:
            return None
        dof = float(n) - 1
    dof = float(dof)
    if dof < 1:
        warnings.warn(
            f"The {what} summary comes from a single field: no field-to-field uncertainty is "
            "available, so only the model constants' uncertainty is propagated.",
            DegenerateDataWarning,
            stacklevel=4,
        )
        return None
    return dof


def measured_value(
    summary: dict,
    key: str,
    *,
    what: str,
    se_key: str,
    ci_key: str,
    scale: float = 1.0,
    fraction: bool = False,
) -> MeasuredValue:
    """Read ``summary[key]`` with its standard error (or derive it from the 95 % CI).

    ``scale`` converts units (e.g. µm -> nm); ``fraction`` checks 0 < value < 1.
    """
    if key not in summary or summary[key] is None:
        raise SummaryError(
            f"The {what} summary has no {key!r}; re-run the measurement or "
            "add the value to the summary."
        )
    try:
        value = float(summary[key])
    except (TypeError, ValueError):
        raise SummaryError(
            f"The {what} summary value {key!r} = {summary[key]!r} is not a number; fix the file."
        ) from None
    if not math.isfinite(value) or value <= 0 or (fraction and value >= 1):
        limit = "between 0 and 1" if fraction else "positive"
        raise SummaryError(f"The {what} summary value {key!r} must be {limit}, got {value!r}.")
    dof = _dof(summary, what)
    se = summary.get(se_key)
    source = f"{what} summary {key!r}, standard error {se_key!r}"
    if se is None and summary.get(ci_key) is not None and dof is not None:
        lo, hi = (float(v) for v in summary[ci_key])
        se = (hi - lo) / 2.0 / _t975(dof)
        source = f"{what} summary {key!r}, standard error from {ci_key!r} / t(0.975, {dof:g})"
    if se is None:
        se = 0.0
        source = f"{what} summary {key!r} (no standard error or interval given)"
    se = float(se)
    if not math.isfinite(se) or se < 0:
        raise SummaryError(
            f"The {what} summary standard error {se_key!r} must be a "
            f"non-negative number, got {se!r}."
        )
    return MeasuredValue(value * scale, se * scale, dof if se > 0 else None, source)


def grain_intercept_um(grains_summary: dict) -> MeasuredValue:
    """Mean lineal intercept (µm) and its standard error from a grains summary."""
    return measured_value(
        grains_summary,
        "mean_intercept_um",
        what="grains",
        se_key="mean_intercept_se_um",
        ci_key="mean_intercept_ci95_um",
    )


@dataclass(frozen=True)
class ParticleMeasurements:
    """Planar particle quantities of one specimen (lengths in nm, density in nm⁻²)."""

    area_fraction: MeasuredValue
    mean_section_diameter_nm: MeasuredValue
    sections_per_nm2: MeasuredValue | None
    sphere_diameter_nm: MeasuredValue | None

    def to_dict(self) -> dict:
        return {
            "area_fraction": self.area_fraction.to_dict(),
            "mean_section_diameter_nm": self.mean_section_diameter_nm.to_dict(),
            "sections_per_nm2": None
            if self.sections_per_nm2 is None
            else self.sections_per_nm2.to_dict(),
            "sphere_diameter_nm": None
            if self.sphere_diameter_nm is None
            else self.sphere_diameter_nm.to_dict(),
        }


def particle_measurements(particles_summary: dict) -> ParticleMeasurements:
    """Read the particle quantities used by the Orowan forms from a particles summary."""
    fraction = measured_value(
        particles_summary,
        "area_fraction",
        what="particles",
        se_key="area_fraction_se",
        ci_key="area_fraction_ci95",
        fraction=True,
    )
    ecd = measured_value(
        particles_summary,
        "mean_ecd_um",
        what="particles",
        se_key="mean_ecd_se_um",
        ci_key="mean_ecd_ci95_um",
        scale=1e3,
    )
    density = None
    if particles_summary.get("particles_per_um2") is not None:
        density = measured_value(
            particles_summary,
            "particles_per_um2",
            what="particles",
            se_key="particles_per_um2_se",
            ci_key="particles_per_um2_ci95",
            scale=1e-6,
        )
    sphere = None
    if particles_summary.get("mean_sphere_diameter_um") is not None:
        sphere = measured_value(
            particles_summary,
            "mean_sphere_diameter_um",
            what="particles",
            se_key="mean_sphere_diameter_se_um",
            ci_key="mean_sphere_diameter_ci95_um",
            scale=1e3,
        )
    return ParticleMeasurements(fraction, ecd, density, sphere)


# ℓ̄ = 0.891·√Ā in the ASTM E112 tables (REFERENCES §1.1 row 1g: 0.32·√7.75), and an
# equivalent circle diameter of the mean section area is √(4Ā/π): ℓ̄ = 0.891·√(π/4)·ECD.
_E112_INTERCEPT_PER_SQRT_AREA = 0.32 * math.sqrt(7.75)
ECD_TO_INTERCEPT = _E112_INTERCEPT_PER_SQRT_AREA * math.sqrt(math.pi / 4.0)

GRAIN_SIZE_MEASURES = ("mean_lineal_intercept", "ecd", "astm_g")


def grain_intercept_from(
    value: float, se: float = 0.0, *, measure: str = "mean_lineal_intercept", dof=None
) -> MeasuredValue:
    """Mean lineal intercept ℓ̄ (µm) from a grain size given in another measure.

    ``measure``: ``mean_lineal_intercept`` (µm, as is), ``ecd`` (µm, equivalent circle
    diameter of the mean section area; ℓ̄ = 0.891·√(π/4)·ECD = 0.790·ECD, the E112 table
    ratio ℓ̄/√Ā = 0.891) or ``astm_g`` (grain size number; ℓ̄ = 320·2^(−G/2) µm, ASTM
    E112 intercept relation). The standard error is carried to first order.
    """
    from ..errors import OptionError
    from ..stereology import intercept_um_from_astm_g

    if measure not in GRAIN_SIZE_MEASURES:
        raise OptionError(
            f"Unknown grain-size measure {measure!r}; use {', '.join(GRAIN_SIZE_MEASURES)}."
        )
    value, se = float(value), float(se)
    if not (math.isfinite(value) and math.isfinite(se)) or se < 0:
        raise OptionError(f"The grain size {value!r} ± {se!r} must be finite, sd >= 0.")
    if measure == "astm_g":
        lbar = float(intercept_um_from_astm_g(value))
        lbar_se = lbar * math.log(2.0) / 2.0 * se  # |dℓ̄/dG| = ℓ̄·ln2/2
        source = f"ASTM E112 intercept relation from G = {value:g} ± {se:g}"
    else:
        if value <= 0:
            raise OptionError(f"The grain size must be positive, got {value!r} µm.")
        factor = 1.0 if measure == "mean_lineal_intercept" else ECD_TO_INTERCEPT
        lbar, lbar_se = factor * value, factor * se
        source = (
            "mean lineal intercept given by the user"
            if factor == 1.0
            else f"from ECD {value:g} µm: ℓ̄ = {ECD_TO_INTERCEPT:.4f}·ECD (ASTM E112 table ratio)"
        )
    return MeasuredValue(lbar, lbar_se, dof if lbar_se > 0 else None, source)
