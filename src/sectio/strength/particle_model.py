"""From measured particle quantities to an Orowan stress: geometry, spacing and form.

Two geometries:

``planar`` (spacings ``planar_edge``, ``planar_centre``)
    use the measured sections per unit area N_A and mean section diameter d̄ directly;
    the mean planar radius is d̄/2 and the particle size X of the Ashby forms is d̄.
``spheres`` (spacings ``spheres_edge_rms``, ``spheres_edge_mean``, ``spheres_centre``)
    treat particles as spheres of radius r with volume fraction f = A_A (Delesse). r comes
    from the unfolded mean sphere diameter when the summary has one, otherwise from the mean
    section diameter of monosize spheres, d̄ = (π/4)·D (Wicksell). The mean planar radius
    is √(2/3)·r (rms, as in the line-tension form of REFERENCES §5.2) and X = (π/4)·2r.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from ..errors import OptionError
from . import orowan as ow
from . import spacing as sp
from .materials import Material
from .measured import ParticleMeasurements, SummaryError
from .montecarlo import UncertainInput


@dataclass(frozen=True)
class OrowanSetup:
    """Uncertain inputs, the vectorised stress function and the record of one Orowan term."""

    inputs: list[UncertainInput]
    stress_mpa: Callable[[dict], np.ndarray]
    record: dict
    flags: list[str]
    messages: list[str]


def _input(name: str, m, source_note: str = "") -> UncertainInput:
    return UncertainInput(name, m.value, m.se, m.source + source_note, dof=m.dof)


def setup_orowan(
    material: Material,
    particles: ParticleMeasurements,
    *,
    form: str,
    spacing: str | None,
    shearing_diameter_nm: float | None,
) -> OrowanSetup:
    """Choose geometry and spacing, check the central values, and build the stress function."""
    if form not in ow.OROWAN_FORMS:
        raise OptionError(
            f"Unknown Orowan form {form!r}; choose one of: {', '.join(ow.OROWAN_FORMS)}."
        )
    if spacing is None:
        spacing = "planar_edge" if particles.sections_per_nm2 is not None else "spheres_edge_rms"
    if spacing not in sp.SPACING_FORMULAS:
        raise OptionError(
            f"Unknown particle spacing {spacing!r}; choose one of: "
            f"{', '.join(sp.SPACING_FORMULAS)}."
        )
    planar = spacing.startswith("planar")
    if planar and particles.sections_per_nm2 is None:
        raise SummaryError(
            "The particles summary has no 'particles_per_um2', which the planar "
            "spacing needs; add it or choose --spacing spheres_edge_rms."
        )
    inputs = [
        _input(
            "area_fraction", particles.area_fraction, " (volume fraction = area fraction, Delesse)"
        ),
        _input("mean_section_diameter_nm", particles.mean_section_diameter_nm),
    ]
    sphere_from_unfolding = particles.sphere_diameter_nm is not None and not planar
    if planar:
        inputs.append(_input("sections_per_nm2", particles.sections_per_nm2))
        size_note = "X = mean section diameter; planar radius = mean section diameter / 2"
    elif sphere_from_unfolding:
        inputs.append(_input("sphere_diameter_nm", particles.sphere_diameter_nm))
        size_note = "r = unfolded mean sphere diameter / 2; planar radius = √(2/3)·r; X = (π/4)·2r"
    else:
        size_note = (
            "r = (2/π)·mean section diameter (monosize spheres, Wicksell); planar "
            "radius = √(2/3)·r; X = (π/4)·2r"
        )
    b = material.burgers_nm.value
    nu = material.poisson_ratio.value

    def geometry(v):
        f = v["area_fraction"]
        if planar:
            d = v["mean_section_diameter_nm"]
            n_a = v["sections_per_nm2"]
            lam = (
                sp.edge_spacing_planar_nm(n_a, d)
                if spacing == "planar_edge"
                else sp.centre_spacing_planar_nm(n_a)
            )
            return f, d, d / 2.0, lam
        r = (
            v["sphere_diameter_nm"] / 2.0
            if sphere_from_unfolding
            else v["mean_section_diameter_nm"] * 2.0 / math.pi
        )
        fn = {
            "spheres_edge_rms": sp.edge_spacing_spheres_rms_nm,
            "spheres_edge_mean": sp.edge_spacing_spheres_mean_nm,
            "spheres_centre": sp.centre_spacing_spheres_nm,
        }[spacing]
        return f, (math.pi / 2.0) * r, math.sqrt(2.0 / 3.0) * r, fn(r, f)

    def stress(v):
        f, x, r_planar, lam = geometry(v)
        lam = np.where(np.asarray(lam) > 0, lam, np.nan)
        if form == "classic":
            return ow.orowan_classic_mpa(
                taylor_factor=v["taylor_factor"],
                shear_modulus_gpa=v["shear_modulus_gpa"],
                burgers_nm=b,
                spacing_nm=lam,
            )
        if form == "line_tension":
            return ow.orowan_line_tension_mpa(
                taylor_factor=v["taylor_factor"],
                shear_modulus_gpa=v["shear_modulus_gpa"],
                burgers_nm=b,
                poisson_ratio=nu,
                planar_radius_nm=r_planar,
                spacing_nm=lam,
            )
        if form == "ashby_orowan":
            return ow.orowan_ashby_mpa(
                volume_fraction=f,
                particle_diameter_nm=x,
                shear_modulus_gpa=v["shear_modulus_gpa"],
                burgers_nm=b,
            )
        return ow.orowan_ashby_gladman_mpa(volume_fraction=f, particle_diameter_nm=x)

    central = {i.name: i.value for i in inputs}
    f0, x0, r0, lam0 = (float(np.asarray(a)) for a in geometry(central))
    uses_spacing = form in ("classic", "line_tension")
    if uses_spacing and lam0 <= 0:
        raise OptionError(
            f"The measured particles give a non-positive edge-to-edge spacing ({lam0:.3g} nm): "
            "sections overlap at this density and size; use --spacing planar_centre."
        )
    flags: list[str] = []
    messages: list[str] = []
    shear_nm = (
        material.shearing_diameter_nm
        if shearing_diameter_nm is None
        else float(shearing_diameter_nm)
    )
    particle_d = 2.0 * r0 if not planar else x0
    if particle_d < shear_nm:
        flags.append("particles_may_be_sheared")
        messages.append(
            f"Particle diameter {particle_d:.3g} nm is below the shearing size {shear_nm:g} nm "
            f"of {material.name}: such particles are usually cut, not bypassed, and the Orowan "
            "term then over-predicts."
        )
    if form == "ashby_orowan_gladman" and material.structure != "bcc":
        flags.append("steel_constants_on_other_material")
        messages.append(
            "The 5.9·√f/x Ashby–Orowan version carries ferrite's G and b; it is meant for "
            f"microalloyed steels, not {material.name}."
        )
    record = {
        "form": form,
        "formula": ow.OROWAN_FORMS[form],
        "geometry": "planar" if planar else "spheres",
        "spacing": spacing if uses_spacing else None,
        "spacing_formula": sp.SPACING_FORMULAS[spacing] if uses_spacing else None,
        "spacing_nm": lam0 if uses_spacing else None,
        "particle_size_note": size_note,
        "particle_diameter_nm": x0,
        "planar_radius_nm": r0,
        "volume_fraction": f0,
        "volume_fraction_source": "measured area fraction (Delesse: V_V = A_A)",
        "measured": particles.to_dict(),
        "taylor_factor": material.taylor_factor.to_dict(),
        "shear_modulus_gpa": material.shear_modulus_gpa.to_dict(),
        "burgers_nm": material.burgers_nm.to_dict(),
        "poisson_ratio": material.poisson_ratio.to_dict(),
        "shearing_diameter_nm": shear_nm,
        "shearing_diameter_source": (
            material.shearing_diameter_source if shearing_diameter_nm is None else "user option"
        ),
        "flags": flags,
    }
    return OrowanSetup(inputs, stress, record, flags, messages)
