"""Range and finiteness checks of user-typed numbers, one sentence each.

Every option and study key that takes a number goes through :func:`check_number` at the
edge, so that ``nan``, ``inf``, ``-1`` or ``1e9`` never reach a computation: the message
names the option (or key), echoes the value and gives the allowed range.
"""

from __future__ import annotations

import math
import numbers

from .errors import OptionError

__all__ = ["RANGES", "check_number", "check_options"]

#: Allowed ranges, inclusive: name -> (low, high, integer). Names are the keyword names
#: of the library (the CLI and the study file both map onto them).
RANGES: dict[str, tuple[float, float, bool]] = {
    # grains
    "line_spacing_px": (1, 1000, True),
    "subregions": (2, 20, True),
    "gap_px": (0.0, 50.0, False),
    "ridge_scale_px": (0.5, 20.0, False),
    "threshold_high": (0.0, 1e6, False),
    "threshold_low": (0.0, 1e6, False),
    "crop_bottom": (0, 100_000, True),
    # particles
    "threshold": (0.0, 1.0, False),
    "points_per_side": (2, 1000, True),
    "n_classes": (2, 200, True),
    # Monte Carlo, bootstrap, seeds
    "seed": (0, 2**63 - 1, True),
    "draws": (1000, 1_000_000, True),
    "bootstrap": (0, 100_000, True),
    # strength model constants
    "exponent": (1.0, 2.0, False),
    "taylor_alpha": (0.01, 2.0, False),
    "shearing_size_nm": (0.0, 1e5, False),
    # trial variable of a study (any finite number)
    "trial_value": (-1e12, 1e12, False),
    # synthetic images
    "grains": (1, 200_000, True),
    "size_px": (16, 20_000, True),
}


def _fmt(v) -> str:
    if isinstance(v, float) and v.is_integer() and abs(v) < 1e15:
        return str(int(v))
    return f"{v:g}" if isinstance(v, float) else str(v)


def check_number(value, *, what: str, name: str | None = None, low=None, high=None,
                 integer: bool | None = None, open_low: bool = False):
    """``value`` as an int or float inside its range, or an :class:`OptionError`.

    ``name`` looks the range up in :data:`RANGES`; ``low``/``high``/``integer`` override it.
    ``what`` is how the user wrote it (``--gap``, ``grains.gap_px``).
    """
    if name is not None:
        lo0, hi0, int0 = RANGES[name]
        low = lo0 if low is None else low
        high = hi0 if high is None else high
        integer = int0 if integer is None else integer
    shown = repr(value) if isinstance(value, str) else str(value)
    if len(shown) > 40:
        shown = shown[:37] + "..."
    rng = (f"{'(' if open_low else '['}{_fmt(low)}, {_fmt(high)}]" if low is not None
           and high is not None else "")
    kind = "a whole number" if integer else "a number"
    if isinstance(value, bool) or not isinstance(value, (numbers.Real, str)):
        raise OptionError(f"{what} {shown} is not {kind}; give {kind} in {rng}.")
    try:
        v = float(value) if not isinstance(value, numbers.Integral) else int(value)
    except (TypeError, ValueError, OverflowError):
        raise OptionError(f"{what} {shown} is not {kind}; give {kind} in {rng}.") from None
    if isinstance(v, float) and not math.isfinite(v):
        raise OptionError(f"{what} {shown} is not a finite number; give {kind} in {rng}.")
    if integer:
        if isinstance(v, float):
            if not v.is_integer():
                raise OptionError(f"{what} {shown} is not a whole number; give one in {rng}.")
            v = int(v)
    else:
        v = float(v)
    too_low = low is not None and (v <= low if open_low else v < low)
    if too_low or (high is not None and v > high):
        raise OptionError(f"{what} {shown} is outside the allowed range {rng}; give {kind} "
                          "in that range.")
    return v


def check_options(options: dict, *, prefix: str = "--", dash: bool = True) -> dict:
    """Check every key of ``options`` that has a range in :data:`RANGES` (``None`` kept)."""
    out = dict(options)
    for k, v in options.items():
        if k in RANGES and v is not None:
            shown = prefix + (k.replace("_px", "").replace("_", "-") if dash else k)
            out[k] = check_number(v, what=shown, name=k)
    return out
