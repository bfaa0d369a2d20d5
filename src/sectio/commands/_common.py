"""Small pieces shared by the command modules (file names, number formatting)."""

from __future__ import annotations

from pathlib import Path


def overlay_name(path: str, used: set[str]) -> str:
    """A unique overlay file name for a field (``<stem>_overlay.png``, then ``_2``...)."""
    stem = Path(path).stem or "field"
    name, i = f"{stem}_overlay.png", 2
    while name in used:
        name, i = f"{stem}_{i}_overlay.png", i + 1
    used.add(name)
    return name


def fmt(value, spec: str) -> str:
    """Format a number for a printed table; ``-`` for a missing value."""
    return "-" if value is None else format(value, spec)
