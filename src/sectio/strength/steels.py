"""Composition-based yield regressions for ferrite–pearlite steels (Pickering type).

Both relations take compositions in wt %, grain size and pearlite spacing in **mm** (as
published) and return MPa. The coefficients are recalled, not looked up (REFERENCES §4.4,
"from memory"); treat the results as indicative.

References
----------
.. [1] F. B. Pickering, *Physical Metallurgy and the Design of Steels*, Applied Science, 1978
       (after Pickering & Gladman 1963).
.. [2] T. Gladman, I. D. McIvor, F. B. Pickering, J. Iron Steel Inst. 210 (1972) 916.
"""

from __future__ import annotations

import math

from ..errors import OptionError


def _positive(name: str, value: float) -> None:
    if not value > 0:
        raise OptionError(f"{name} must be positive, got {value!r}.")


def pickering_ferrite_yield_mpa(
    *, mn_wt: float, si_wt: float, free_n_wt: float, grain_size_mm: float
) -> float:
    """Yield stress of a ferritic (low-pearlite) steel after Pickering [1]_.

    σ_y = 53.9 + 32.3·Mn + 83.2·Si + 354·N_f^½ + 17.4·d^(−½), d = mean lineal intercept
    in mm.

    Examples
    --------
    >>> round(pickering_ferrite_yield_mpa(mn_wt=1.0, si_wt=0.25, free_n_wt=0.005,
    ...                                   grain_size_mm=0.010), 1)
    306.0
    """
    _positive("grain_size_mm", grain_size_mm)
    return (
        53.9
        + 32.3 * mn_wt
        + 83.2 * si_wt
        + 354.0 * math.sqrt(free_n_wt)
        + 17.4 / math.sqrt(grain_size_mm)
    )


def gladman_ferrite_pearlite_yield_mpa(
    *,
    ferrite_fraction: float,
    mn_wt: float,
    si_wt: float,
    free_n_wt: float,
    grain_size_mm: float,
    pearlite_spacing_mm: float,
) -> float:
    """Yield stress of a ferrite–pearlite steel after Gladman, McIvor and Pickering [2]_.

    σ_y = f^⅓·(35 + 58·Mn + 17.4·d^(−½)) + (1 − f^⅓)·(178 + 3.8·S₀^(−½)) + 63·Si + 425·N_f^½,
    f the ferrite fraction, S₀ the pearlite interlamellar spacing (mm).

    Examples
    --------
    >>> round(gladman_ferrite_pearlite_yield_mpa(ferrite_fraction=0.8, mn_wt=1.0, si_wt=0.25,
    ...       free_n_wt=0.005, grain_size_mm=0.010, pearlite_spacing_mm=0.0002), 1)
    325.7
    """
    if not 0.0 <= ferrite_fraction <= 1.0:
        raise OptionError(f"ferrite_fraction must lie in [0, 1], got {ferrite_fraction!r}.")
    _positive("grain_size_mm", grain_size_mm)
    _positive("pearlite_spacing_mm", pearlite_spacing_mm)
    f3 = ferrite_fraction ** (1.0 / 3.0)
    return (
        f3 * (35.0 + 58.0 * mn_wt + 17.4 / math.sqrt(grain_size_mm))
        + (1.0 - f3) * (178.0 + 3.8 / math.sqrt(pearlite_spacing_mm))
        + 63.0 * si_wt
        + 425.0 * math.sqrt(free_n_wt)
    )
