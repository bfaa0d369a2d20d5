"""The names a user chooses among for a strength estimate (command line and study files).

Each tuple is built from the table of the models it names, so a new form, spacing or
convention becomes a choice everywhere at once. The first entry of ``OROWAN_CHOICES``,
``SUPERPOSITION_CHOICES`` and ``SCOPE_CHOICES`` is the default.
"""

from __future__ import annotations

from .estimate import SCOPES
from .hall_petch import GRAIN_SIZE_CONVENTIONS
from .measured import GRAIN_SIZE_MEASURES
from .orowan import OROWAN_FORMS
from .spacing import SPACING_FORMULAS
from .superposition import SUPERPOSITION_RULES

__all__ = [
    "CONVENTION_CHOICES",
    "GRAIN_SIZE_MEASURE_CHOICES",
    "OROWAN_CHOICES",
    "SCOPE_CHOICES",
    "SPACING_CHOICES",
    "SUPERPOSITION_CHOICES",
]

OROWAN_CHOICES: tuple[str, ...] = tuple(OROWAN_FORMS)
SPACING_CHOICES: tuple[str, ...] = tuple(SPACING_FORMULAS)
CONVENTION_CHOICES: tuple[str, ...] = tuple(GRAIN_SIZE_CONVENTIONS)
SUPERPOSITION_CHOICES: tuple[str, ...] = tuple(SUPERPOSITION_RULES)
SCOPE_CHOICES: tuple[str, ...] = tuple(SCOPES)
GRAIN_SIZE_MEASURE_CHOICES: tuple[str, ...] = tuple(GRAIN_SIZE_MEASURES)
