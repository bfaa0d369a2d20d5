"""Physical quantities typed by people, converted once at the edge.

``parse_length_um("0.5um")`` -> 0.5; accepts m, mm, um/µm/μm/micron, nm, in (inch).
``parse_stress_mpa("45 ksi")`` -> 310.26...; accepts Pa, kPa, MPa, GPa, psi, ksi.
``parse_value_sd("50+-10 MPa", what="--friction")`` -> (50.0, 10.0).
"""

from __future__ import annotations

import math
import re
from typing import cast

from .errors import OptionError

_LENGTH_TO_UM = {
    "m": 1e6,
    "mm": 1e3,
    "um": 1.0,
    "µm": 1.0,  # micro sign U+00B5
    "μm": 1.0,  # Greek mu U+03BC
    "micron": 1.0,
    "microns": 1.0,
    "nm": 1e-3,
    "pm": 1e-6,
    "in": 25400.0,
    "inch": 25400.0,
}

# 1 psi = 6894.757 Pa (NIST SP 811, from memory); ksi = 1000 psi.
_STRESS_TO_MPA = {
    "pa": 1e-6,
    "kpa": 1e-3,
    "mpa": 1.0,
    "gpa": 1e3,
    "psi": 6.894757e-3,
    "ksi": 6.894757,
}

# Applied to stripped text of bounded length with fullmatch: one pass, no backtracking
# blow-up (the unit is "anything from the first non-digit on").
_NUMBER_UNIT = re.compile(r"([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*([^\d\s].*)?",
                          re.DOTALL)
#: Longest quantity read; anything longer is refused before parsing (keeps parsing linear).
MAX_QUANTITY_CHARS = 100
#: Smallest length read, in µm (1 attometre): keeps subnormal numbers such as 5e-324 out;
#: each use (pixel size, size floors) checks its own plausible range on top.
MIN_LENGTH_UM = 1e-12
#: Stresses sectio accepts, in MPa (magnitude): up to 1000 GPa.
STRESS_LIMIT_MPA = 1e6


def _shown(text) -> str:
    t = str(text)
    return repr(t if len(t) <= 40 else t[:37] + "...")


def _split(text: str, what: str, example: str) -> tuple[float, str | None]:
    t = str(text)
    if len(t) > MAX_QUANTITY_CHARS:
        raise OptionError(f"{what} {_shown(t)} is {len(t)} characters long; give a number "
                          f"with a unit, e.g. {example}.")
    m = _NUMBER_UNIT.fullmatch(t.strip())
    if not m:
        raise OptionError(
            f"Cannot read {what} {_shown(t)}; give a number with a unit, e.g. {example}."
        )
    value = float(m.group(1))
    if not math.isfinite(value):
        raise OptionError(f"{what} {_shown(t)} is not a finite number; give e.g. {example}.")
    return value, (m.group(2) or None)


def _finite_number(text, what: str, example: str) -> float:
    try:
        value = float(text)
    except (TypeError, ValueError, OverflowError):
        raise OptionError(f"Cannot read {what} {_shown(text)}; give e.g. {example}.") from None
    if not math.isfinite(value):
        raise OptionError(f"{what} {_shown(text)} is not a finite number; give e.g. {example}.")
    return value


