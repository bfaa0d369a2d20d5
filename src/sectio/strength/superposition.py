"""Superposing strengthening contributions: linear, root-sum-square, or a general power.

σ^q = Σ σ_i^q with q = 1 (linear sum; Pickering 1978, Gladman 1997), q = 2 (root-sum-square;
Koppenaal & Kuhlmann-Wilsdorf 1964, Kocks, Argon & Ashby 1975) or any q in [1, 2]
(Lagerpusch, Mohles & Nembach measured q ≈ 1.8 for solid solution + dispersion).
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from ..errors import OptionError

SUPERPOSITION_RULES = ("linear", "rss", "power")


def superposition_exponent(rule: str, exponent: float | None = None) -> float:
    """The exponent q of a superposition rule (``linear`` 1, ``rss`` 2, ``power`` given)."""
    if rule == "linear":
        return 1.0
    if rule == "rss":
        return 2.0
    if rule == "power":
        if exponent is None:
            raise OptionError("The power superposition needs --exponent, e.g. --exponent 1.8.")
        q = float(exponent)
        if not 1.0 <= q <= 2.0:
            raise OptionError(
                f"--exponent must lie between 1 (linear) and 2 (root-sum-square), got {exponent!r}."
            )
        return q
    raise OptionError(f"Unknown superposition rule {rule!r}; choose one of: linear, rss, power.")


def superpose(
    contributions: Mapping[str, object] | list,
    *,
    rule: str = "linear",
    exponent: float | None = None,
):
    """Combine strengthening contributions (MPa) by σ = (Σ σ_i^q)^(1/q).

    Parameters
    ----------
    contributions : mapping of name to float or ndarray, or a sequence
        Individual contributions in MPa; arrays broadcast (Monte Carlo draws).
    rule : {"linear", "rss", "power"}
        The superposition rule.
    exponent : float, optional
        q for ``rule="power"``, 1 ≤ q ≤ 2.

    Returns
    -------
    float or ndarray
        The combined stress in MPa.

    Examples
    --------
    >>> round(superpose([100.0, 100.0], rule="power", exponent=1.8), 1)
    147.0
    """
    q = superposition_exponent(rule, exponent)
    values = (
        list(contributions.values()) if isinstance(contributions, Mapping) else list(contributions)
    )
    if not values:
        return 0.0
    arrays = [np.asarray(v, dtype=float) for v in values]
    if q == 1.0:
        total = sum(arrays)
    else:
        # Contributions are non-negative by construction; clip rare negative MC draws to 0.
        total = sum(np.maximum(a, 0.0) ** q for a in arrays) ** (1.0 / q)
    return float(total) if np.ndim(total) == 0 else total
