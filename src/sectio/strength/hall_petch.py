"""Hall–Petch grain-boundary strengthening with an explicit grain-size convention.

σ_y = σ₀ + k·d^(−½) (Hall 1951; Petch 1953). A Hall–Petch slope k only means something
together with the definition of d it was fitted with. This module names those definitions
("conventions"), converts a measured mean lineal intercept into any of them, and converts k
between them so that the predicted stress does not depend on the bookkeeping.

References
----------
.. [1] E. O. Hall, Proc. Phys. Soc. B 64 (1951) 747.
.. [2] N. J. Petch, J. Iron Steel Inst. 174 (1953) 25.
.. [3] A. Gerlt et al., Metall. Mater. Trans. A (2018): D = 1.5·ℓ̄ for equal spheres.
.. [4] M. I. Mendelson, J. Am. Ceram. Soc. 52 (1969) 443: D = 1.56·ℓ̄.
.. [5] S. Naik, S. Walley, J. Mater. Sci. 55 (2020) 2661: breakdown below ~1 µm / 100 nm.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np

from ..errors import ExtrapolationWarning, OptionError


@dataclass(frozen=True)
class GrainSizeConvention:
    """One definition of "grain size d" as a multiple of the mean lineal intercept ℓ̄."""

    name: str
    factor_to_intercept: float  # d = factor · ℓ̄
    description: str
    source: str


GRAIN_SIZE_CONVENTIONS: dict[str, GrainSizeConvention] = {
    c.name: c
    for c in (
        GrainSizeConvention(
            "mean_lineal_intercept",
            1.0,
            "mean lineal intercept ℓ̄ (ASTM E112 / ISO 643), used directly",
            "identity; ℓ̄ is what Pickering and Gladman used for ferrite (common practice)",
        ),
        GrainSizeConvention(
            "sphere_diameter",
            1.5,
            "3D diameter of equal-sized spheres, D = 1.5·ℓ̄",
            "Gerlt et al. 2018, Metall. Mater. Trans. A (exact for monosize spheres)",
        ),
        GrainSizeConvention(
            "mendelson_diameter",
            1.56,
            "mean 3D diameter of space-filling grains with log-normal sizes, D = 1.56·ℓ̄",
            "Mendelson 1969, J. Am. Ceram. Soc. 52:443 (factor from memory)",
        ),
        GrainSizeConvention(
            "truncated_octahedron_diameter",
            1.648,
            "volume-equivalent sphere diameter of a truncated octahedron, D = 1.648·ℓ̄",
            "geometry: 4V/S = 1.690a, D_eq = 2.785a (derived)",
        ),
        GrainSizeConvention(
            "section_ecd_hexagons",
            1.337,
            "equivalent-circle diameter of the mean section area, hexagonal sections",
            "geometry of a hexagonal tessellation (derived)",
        ),
        GrainSizeConvention(
            "astm_sqrt_mean_area",
            1.1225,
            "square root of the mean section area √Ā, ASTM E112 tables",
            "ASTM E112 grain-size relations (derived)",
        ),
    )
}

# Units of k: 1 MPa·m^½ = 1000^½ MPa·mm^½ = 1000 MPa·µm^½ (REFERENCES §4.1, derived).
_K_UNIT_TO_MPA_SQRT_M = {
    "mpa_sqrt_m": 1.0,
    "mpa_sqrt_mm": 1.0 / math.sqrt(1e3),
    "mpa_sqrt_um": 1.0 / math.sqrt(1e6),
}

ULTRAFINE_LIMIT_UM = 1.0
NANOCRYSTALLINE_LIMIT_UM = 0.1


def get_convention(name: str) -> GrainSizeConvention:
    """Look up a grain-size convention by name; raise OptionError naming the choices."""
    try:
        return GRAIN_SIZE_CONVENTIONS[name]
    except KeyError:
        choices = ", ".join(sorted(GRAIN_SIZE_CONVENTIONS))
        raise OptionError(
            f"Unknown grain-size convention {name!r}; choose one of: {choices}."
        ) from None


def hall_petch_mpa(grain_size_um, *, sigma0_mpa, k_mpa_sqrt_m):
    """Hall–Petch yield stress σ₀ + k·d^(−½) in MPa.

    Parameters
    ----------
    grain_size_um : float or ndarray
        Grain size d in µm, in the convention k was fitted with.
    sigma0_mpa : float or ndarray
        Friction stress σ₀ (MPa).
    k_mpa_sqrt_m : float or ndarray
        Hall–Petch slope k (MPa·m^½).

    Returns
    -------
    float or ndarray
        σ_y in MPa (broadcast over the inputs).

    References
    ----------
    .. [1] Hall 1951; Petch 1953.

    Examples
    --------
    >>> round(hall_petch_mpa(20.0, sigma0_mpa=70.0, k_mpa_sqrt_m=0.74), 1)
    235.5
    """
    return sigma0_mpa + grain_boundary_term_mpa(grain_size_um, k_mpa_sqrt_m=k_mpa_sqrt_m)


def grain_boundary_term_mpa(grain_size_um, *, k_mpa_sqrt_m):
    """The grain-boundary term k·d^(−½) in MPa, d in µm and k in MPa·m^½."""
    d_m = np.asarray(grain_size_um, dtype=float) * 1e-6
    out = k_mpa_sqrt_m / np.sqrt(d_m)
    return float(out) if np.ndim(out) == 0 else out


def convert_k_units(value: float, from_unit: str, to_unit: str) -> float:
    """Convert a Hall–Petch slope between MPa·m^½, MPa·mm^½ and MPa·µm^½.

    Units are named ``mpa_sqrt_m``, ``mpa_sqrt_mm`` and ``mpa_sqrt_um``.

    Examples
    --------
    >>> round(convert_k_units(0.74, "mpa_sqrt_m", "mpa_sqrt_mm"), 2)
    23.4
    """
    for unit in (from_unit, to_unit):
        if unit not in _K_UNIT_TO_MPA_SQRT_M:
            raise OptionError(
                f"Unknown Hall–Petch slope unit {unit!r}; "
                "use mpa_sqrt_m, mpa_sqrt_mm or mpa_sqrt_um."
            )
    return value * _K_UNIT_TO_MPA_SQRT_M[from_unit] / _K_UNIT_TO_MPA_SQRT_M[to_unit]


def intercept_to_grain_size_um(mean_intercept_um, convention: str):
    """Grain size d in ``convention`` from a measured mean lineal intercept ℓ̄ (µm)."""
    return get_convention(convention).factor_to_intercept * mean_intercept_um


def convert_k_convention(k_mpa_sqrt_m, from_convention: str, to_convention: str):
    """Re-express a Hall–Petch slope fitted with one grain-size convention in another.

    With d_a = c_a·ℓ̄ and d_b = c_b·ℓ̄, k_a·d_a^(−½) = k_b·d_b^(−½) for every ℓ̄, so
    k_b = k_a·√(c_b / c_a). For c_a = 1.5 and c_b = 1 (intercept) the factor is 0.8165
    (REFERENCES §4.2).
    """
    return k_mpa_sqrt_m * convention_k_factor(from_convention, to_convention)


def convention_k_factor(from_convention: str, to_convention: str) -> float:
    """The factor √(c_to / c_from) that carries k from one convention to another."""
    c_from = get_convention(from_convention).factor_to_intercept
    c_to = get_convention(to_convention).factor_to_intercept
    return math.sqrt(c_to / c_from)


def grain_size_flags(
    grain_size_um: float,
    *,
    fitted_range_um: tuple[float, float] | None = None,
    allow_nanocrystalline: bool = False,
    emit: bool = True,
) -> list[str]:
    """Check a grain size against the calibration range and the breakdown of Hall–Petch.

    Below 0.1 µm Hall–Petch does not hold (nanocrystalline regime, Naik & Walley 2020);
    the value is refused unless ``allow_nanocrystalline`` is set. Below 1 µm (ultrafine
    grains) and outside ``fitted_range_um`` an :class:`ExtrapolationWarning` is emitted.

    Returns
    -------
    list of str
        Short flags recorded in the output (``"outside_fitted_range"``,
        ``"ultrafine_grains"``, ``"nanocrystalline"``).
    """
    flags: list[str] = []
    messages: list[str] = []
    d = float(grain_size_um)
    if d < NANOCRYSTALLINE_LIMIT_UM:
        if not allow_nanocrystalline:
            raise OptionError(
                f"Grain size {d:.4g} µm is below 0.1 µm, where Hall–Petch breaks down "
                "(nanocrystalline regime); pass --allow-nanocrystalline to compute anyway."
            )
        flags.append("nanocrystalline")
        messages.append(f"grain size {d:.4g} µm is below 0.1 µm: Hall–Petch is not valid here")
    elif d < ULTRAFINE_LIMIT_UM:
        flags.append("ultrafine_grains")
        messages.append(
            f"grain size {d:.4g} µm is below 1 µm: Hall–Petch constants from coarse grains "
            "extrapolate poorly into the ultrafine regime"
        )
    if fitted_range_um is not None:
        lo, hi = fitted_range_um
        if not lo <= d <= hi:
            flags.append("outside_fitted_range")
            messages.append(
                f"grain size {d:.4g} µm lies outside the range {lo:g}–{hi:g} µm the "
                "Hall–Petch constants were fitted on"
            )
    if emit:
        for message in messages:
            warnings.warn(
                message[0].upper() + message[1:] + ".", ExtrapolationWarning, stacklevel=3
            )
    return flags