def parse_length_um(
    text: str | float, *, what: str = "length", default_unit: str | None = None
) -> float:
    """Length in micrometres from text such as ``'0.5um'``, ``'500 nm'``, ``'0.0005mm'``."""
    if isinstance(text, bool):
        raise OptionError(f"{what} {text!r} is not a length; give e.g. 0.5um or 500nm.")
    if isinstance(text, (int, float)):
        value, unit = _finite_number(text, what, "0.5um or 500nm"), default_unit
    else:
        value, unit = _split(text, what, "0.5um or 500nm")
        unit = unit or default_unit
    if unit is None:
        raise OptionError(f"The {what} {text!r} has no unit; add one, e.g. {text}um or {text}nm.")
    key = unit.strip()
    factor = _LENGTH_TO_UM.get(key) or _LENGTH_TO_UM.get(key.lower())
    if factor is None:
        raise OptionError(
            f"Unknown length unit {unit!r} in {what} {text!r}; use nm, um (or µm), mm or m."
        )
    if not value > 0:
        raise OptionError(f"The {what} must be positive, got {_shown(text)}.")
    um = value * factor
    if not math.isfinite(um):
        raise OptionError(f"{what} {_shown(text)} is too large to be a length; check the "
                          "number and its unit.")
    if um < MIN_LENGTH_UM:
        raise OptionError(f"{what} {_shown(text)} is below the smallest length read "
                          "(1e-12 um); check the number and its unit.")
    return um


def parse_stress_mpa(text: str | float, *, what: str = "stress") -> float:
    """Stress in MPa from text such as ``'310 MPa'``, ``'45 ksi'``; a bare number is MPa."""
    if isinstance(text, (int, float)) and not isinstance(text, bool):
        value, factor = _finite_number(text, what, "310MPa or 45ksi"), 1.0
    else:
        value, unit = _split(cast(str, text), what, "310MPa or 45ksi")
        got = 1.0 if unit is None else _STRESS_TO_MPA.get(unit.strip().lower())
        if got is None:
            raise OptionError(
                f"Unknown stress unit {unit!r} in {what} {_shown(text)}; use MPa, GPa, psi or "
                "ksi."
            )
        factor = got
    mpa = value * factor
    if not abs(mpa) <= STRESS_LIMIT_MPA:
        raise OptionError(f"{what} {_shown(text)} is outside the allowed range -1000 GPa to "
                          "1000 GPa; check the number and its unit.")
    return mpa


def mpa_to_ksi(value_mpa: float) -> float:
    """MPa to ksi (1 ksi = 6.894757 MPa)."""
    return value_mpa / _STRESS_TO_MPA["ksi"]


def parse_value_sd(
    text: str | None, *, what: str, stress: bool = True
) -> tuple[float, float] | None:
    """``'50'``, ``'50MPa'``, ``'50+-10'`` or ``'50±10 ksi'`` -> (value, sd) or None.

    Stresses go through :func:`parse_stress_mpa` (a bare number is MPa); a unit written
    after the sd applies to the value too. With ``stress=False`` plain numbers are read.
    """
    if text is None:
        return None
    if len(str(text)) > 2 * MAX_QUANTITY_CHARS:
        raise OptionError(f"{what} {_shown(text)} is {len(str(text))} characters long; write "
                          "VALUE or VALUE+-SD, e.g. 50+-10.")
    parts = [p.strip() for p in str(text).replace("±", "+-").split("+-")]
    if len(parts) > 2 or not all(parts):
        raise OptionError(f"Cannot read {what} {_shown(text)}; write VALUE or VALUE+-SD, e.g. "
                          "50+-10.")
    if stress:
        unit = re.sub(r"^[\s\d.eE+-]+", "", parts[-1])
        if unit and not re.sub(r"^[\s\d.eE+-]+", "", parts[0]):
            parts[0] += unit
        values = [parse_stress_mpa(p, what=what) for p in parts]
    else:
        try:
            values = [float(p) for p in parts]
        except ValueError:
            raise OptionError(
                f"Cannot read {what} {text!r}; write a number or VALUE+-SD, e.g. 1e14+-2e13."
            ) from None
    if not all(math.isfinite(v) for v in values):
        raise OptionError(f"{what} {_shown(text)} is not a finite number; write VALUE or "
                          "VALUE+-SD, e.g. 1e14+-2e13.")
    if len(values) == 2 and values[1] < 0:
        raise OptionError(f"The uncertainty in {what} {text!r} must not be negative.")
    return (values[0], values[1] if len(values) == 2 else 0.0)
