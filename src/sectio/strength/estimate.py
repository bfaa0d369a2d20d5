"""Yield-strength estimate from measured microstructure, with a Monte Carlo interval.

σ_y = σ₀ + k·d^(−½) + (σ_Orowan^q + σ_dislocation^q)^(1/q)   (default scope "obstacles")

σ₀ is the material's friction stress (or, if given, friction + solid solution); the
grain-boundary term uses the measured mean lineal intercept converted to the grain-size
convention of k; the Orowan term uses the chosen form and spacing. Every constant and
measured value enters a seeded Monte Carlo (:mod:`.montecarlo`); the result is a frozen
:class:`YieldEstimate` whose :meth:`YieldEstimate.to_dict` is the ``sectio/strength@1``
document.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, fields
from pathlib import Path

from .._display import Displayed
from ..errors import ExtrapolationWarning, OptionError
from . import hall_petch as hp
from .materials import Material, get_material
from .measured import (
    MeasuredValue,
    ParticleMeasurements,
    SummaryError,
    grain_intercept_um,
    particle_measurements,
)
from .montecarlo import DEFAULT_DRAWS, UncertainInput, first_order_sd, propagate, summarize
from .orowan import TAYLOR_FORMULA
from .particle_model import OrowanSetup, setup_orowan
from .superposition import superpose, superposition_exponent

SCHEMA = "sectio/strength@1"

CAUTION = (
    "Model estimate from microstructure-property correlations, not a measured property: it is "
    "no substitute for tensile testing to the governing standard (e.g. ASTM E8/E8M, "
    "ISO 6892-1) and it is not a design allowable; defer to applicable codes and licensed "
    "engineering judgement."
)

SCOPES = ("obstacles", "all_strengthening")


@dataclass(frozen=True)
class StrengthOptions:
    """Model choices of a yield estimate (all recorded in the output).

    Stresses given as options are ``(value, standard_uncertainty)`` pairs in MPa.
    ``hall_petch_fit`` is a ``sectio/hall-petch-fit@1`` document (from ``fit-hall-petch``):
    its σ₀, k, their covariance and grain-size convention replace the material's.
    """

    grain_size_convention: str | None = None
    orowan_form: str = "line_tension"
    spacing: str | None = None
    superposition: str = "linear"
    exponent: float | None = None
    scope: str = "obstacles"
    friction_mpa: tuple[float, float] | None = None
    solid_solution_mpa: tuple[float, float] | None = None
    dislocation_density_per_m2: tuple[float, float] | None = None
    taylor_alpha: float = 0.3
    shearing_diameter_nm: float | None = None
    allow_nanocrystalline: bool = False
    hall_petch_fit: dict | None = None

    @classmethod
    def from_kwargs(cls, **options) -> StrengthOptions:
        names = {f.name for f in fields(cls)}
        unknown = sorted(set(options) - names)
        if unknown:
            raise OptionError(f"Unknown strength option(s) {unknown}; known: {sorted(names)}.")
        return cls(**options)


@dataclass(frozen=True, repr=False)
class YieldEstimate(Displayed):
    """Yield-strength estimate: median, 95 % interval, contributions, inputs and caution.

    Shown in a console or notebook with its interval, the terms included and left out, its
    flags, assumptions and caution (``repr``, ``_repr_html_``).
    """

    yield_mpa: dict
    contributions_mpa: dict
    variance_share: dict
    inputs: dict
    monte_carlo: dict
    assumptions: tuple[str, ...]
    flags: tuple[str, ...]
    warnings: tuple[str, ...]
    caution: str = CAUTION

    @property
    def median_mpa(self) -> float:
        return self.yield_mpa["median"]

    @property
    def yield_ci95_mpa(self) -> tuple[float, float]:
        lo, hi = self.yield_mpa["ci95"]
        return (lo, hi)

    def _display(self):
        from .._display import _flags, num

        lo, hi = self.yield_ci95_mpa
        terms = self.inputs.get("terms", {})
        contrib = ", ".join(f"{k} {num(v['median'])}" for k, v in self.contributions_mpa.items()
                            if isinstance(v, dict) and "median" in v)
        material = self.inputs.get("material")
        rows = [("yield strength", f"{num(self.median_mpa, 'MPa')} "
                                   f"(95 % interval {num(lo)} – {num(hi)} MPa)"),
                ("material", str(material.get("name", "-") if isinstance(material, dict)
                                 else material)),
                ("contributions (MPa, median)", contrib or "-"),
                ("terms left out", ", ".join(terms.get("missing", ())) or "none"),
                ("flags", _flags(self.flags)),
                *((f"assumption {i}", a) for i, a in enumerate(self.assumptions, 1)),
                ("caution", self.caution)]
        return "yield-strength estimate", rows

    def to_dict(self) -> dict:
        """The ``sectio/strength@1`` JSON document (JSON-ready values)."""
        return {
            "schema": SCHEMA,
            "yield_mpa": self.yield_mpa,
            "contributions_mpa": self.contributions_mpa,
            "variance_share": self.variance_share,
            "inputs": {**self.inputs, "monte_carlo": self.monte_carlo},
            "assumptions": list(self.assumptions),
            "flags": list(self.flags),
            "warnings": list(self.warnings),
            "caution": self.caution,
        }


def _uncertain(name, pair, source, positive=True) -> UncertainInput:
    value, sd = (
        (float(pair[0]), float(pair[1])) if isinstance(pair, (tuple, list)) else (float(pair), 0.0)
    )
    if sd < 0 or not math.isfinite(value):
        raise OptionError(f"The option {name} needs a finite value and a non-negative sd.")
    return UncertainInput(name, value, sd, source, positive=positive)


def predict_yield(
    material: Material,
    *,
    mean_intercept: MeasuredValue | None = None,
    particles: ParticleMeasurements | None = None,
    options: StrengthOptions | None = None,
    seed: int = 0,
    draws: int = DEFAULT_DRAWS,
) -> YieldEstimate:
    """Predict the yield strength of one specimen with a Monte Carlo 95 % interval.

    Parameters
    ----------
    material : Material
        Constants (see :func:`sectio.strength.load_materials`).
    mean_intercept : MeasuredValue, optional
        Mean lineal intercept ℓ̄ in µm with its standard error; None omits Hall–Petch.
    particles : ParticleMeasurements, optional
        Planar particle quantities; None omits the Orowan term.
    options : StrengthOptions, optional
        Model choices; defaults serve the common case.
    seed, draws : int
        Monte Carlo seed and number of draws (recorded).

    Returns
    -------
    YieldEstimate
    """
    opt = options or StrengthOptions()
    q = superposition_exponent(opt.superposition, opt.exponent)
    if opt.scope not in SCOPES:
        raise OptionError(
            f"Unknown superposition scope {opt.scope!r}; use obstacles or all_strengthening."
        )
    messages: list[str] = []
    flags: list[str] = []
    inputs: list[UncertainInput] = []
    record: dict = {"material": material.to_dict()}

    # --- base stress: σ0 or friction + solid solution -----------------------------------
    if opt.friction_mpa is not None or opt.solid_solution_mpa is not None:
        base_names = []
        for name, pair in (
            ("friction_mpa", opt.friction_mpa),
            ("solid_solution_mpa", opt.solid_solution_mpa),
        ):
            if pair is not None:
                inputs.append(_uncertain(name, pair, "user option", positive=False))
                base_names.append(name)
        record["sigma0_parts"] = {
            n: inputs[-len(base_names) + i].to_dict() for i, n in enumerate(base_names)
        }
    else:
        s0 = material.sigma0_mpa
        inputs.append(_constant_input("sigma0_mpa", s0, positive=False))
        base_names = ["sigma0_mpa"]

    # --- Hall–Petch ---------------------------------------------------------------------
    convention = opt.grain_size_convention or material.grain_size_convention
    conv = hp.get_convention(convention)
    k_factor = hp.convention_k_factor(material.grain_size_convention, convention)
    if mean_intercept is not None:
        k = material.k_mpa_sqrt_m
        if k.log_sd is not None:
            inputs.append(
                UncertainInput(
                    "k_mpa_sqrt_m", k.value * k_factor, k.log_sd, k.source, lognormal=True
                )
            )
        else:
            inputs.append(
                UncertainInput(
                    "k_mpa_sqrt_m", k.value * k_factor, k.sd * k_factor, k.source, positive=True
                )
            )
        inputs.append(
            UncertainInput(
                "mean_intercept_um",
                mean_intercept.value,
                mean_intercept.se,
                mean_intercept.source,
                dof=mean_intercept.dof,
            )
        )
        d_material = hp.intercept_to_grain_size_um(
            mean_intercept.value, material.grain_size_convention
        )
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            hp_flags = hp.grain_size_flags(
                d_material,
                fitted_range_um=material.grain_size_range_um,
                allow_nanocrystalline=opt.allow_nanocrystalline,
            )
        messages += [str(w.message) for w in caught]
        flags += hp_flags
        record["hall_petch"] = {
            "sigma0_mpa": material.sigma0_mpa.value,
            "sigma0_sd_mpa": material.sigma0_mpa.sd,
            "sigma0_used": opt.friction_mpa is None and opt.solid_solution_mpa is None,
            "k_mpa_sqrt_m": k.value * k_factor,
            "k_sd_mpa_sqrt_m": k.sd * k_factor,
            "k_material_mpa_sqrt_m": k.value,
            "k_material_convention": material.grain_size_convention,
            "k_convention_factor": k_factor,
            "k_convention_factor_formula": "k_used = k_material·√(c_used/c_material)",
            "grain_size_um": conv.factor_to_intercept * mean_intercept.value,
            "grain_size_se_um": conv.factor_to_intercept * mean_intercept.se,
            "grain_size_convention": convention,
            "grain_size_conversion": {
                "factor_to_mean_intercept": conv.factor_to_intercept,
                "description": conv.description,
                "source": conv.source,
            },
            "mean_intercept": mean_intercept.to_dict(),
            "fitted_range_um": list(material.grain_size_range_um),
            "fitted_range_convention": material.grain_size_convention,
            "flags": hp_flags,
            "source": {
                "sigma0": material.sigma0_mpa.source,
                "k": material.k_mpa_sqrt_m.source,
                "fitted_range": material.grain_size_range_source,
                "material": f"{material.name} ({material.origin})",
            },
        }

    # --- Orowan and forest dislocations -------------------------------------------------
    orowan: OrowanSetup | None = None
    if particles is not None:
        orowan = setup_orowan(
            material,
            particles,
            form=opt.orowan_form,
            spacing=opt.spacing,
            shearing_diameter_nm=opt.shearing_diameter_nm,
        )
        inputs += orowan.inputs
        flags += orowan.flags
        messages += orowan.messages
        record["orowan"] = orowan.record
    if opt.dislocation_density_per_m2 is not None:
        inputs.append(
            _uncertain("dislocation_density_per_m2", opt.dislocation_density_per_m2, "user option")
        )
        record["dislocation"] = {
            "formula": TAYLOR_FORMULA,
            "taylor_alpha": opt.taylor_alpha,
            "taylor_alpha_source": "user option (0.2-0.4 typical; default 0.3, from memory)",
            "dislocation_density_per_m2": inputs[-1].to_dict(),
        }
    has_dis = opt.dislocation_density_per_m2 is not None
    form = orowan.record["form"] if orowan is not None else None
    needs = {
        "taylor_factor": has_dis or form in ("classic", "line_tension"),
        "shear_modulus_gpa": has_dis or form in ("classic", "line_tension", "ashby_orowan"),
    }
    for key, needed in needs.items():
        if needed:
            qty = getattr(material, key)
            inputs.append(UncertainInput(key, qty.value, qty.sd, qty.source))
    if mean_intercept is None and particles is None and opt.dislocation_density_per_m2 is None:
        raise SummaryError(
            "Nothing to estimate from: give a grains summary, a particles "
            "summary or a dislocation density."
        )

    def model(v):
        out = {"sigma0" if base_names == ["sigma0_mpa"] else n[:-4]: v[n] for n in base_names}
        if mean_intercept is not None:
            d_um = conv.factor_to_intercept * v["mean_intercept_um"]
            out["grain_boundary"] = hp.grain_boundary_term_mpa(d_um, k_mpa_sqrt_m=v["k_mpa_sqrt_m"])
        obstacles = {}
        if orowan is not None:
            obstacles["orowan"] = orowan.stress_mpa(v)
        if opt.dislocation_density_per_m2 is not None:
            from .orowan import taylor_dislocation_mpa

            obstacles["dislocation"] = taylor_dislocation_mpa(
                taylor_factor=v["taylor_factor"],
                alpha=opt.taylor_alpha,
                shear_modulus_gpa=v["shear_modulus_gpa"],
                burgers_nm=material.burgers_nm.value,
                dislocation_density_per_m2=v["dislocation_density_per_m2"],
            )
        additive = {k: out[k] for k in out}
        combined = dict(obstacles)
        if opt.scope == "all_strengthening" and "grain_boundary" in additive:
            combined["grain_boundary"] = additive.pop("grain_boundary")
        total = sum(additive.values())
        if combined:
            total = total + superpose(combined, rule=opt.superposition, exponent=opt.exponent)
        out.update(obstacles)
        out["total"] = total
        return out

    for message in messages:
        warnings.warn(message, ExtrapolationWarning, stacklevel=2)
    names = {i.name for i in inputs}
    correlations = (
        {("sigma0_mpa", "k_mpa_sqrt_m"): material.sigma0_k_correlation}
        if {"sigma0_mpa", "k_mpa_sqrt_m"} <= names and material.sigma0_k_correlation != 0
        else {}
    )
    mc = propagate(model, inputs, draws=draws, seed=seed, correlations=correlations)
    central = model({i.name: i.value for i in inputs})
    fo_sd = first_order_sd(
        lambda v: model(v)["total"],
        [
            i
            if (i.dof is None or i.dof > 2)
            else UncertainInput(i.name, i.value, i.scale, i.source)
            for i in inputs
        ],
        correlations=correlations,
    )

    def stats(name):
        s = summarize(mc.outputs[name])
        s["at_central_inputs"] = float(central[name])
        return s

    contributions = {k: stats(k) for k in mc.outputs if k != "total"}
    scope_terms = (
        ["orowan", "dislocation"]
        if opt.scope == "obstacles"
        else ["grain_boundary", "orowan", "dislocation"]
    )
    superposition = {
        "rule": opt.superposition,
        "exponent": q,
        "scope": opt.scope,
        "combined_terms": [t for t in scope_terms if t in contributions],
        "formula": "σ_y = Σ(additive terms) + (Σ_i σ_i^q)^(1/q) over the combined terms",
        "source": "linear: Pickering 1978; rss: Koppenaal & Kuhlmann-Wilsdorf 1964; "
        "power: Lagerpusch, Mohles & Nembach (q ≈ 1.8)",
    }
    contributions["superposition"] = superposition
    record["superposition"] = superposition
    yield_stats = stats("total")
    monte_carlo = {
        "seed": mc.seed,
        "draws": mc.draws,
        "generator": "numpy.random.default_rng (PCG64)",
        "distributions": {i.name: i.to_dict() for i in inputs},
        "truncated_fraction": mc.truncated_fraction,
        "invalid_fraction": mc.invalid_fraction,
        "variance_share_method": "one input varied at a time (others at central values), "
        "variances normalised to sum to 1",
        "first_order_sd_mpa": fo_sd,
        "correlations": [
            {"inputs": list(pair), "r": r, "source": material.sigma0_k_correlation_source}
            for pair, r in correlations.items()
        ],
    }
    terms, missing = _terms(mean_intercept, particles, opt)
    record["terms"] = {"included": terms, "missing": missing}
    if "grain_boundary" in missing:
        flags.append("no_grain_boundary_term")
    corr_text = (
        f"σ0 and k correlated (r = {material.sigma0_k_correlation:g}: "
        f"{material.sigma0_k_correlation_source})"
        if correlations
        else "inputs are independent"
    )
    assumptions = [
        f"{corr_text}; the other inputs are independent; constants' uncertainties reflect "
        "the spread of published values",
        f"grain size: mean lineal intercept converted to the {convention} convention "
        f"(×{conv.factor_to_intercept:g}); Hall–Petch fitted to the {material.yield_definition}",
        "random texture (Taylor factor of the material class)",
    ]
    if orowan is not None:
        assumptions += [
            "particles are not sheared but bypassed (Orowan)",
            "volume fraction equals the measured area fraction (Delesse)",
        ]
    for term in missing:
        assumptions.append(_MISSING_TEXT[term])
    return YieldEstimate(
        yield_mpa=yield_stats,
        contributions_mpa=contributions,
        variance_share=mc.variance_share,
        inputs=record,
        monte_carlo=monte_carlo,
        assumptions=tuple(assumptions),
        flags=tuple(dict.fromkeys(flags)),
        warnings=tuple(messages),
    )


_MISSING_TEXT = {
    "grain_boundary": "no grain-size measurement given: the Hall–Petch grain-boundary term "
    "k·d^(−½) is missing, so the estimate is low for any real grain size",
    "particle": "no particle measurement given: precipitate / dispersion (Orowan) "
    "strengthening is not included",
}


def _terms(mean_intercept, particles, opt) -> tuple[list[str], list[str]]:
    """Terms the estimate includes and the usual ones it lacks (said in the output)."""
    included = ["sigma0"]
    missing: list[str] = []
    (included if mean_intercept is not None else missing).append("grain_boundary")
    (included if particles is not None else missing).append("particle")
    if opt.dislocation_density_per_m2 is not None:
        included.append("dislocation")
    return included, missing


def _constant_input(name: str, qty, *, positive: bool) -> UncertainInput:
    if qty.log_sd is not None:
        return UncertainInput(name, qty.value, qty.log_sd, qty.source, lognormal=True)
    return UncertainInput(name, qty.value, qty.sd, qty.source, positive=positive)


def material_with_fit(material: Material, fit_doc: dict) -> Material:
    """The material with σ₀, k, their correlation, convention and range of a fit document."""
    from dataclasses import replace

    from .materials import Quantity

    if not isinstance(fit_doc, dict) or fit_doc.get("schema") != "sectio/hall-petch-fit@1":
        raise OptionError(
            "The Hall–Petch fit must be a sectio/hall-petch-fit@1 document "
            "(hall_petch_fit.json written by sectio fit-hall-petch)."
        )
    try:
        s0, k = fit_doc["sigma0_mpa"], fit_doc["k_mpa_sqrt_m"]
        (vaa, vab), (_, vbb) = fit_doc["covariance"]
        lo, hi = fit_doc["grain_size_range_um"]
        convention = fit_doc["grain_size_convention"]
        hp.get_convention(convention)
        source = f"Hall–Petch fit ({fit_doc['method']}, n = {fit_doc['n']})"
        rho = vab / math.sqrt(vaa * vbb) if vaa > 0 and vbb > 0 else 0.0
        return replace(
            material,
            sigma0_mpa=Quantity(float(s0["value"]), math.sqrt(vaa), source),
            k_mpa_sqrt_m=Quantity(float(k["value"]), math.sqrt(vbb), source),
            sigma0_k_correlation=float(rho),
            sigma0_k_correlation_source=f"covariance of the {source}",
            grain_size_convention=convention,
            grain_size_range_um=(float(lo), float(hi)),
            grain_size_range_source=f"grain sizes of the {source}",
            origin=f"{material.origin}; σ0, k from a fit",
        )
    except (KeyError, TypeError, ValueError) as exc:
        raise OptionError(
            f"The Hall–Petch fit document lacks a usable value ({exc}); re-create it with "
            "sectio fit-hall-petch."
        ) from None


def estimate_from_summaries(
    grains_summary: dict | None,
    particles_summary: dict | None,
    *,
    material: str | Material,
    materials_file: str | Path | None = None,
    seed: int = 0,
    draws: int = DEFAULT_DRAWS,
    **options,
) -> YieldEstimate:
    """Yield estimate from the ``"summary"`` dicts of grains.json and particles.json.

    Parameters
    ----------
    grains_summary : dict or None
        ``grains.json["summary"]`` (needs ``mean_intercept_um`` and its se or CI).
    particles_summary : dict or None
        ``particles.json["summary"]`` (needs ``area_fraction``, ``mean_ecd_um`` and, for the
        planar spacings, ``particles_per_um2``).
    material : str or Material
        Name of a shipped material or one from ``materials_file``.
    materials_file : path, optional
        User TOML file of extra materials.
    seed, draws : int
        Monte Carlo seed and number of draws.
    **options
        Fields of :class:`StrengthOptions` (e.g. ``orowan_form="ashby_orowan"``,
        ``superposition="power", exponent=1.8``).

    Examples
    --------
    >>> est = estimate_from_summaries(
    ...     {"n_fields": 10, "mean_intercept_um": 20.0, "mean_intercept_se_um": 0.5},
    ...     None, material="steel-ferritic-lowc", draws=2000)
    >>> 150 < est.median_mpa < 250
    True
    """
    mat = get_material(material, materials_file)
    opt = StrengthOptions.from_kwargs(**options)
    if opt.hall_petch_fit is not None:
        mat = material_with_fit(mat, opt.hall_petch_fit)
    intercept = grain_intercept_um(grains_summary) if grains_summary is not None else None
    parts = particle_measurements(particles_summary) if particles_summary is not None else None
    return predict_yield(
        mat, mean_intercept=intercept, particles=parts, options=opt, seed=seed, draws=draws
    )
